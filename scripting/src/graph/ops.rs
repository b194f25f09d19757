//! Scalar semantics of every graph operation, shared by constant folding and the chunked
//! evaluator so both give the same bits, and chosen to match the script engine's own arithmetic
//! (rhai 1.27 in its default checked build; see `src/func/builtin.rs` and `src/packages/` there).

/// One-operand operations.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Un {
    /// `-a`
    Neg,
    /// `!a` on a boolean stored as 0/1.
    Not,
    /// `exp(a)`
    Exp,
    /// `ln(a)`
    Ln,
    /// `log(a)`: base 10, as in the script engine.
    Log10,
    /// `sqrt(a)`
    Sqrt,
    /// `abs(a)`
    Abs,
    /// `tanh(a)`
    Tanh,
    /// `floor(a)`
    Floor,
    /// `ceiling(a)` / `ceil(a)`
    Ceil,
    /// `sin(a)`
    Sin,
    /// `cos(a)`
    Cos,
    /// Sign (derivative of `abs`; not reachable from scripts).
    Signum,
    /// Truncation toward zero (derivative of `%`; not reachable from scripts).
    Trunc,
}

/// Two-operand operations. Comparisons and logic yield 1.0 (true) or 0.0 (false).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Bin {
    /// `a + b`
    Add,
    /// `a - b`
    Sub,
    /// `a * b`
    Mul,
    /// `a / b`
    Div,
    /// `a % b`
    Rem,
    /// `a ** b`, `pow(a, b)`: always `powf`, which is what the engine calls for float operands.
    Pow,
    /// `log(a, base)`
    LogBase,
    /// `min(a, b)`: `if a <= b { a } else { b }` exactly as the engine's.
    Min,
    /// `max(a, b)`: `if a >= b { a } else { b }`.
    Max,
    /// `a < b` with the engine's relative-epsilon float comparison.
    Lt,
    /// `a <= b` (epsilon).
    Le,
    /// `a > b` (epsilon).
    Gt,
    /// `a >= b` (epsilon).
    Ge,
    /// `a == b` (epsilon).
    Eq,
    /// `a != b` (epsilon).
    Ne,
    /// `a && b`
    And,
    /// `a || b`
    Or,
    /// Plain IEEE `a <= b` (derivatives of min; not reachable from scripts).
    RawLe,
    /// Plain IEEE `a >= b` (derivatives of max).
    RawGe,
}

impl Bin {
    /// Whether `op(a, b)` equals `op(b, a)` bit for bit (used to canonicalise operand order).
    pub fn commutes(self) -> bool {
        matches!(
            self,
            Bin::Add | Bin::Mul | Bin::Eq | Bin::Ne | Bin::And | Bin::Or
        )
    }
}

#[inline(always)]
fn b(v: bool) -> f64 {
    if v {
        1.0
    } else {
        0.0
    }
}

#[inline(always)]
fn scale(x: f64, y: f64) -> f64 {
    if x * y == 0.0 {
        1.0
    } else {
        x.abs().max(y.abs())
    }
}

/// Applies a one-operand operation.
#[inline(always)]
pub fn un(op: Un, a: f64) -> f64 {
    match op {
        Un::Neg => -a,
        Un::Not => b(a == 0.0),
        Un::Exp => a.exp(),
        Un::Ln => a.ln(),
        Un::Log10 => a.log10(),
        Un::Sqrt => a.sqrt(),
        Un::Abs => a.abs(),
        Un::Tanh => a.tanh(),
        Un::Floor => a.floor(),
        Un::Ceil => a.ceil(),
        Un::Sin => a.sin(),
        Un::Cos => a.cos(),
        Un::Signum => a.signum(),
        Un::Trunc => a.trunc(),
    }
}

/// Applies a two-operand operation.
#[inline(always)]
pub fn bin(op: Bin, x: f64, y: f64) -> f64 {
    const EPS: f64 = f64::EPSILON;
    match op {
        Bin::Add => x + y,
        Bin::Sub => x - y,
        Bin::Mul => x * y,
        Bin::Div => x / y,
        Bin::Rem => x % y,
        Bin::Pow => x.powf(y),
        Bin::LogBase => x.log(y),
        Bin::Min => {
            if x <= y {
                x
            } else {
                y
            }
        }
        Bin::Max => {
            if x >= y {
                x
            } else {
                y
            }
        }
        // The engine compares floats relative to the larger magnitude, with a guard for zero.
        Bin::Gt => {
            let m = scale(x, y);
            b(m != 0.0 && (x - y) / m > EPS)
        }
        Bin::Ge => {
            let m = scale(x, y);
            b(m == 0.0 || (x - y) / m > -EPS)
        }
        Bin::Lt => {
            let m = scale(x, y);
            b(m != 0.0 && (y - x) / m > EPS)
        }
        Bin::Le => {
            let m = scale(x, y);
            b(m == 0.0 || (y - x) / m > -EPS)
        }
        Bin::Eq => {
            let m = scale(x, y);
            b(m == 0.0 || (x - y).abs() / m <= EPS)
        }
        Bin::Ne => {
            let m = scale(x, y);
            b(m != 0.0 && (x - y).abs() / m > EPS)
        }
        Bin::And => b(x != 0.0 && y != 0.0),
        Bin::Or => b(x != 0.0 || y != 0.0),
        Bin::RawLe => b(x <= y),
        Bin::RawGe => b(x >= y),
    }
}

/// Applies a selection: `c` is a boolean stored as 0/1.
#[inline(always)]
pub fn select(c: f64, a: f64, b: f64) -> f64 {
    if c != 0.0 {
        a
    } else {
        b
    }
}
