//! Property test: random model files built from the numeric subset of the language, compiled and
//! compared with the script engine's own evaluation (values bit for bit) and with finite
//! differences (partial derivatives).
//!
//! References: the values oracle is the `rhai` crate's interpreter itself (version 1.27.0 from
//! crates.io, the reference implementation of the language); derivatives are checked with
//! central differences, whose O(h²) error bounds the tolerance (common practice).
//!
//! The generator is typed the way the engine types values: float expressions (species,
//! parameters, float literals, anything mixed with a float), integer expressions (literals and
//! `let`-bound integers only, so always compile-time constants, with checked arithmetic kept
//! inside its domain at render time) and booleans (comparisons, `!`, `&&`, `||`). A generated
//! script is always valid for the loader and must compile; a refusal is a failure.
//!
//! Cases come from a fixed seed so a failure reproduces; set `RANDOM_EXPRESSIONS_SEED` to a
//! number to explore other cases, and `PROPTEST_CASES` to change the case count. A failure
//! prints the shrunk model file.

use std::fmt;

use agarium_core::kernel::{BatchKernel, KernelInput, Scratch};
use agarium_scripting::{Model, Overrides};
use proptest::prelude::*;
use proptest::test_runner::{Config, RngAlgorithm, TestError, TestRng, TestRunner};

const SPECIES: [&str; 4] = ["u", "v", "w", "c"];
const PARAMS: [&str; 3] = ["p", "q", "r"];
/// Extra names a function term may read besides species and parameters.
const SPACE_TIME: [&str; 3] = ["x", "y", "t"];
/// Time at which every term is evaluated.
const T: f64 = 0.75;
/// States per case.
const STATES: usize = 256;

// ----------------------------------------------------------------------------------------------
// The grammar.

/// Float binary operators (`%` is [`F::Rem`]).
#[derive(Clone, Copy, Debug)]
enum FOp {
    Add,
    Sub,
    Mul,
    Div,
    Pow,
}

impl FOp {
    fn sym(self) -> &'static str {
        match self {
            FOp::Add => "+",
            FOp::Sub => "-",
            FOp::Mul => "*",
            FOp::Div => "/",
            FOp::Pow => "**",
        }
    }
}

/// Integer binary operators, with the engine's checked semantics.
#[derive(Clone, Copy, Debug)]
enum IOp {
    Add,
    Sub,
    Mul,
    Div,
    Rem,
    Pow,
}

/// Comparisons.
#[derive(Clone, Copy, Debug)]
enum COp {
    Lt,
    Le,
    Gt,
    Ge,
    Eq,
    Ne,
}

impl COp {
    fn sym(self) -> &'static str {
        match self {
            COp::Lt => "<",
            COp::Le => "<=",
            COp::Gt => ">",
            COp::Ge => ">=",
            COp::Eq => "==",
            COp::Ne => "!=",
        }
    }
}

/// One-argument math functions (all take floats only).
#[derive(Clone, Copy, Debug)]
enum Fun1 {
    Exp,
    Ln,
    Log,
    Sqrt,
    Abs,
    Tanh,
    Floor,
    Ceil,
    Ceiling,
    Sin,
    Cos,
}

impl Fun1 {
    fn name(self) -> &'static str {
        match self {
            Fun1::Exp => "exp",
            Fun1::Ln => "ln",
            Fun1::Log => "log",
            Fun1::Sqrt => "sqrt",
            Fun1::Abs => "abs",
            Fun1::Tanh => "tanh",
            Fun1::Floor => "floor",
            Fun1::Ceil => "ceil",
            Fun1::Ceiling => "ceiling",
            Fun1::Sin => "sin",
            Fun1::Cos => "cos",
        }
    }
}

/// Two-argument math functions.
#[derive(Clone, Copy, Debug)]
enum Fun2 {
    Pow,
    Min,
    Max,
    LogBase,
}

impl Fun2 {
    fn name(self) -> &'static str {
        match self {
            Fun2::Pow => "pow",
            Fun2::Min => "min",
            Fun2::Max => "max",
            Fun2::LogBase => "log",
        }
    }
}

/// Divisors of `%` on floats: float and integer literals bounded away from zero (see
/// [`clamped`]).
const REM_DIVISORS: [&str; 7] = ["0.5", "1.5", "2.0", "3.0", "2", "3", "5"];

/// Wraps the argument of a step function (`floor`, `ceil`, the left operand of `%`) into
/// [-1000, 1000]. Unbounded, a step function of a large argument has steps below float
/// resolution (`floor(z) == z` for |z| >= 2^52, `z % 2.0 == 0.0` for |z| >= 2^54): the engine
/// and the compiled kernel still agree, but its exact derivative (0 for floor, 1 for `%`) then
/// differs from every difference quotient, so no finite-difference heuristic can tell it from a
/// wrong derivative. A divisor near zero (for example a species at 1e-300) does the same.
fn clamped(e: String) -> String {
    format!("min(max({e}, -1000.0), 1000.0)")
}

/// An integer expression. Variables are picked among the integer `let`s in scope by index
/// (modulo their count) when the script is rendered.
#[derive(Clone, Debug)]
enum I {
    Lit(i64),
    Var(u8),
    Neg(Box<I>),
    Bin(IOp, Box<I>, Box<I>),
    Abs(Box<I>),
    MinMax(bool, Box<I>, Box<I>),
}

/// A float expression. Variables are picked among the float names in scope by index.
///
/// Both branches of an `if` are floats: an integer branch beside a float one is refused by the
/// compiler wherever the engine's integer arithmetic would differ (see
/// `integer_branch_where_integer_arithmetic_would_differ_is_refused`), which a generator of
/// valid terms has to avoid.
#[derive(Clone, Debug)]
enum F {
    Lit(f64),
    Var(u8),
    Neg(Box<F>),
    Bin(FOp, Box<F>, Box<F>),
    /// `int op float`
    MixL(FOp, I, Box<F>),
    /// `float op int` (with `**`: a float raised to an integer power)
    MixR(FOp, Box<F>, I),
    Un(Fun1, Box<F>),
    Fun2(Fun2, Box<F>, Box<F>),
    /// `pow`/`min`/`max` with one integer argument, on the left when the flag is set.
    Fun2Int(Fun2, Box<F>, I, bool),
    If(Box<B>, Box<F>, Box<F>),
    /// `clamped % divisor` with a divisor from [`REM_DIVISORS`] (see [`clamped`]).
    Rem(Box<F>, u8),
    /// A call of one of the file's helper functions (picked by index; arguments truncated to
    /// its arity).
    Call(u8, Vec<F>),
}

/// A boolean expression.
#[derive(Clone, Debug)]
enum B {
    Cmp(COp, F, F),
    /// `float op int`, or `int op float` when the flag is set.
    CmpInt(COp, F, I, bool),
    Not(Box<B>),
    And(Box<B>, Box<B>),
    Or(Box<B>, Box<B>),
}

/// A statement of a function body.
#[derive(Clone, Debug)]
enum S {
    LetF(u8, F),
    LetI(u8, I),
    /// `name = e;` (no operator) or `name op= e;`, on a float variable.
    Assign(u8, Option<FOp>, F),
    /// `if c { name op= e1; } else { name = e2; }`
    IfAssign(B, u8, FOp, F, F),
    /// `if c { return e; }`
    EarlyReturn(B, F),
}

/// Statements then the value.
#[derive(Clone, Debug)]
struct Body {
    stmts: Vec<S>,
    ret: F,
}

/// How a reaction term is written.
#[derive(Clone, Copy, Debug)]
enum Form {
    /// `Fn("f_u")` with a named function.
    Named,
    /// A closure `|u, p| { ... }`.
    Closure,
    /// An expression string (the body's statements are dropped).
    Expression,
}

#[derive(Clone, Debug)]
struct Term {
    form: Form,
    /// Bit k selects name k of species, parameters, x, y, t as a parameter of the function.
    inputs: u16,
    body: Body,
}

#[derive(Clone, Debug)]
struct Helper {
    arity: usize,
    body: Body,
}

/// One generated model and the seed of its states.
#[derive(Clone)]
struct Case {
    species: usize,
    params: Vec<f64>,
    helpers: Vec<Helper>,
    terms: Vec<Term>,
    seed: u64,
}

impl fmt::Debug for Case {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "states seed {}, model file:\n{}",
            self.seed,
            self.script()
        )
    }
}

// ----------------------------------------------------------------------------------------------
// Strategies.

fn float_literal() -> impl Strategy<Value = f64> {
    prop_oneof![
        4 => prop::sample::select(vec![
            0.0, 0.5, 1.0, 1.5, 2.0, 3.0, 0.1, 0.25, 1e-3, 10.0, 1e-300, 1e6
        ]),
        1 => (0.0f64..10.0).prop_map(|v| (v * 1000.0).round() / 1000.0),
    ]
}

fn int_op() -> impl Strategy<Value = IOp> {
    prop::sample::select(vec![
        IOp::Add,
        IOp::Sub,
        IOp::Mul,
        IOp::Div,
        IOp::Rem,
        IOp::Pow,
    ])
}

fn float_op() -> impl Strategy<Value = FOp> {
    prop_oneof![
        3 => Just(FOp::Add),
        3 => Just(FOp::Sub),
        3 => Just(FOp::Mul),
        2 => Just(FOp::Div),
        1 => Just(FOp::Pow),
    ]
}

fn cmp_op() -> impl Strategy<Value = COp> {
    prop::sample::select(vec![COp::Lt, COp::Le, COp::Gt, COp::Ge, COp::Eq, COp::Ne])
}

fn fun1() -> impl Strategy<Value = Fun1> {
    prop::sample::select(vec![
        Fun1::Exp,
        Fun1::Ln,
        Fun1::Log,
        Fun1::Sqrt,
        Fun1::Abs,
        Fun1::Tanh,
        Fun1::Floor,
        Fun1::Ceil,
        Fun1::Ceiling,
        Fun1::Sin,
        Fun1::Cos,
    ])
}

fn fun2() -> impl Strategy<Value = Fun2> {
    prop::sample::select(vec![Fun2::Pow, Fun2::Min, Fun2::Max, Fun2::LogBase])
}

fn int_expr() -> BoxedStrategy<I> {
    let leaf = prop_oneof![
        3 => (0i64..=12).prop_map(I::Lit),
        1 => any::<u8>().prop_map(I::Var),
    ];
    leaf.prop_recursive(2, 6, 2, |inner| {
        prop_oneof![
            1 => inner.clone().prop_map(|a| I::Neg(Box::new(a))),
            3 => (int_op(), inner.clone(), inner.clone())
                .prop_map(|(o, a, b)| I::Bin(o, Box::new(a), Box::new(b))),
            1 => inner.clone().prop_map(|a| I::Abs(Box::new(a))),
            1 => (any::<bool>(), inner.clone(), inner)
                .prop_map(|(m, a, b)| I::MinMax(m, Box::new(a), Box::new(b))),
        ]
    })
    .boxed()
}

fn bool_expr(f: BoxedStrategy<F>) -> BoxedStrategy<B> {
    let cmp = prop_oneof![
        3 => (cmp_op(), f.clone(), f.clone()).prop_map(|(o, a, b)| B::Cmp(o, a, b)),
        1 => (cmp_op(), f, int_expr(), any::<bool>())
            .prop_map(|(o, a, b, s)| B::CmpInt(o, a, b, s)),
    ];
    cmp.prop_recursive(1, 3, 2, |inner| {
        prop_oneof![
            inner.clone().prop_map(|a| B::Not(Box::new(a))),
            (inner.clone(), inner.clone()).prop_map(|(a, b)| B::And(Box::new(a), Box::new(b))),
            (inner.clone(), inner).prop_map(|(a, b)| B::Or(Box::new(a), Box::new(b))),
        ]
    })
    .boxed()
}

fn float_expr() -> BoxedStrategy<F> {
    let leaf = prop_oneof![
        2 => float_literal().prop_map(F::Lit),
        5 => any::<u8>().prop_map(F::Var),
    ];
    leaf.prop_recursive(5, 32, 3, |inner| {
        prop_oneof![
            1 => inner.clone().prop_map(|a| F::Neg(Box::new(a))),
            6 => (float_op(), inner.clone(), inner.clone())
                .prop_map(|(o, a, b)| F::Bin(o, Box::new(a), Box::new(b))),
            1 => (float_op(), int_expr(), inner.clone())
                .prop_map(|(o, a, b)| F::MixL(o, a, Box::new(b))),
            2 => (float_op(), inner.clone(), int_expr())
                .prop_map(|(o, a, b)| F::MixR(o, Box::new(a), b)),
            3 => (fun1(), inner.clone()).prop_map(|(g, a)| F::Un(g, Box::new(a))),
            1 => (inner.clone(), any::<u8>()).prop_map(|(a, k)| F::Rem(Box::new(a), k)),
            2 => (fun2(), inner.clone(), inner.clone())
                .prop_map(|(g, a, b)| F::Fun2(g, Box::new(a), Box::new(b))),
            1 => (
                prop::sample::select(vec![Fun2::Pow, Fun2::Min, Fun2::Max]),
                inner.clone(),
                int_expr(),
                any::<bool>()
            )
                .prop_map(|(g, a, i, s)| F::Fun2Int(g, Box::new(a), i, s)),
            2 => (bool_expr(inner.clone()), inner.clone(), inner.clone())
                .prop_map(|(c, a, b)| F::If(Box::new(c), Box::new(a), Box::new(b))),
            1 => (any::<u8>(), prop::collection::vec(inner, 3))
                .prop_map(|(k, args)| F::Call(k, args)),
        ]
    })
    .boxed()
}

fn statement() -> BoxedStrategy<S> {
    let f = float_expr();
    prop_oneof![
        3 => (any::<u8>(), f.clone()).prop_map(|(n, e)| S::LetF(n, e)),
        1 => (any::<u8>(), int_expr()).prop_map(|(n, e)| S::LetI(n, e)),
        2 => (
            any::<u8>(),
            prop::option::of(prop::sample::select(vec![FOp::Add, FOp::Sub, FOp::Mul, FOp::Div])),
            f.clone()
        )
            .prop_map(|(n, o, e)| S::Assign(n, o, e)),
        1 => (
            bool_expr(f.clone()),
            any::<u8>(),
            prop::sample::select(vec![FOp::Add, FOp::Sub, FOp::Mul, FOp::Div]),
            f.clone(),
            f.clone()
        )
            .prop_map(|(c, n, o, a, b)| S::IfAssign(c, n, o, a, b)),
        1 => (bool_expr(f.clone()), f).prop_map(|(c, e)| S::EarlyReturn(c, e)),
    ]
    .boxed()
}

fn body() -> impl Strategy<Value = Body> {
    (prop::collection::vec(statement(), 0..=3), float_expr())
        .prop_map(|(stmts, ret)| Body { stmts, ret })
}

fn term() -> impl Strategy<Value = Term> {
    (
        prop_oneof![
            2 => Just(Form::Named),
            1 => Just(Form::Closure),
            1 => Just(Form::Expression),
        ],
        any::<u16>(),
        body(),
    )
        .prop_map(|(form, inputs, body)| Term { form, inputs, body })
}

fn case() -> impl Strategy<Value = Case> {
    (
        2usize..=4,
        prop::collection::vec(
            prop::sample::select(vec![0.5, 2.0, -1.5, 3.0, 1e-3, 0.0, 1.25]),
            1..=3,
        ),
        prop::collection::vec(
            (1usize..=3, body()).prop_map(|(arity, body)| Helper { arity, body }),
            0..=2,
        ),
        prop::collection::vec(term(), 4),
        any::<u64>(),
    )
        .prop_map(|(species, params, helpers, mut terms, seed)| {
            terms.truncate(species);
            Case {
                species,
                params,
                helpers,
                terms,
                seed,
            }
        })
}

// ----------------------------------------------------------------------------------------------
// Rendering to a model file.

/// Names in scope while rendering one function body or expression.
#[derive(Clone)]
struct Scope<'a> {
    floats: Vec<String>,
    ints: Vec<(String, i64)>,
    /// Helpers callable here: name and arity.
    helpers: &'a [(String, usize)],
}

fn float_text(v: f64) -> String {
    // Debug gives the shortest round-trip form; keep a `.` so the engine reads a float.
    let s = format!("{v:?}");
    match s.find('e') {
        Some(i) if !s[..i].contains('.') => format!("{}.0{}", &s[..i], &s[i..]),
        _ => s,
    }
}

impl Scope<'_> {
    fn bind_float(&mut self, name: String) {
        self.ints.retain(|(n, _)| *n != name);
        self.floats.retain(|n| *n != name);
        self.floats.push(name);
    }

    fn bind_int(&mut self, name: String, v: i64) {
        self.floats.retain(|n| *n != name);
        self.ints.retain(|(n, _)| *n != name);
        self.ints.push((name, v));
    }

    /// Renders an integer expression with its value. Operations the engine would reject
    /// (overflow, division by zero, negative powers) are replaced by their left operand, so
    /// every rendered integer expression evaluates without error.
    fn int(&self, e: &I) -> (String, i64) {
        match e {
            I::Lit(v) => (v.to_string(), *v),
            I::Var(k) => match self.ints.get(*k as usize % self.ints.len().max(1)) {
                Some((n, v)) => (n.clone(), *v),
                None => ((*k % 13).to_string(), (*k % 13) as i64),
            },
            I::Neg(a) => {
                let (s, v) = self.int(a);
                match v.checked_neg() {
                    Some(n) => (format!("(-{s})"), n),
                    None => (s, v),
                }
            }
            I::Abs(a) => {
                let (s, v) = self.int(a);
                match v.checked_abs() {
                    Some(n) => (format!("abs({s})"), n),
                    None => (s, v),
                }
            }
            I::MinMax(max, a, b) => {
                let ((sa, va), (sb, vb)) = (self.int(a), self.int(b));
                if *max {
                    (format!("max({sa}, {sb})"), va.max(vb))
                } else {
                    (format!("min({sa}, {sb})"), va.min(vb))
                }
            }
            I::Bin(op, a, b) => {
                let ((sa, va), (sb, vb)) = (self.int(a), self.int(b));
                let (sym, r) = match op {
                    IOp::Add => ("+", va.checked_add(vb)),
                    IOp::Sub => ("-", va.checked_sub(vb)),
                    IOp::Mul => ("*", va.checked_mul(vb)),
                    IOp::Div => ("/", va.checked_div(vb)),
                    IOp::Rem => ("%", va.checked_rem(vb)),
                    // Small exponents only: large integer powers overflow anyway.
                    IOp::Pow if (0..=4).contains(&vb) => ("**", va.checked_pow(vb as u32)),
                    IOp::Pow => ("**", None),
                };
                match r {
                    Some(r) => (format!("({sa} {sym} {sb})"), r),
                    None => (sa, va),
                }
            }
        }
    }

    fn float(&self, e: &F) -> String {
        match e {
            F::Lit(v) => float_text(*v),
            F::Var(k) => self.floats[*k as usize % self.floats.len()].clone(),
            F::Neg(a) => format!("(-{})", self.float(a)),
            F::Bin(op, a, b) => format!("({} {} {})", self.float(a), op.sym(), self.float(b)),
            F::MixL(op, a, b) => format!("({} {} {})", self.int(a).0, op.sym(), self.float(b)),
            F::MixR(op, a, b) => format!("({} {} {})", self.float(a), op.sym(), self.int(b).0),
            F::Un(g @ (Fun1::Floor | Fun1::Ceil | Fun1::Ceiling), a) => {
                format!("{}({})", g.name(), clamped(self.float(a)))
            }
            F::Un(g, a) => format!("{}({})", g.name(), self.float(a)),
            F::Rem(a, k) => format!(
                "({} % {})",
                clamped(self.float(a)),
                REM_DIVISORS[*k as usize % REM_DIVISORS.len()]
            ),
            F::Fun2(g, a, b) => format!("{}({}, {})", g.name(), self.float(a), self.float(b)),
            F::Fun2Int(g, a, i, left) => {
                let (a, i) = (self.float(a), self.int(i).0);
                if *left {
                    format!("{}({i}, {a})", g.name())
                } else {
                    format!("{}({a}, {i})", g.name())
                }
            }
            F::If(c, a, b) => format!(
                "(if {} {{ {} }} else {{ {} }})",
                self.boolean(c),
                self.float(a),
                self.float(b)
            ),
            F::Call(k, args) => {
                if self.helpers.is_empty() {
                    return self.float(&args[0]);
                }
                let (name, arity) = &self.helpers[*k as usize % self.helpers.len()];
                let args: Vec<String> = args[..*arity].iter().map(|a| self.float(a)).collect();
                format!("{name}({})", args.join(", "))
            }
        }
    }

    fn boolean(&self, e: &B) -> String {
        match e {
            B::Cmp(op, a, b) => format!("({} {} {})", self.float(a), op.sym(), self.float(b)),
            B::CmpInt(op, a, i, left) => {
                let (a, i) = (self.float(a), self.int(i).0);
                if *left {
                    format!("({i} {} {a})", op.sym())
                } else {
                    format!("({a} {} {i})", op.sym())
                }
            }
            B::Not(a) => format!("!{}", self.boolean(a)),
            B::And(a, b) => format!("({} && {})", self.boolean(a), self.boolean(b)),
            B::Or(a, b) => format!("({} || {})", self.boolean(a), self.boolean(b)),
        }
    }

    /// Renders a function body (statements, then the value) at indentation `ind`.
    fn body(mut self, b: &Body, ind: &str) -> String {
        let mut out = String::new();
        for s in &b.stmts {
            let line = match s {
                S::LetF(n, e) => {
                    let text = self.float(e);
                    let name = format!("l{}", n % 3);
                    self.bind_float(name.clone());
                    format!("let {name} = {text};")
                }
                S::LetI(n, e) => {
                    let (text, v) = self.int(e);
                    let name = format!("l{}", n % 3);
                    self.bind_int(name.clone(), v);
                    format!("let {name} = {text};")
                }
                S::Assign(n, op, e) => {
                    let name = &self.floats[*n as usize % self.floats.len()];
                    let sym = op.map_or("", FOp::sym);
                    format!("{name} {sym}= {};", self.float(e))
                }
                S::IfAssign(c, n, op, a, e) => {
                    let name = &self.floats[*n as usize % self.floats.len()];
                    format!(
                        "if {} {{ {name} {}= {}; }} else {{ {name} = {}; }}",
                        self.boolean(c),
                        op.sym(),
                        self.float(a),
                        self.float(e)
                    )
                }
                S::EarlyReturn(c, e) => {
                    format!("if {} {{ return {}; }}", self.boolean(c), self.float(e))
                }
            };
            out.push_str(ind);
            out.push_str(&line);
            out.push('\n');
        }
        out.push_str(ind);
        out.push_str(&self.float(&b.ret));
        out.push('\n');
        out
    }
}

impl Case {
    /// Names a term function may read: species, parameters, x, y, t.
    fn inputs(&self) -> Vec<String> {
        SPECIES[..self.species]
            .iter()
            .chain(&PARAMS[..self.params.len()])
            .chain(&SPACE_TIME)
            .map(|s| s.to_string())
            .collect()
    }

    fn script(&self) -> String {
        let mut s = String::new();
        for (name, v) in PARAMS.iter().zip(&self.params) {
            s.push_str(&format!("param(\"{name}\", {});\n", float_text(*v)));
        }
        // Helper k may call helpers 0..k (never itself: model terms must not recurse).
        let sigs: Vec<(String, usize)> = self
            .helpers
            .iter()
            .enumerate()
            .map(|(k, h)| (format!("h{k}"), h.arity))
            .collect();
        for (k, h) in self.helpers.iter().enumerate() {
            let params: Vec<String> = (0..h.arity).map(|i| format!("a{i}")).collect();
            let scope = Scope {
                floats: params.clone(),
                ints: Vec::new(),
                helpers: &sigs[..k],
            };
            s.push_str(&format!(
                "fn h{k}({}) {{\n{}}}\n",
                params.join(", "),
                scope.body(&h.body, "    ")
            ));
        }
        let all = self.inputs();
        let mut decls = String::new();
        for (i, t) in self.terms.iter().enumerate() {
            let name = SPECIES[i];
            // Species and parameters only in the low bits; x, y, t rarely (high bits).
            let nsp = self.species + self.params.len();
            let mut chosen: Vec<String> = (0..nsp)
                .filter(|b| t.inputs & (1 << b) != 0)
                .map(|b| all[b].clone())
                .collect();
            for (j, st) in SPACE_TIME.iter().enumerate() {
                if (t.inputs >> (13 + j)) & 1 == 1 && (t.inputs >> 8) & 3 == 0 {
                    chosen.push(st.to_string());
                }
            }
            if chosen.is_empty() {
                chosen = all[..nsp].to_vec();
            }
            let scope = Scope {
                floats: chosen.clone(),
                ints: Vec::new(),
                helpers: &sigs,
            };
            let reaction = match t.form {
                Form::Named => {
                    s.push_str(&format!(
                        "fn f_{name}({}) {{\n{}}}\n",
                        chosen.join(", "),
                        scope.body(&t.body, "    ")
                    ));
                    format!("Fn(\"f_{name}\")")
                }
                Form::Closure => format!(
                    "|{}| {{\n{}    }}",
                    chosen.join(", "),
                    scope.body(&t.body, "        ")
                ),
                Form::Expression => {
                    let scope = Scope {
                        floats: all.clone(),
                        ints: Vec::new(),
                        helpers: &sigs,
                    };
                    let text = scope.float(&t.body.ret);
                    format!("\"{text}\"")
                }
            };
            decls.push_str(&format!(
                "species(\"{name}\", #{{ kind: \"mobile\", diffusion: 1.0, reaction: {reaction} }});\n"
            ));
        }
        s.push_str(&decls);
        s
    }
}

// ----------------------------------------------------------------------------------------------
// Checking one model.

/// SplitMix64, a common choice of small reproducible generator.
struct Rng(u64);
impl Rng {
    fn bits(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn unit(&mut self) -> f64 {
        (self.bits() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// States mixing ordinary values with the tricky ones: signed zeros, ±1e-300, negatives,
/// exact integers and half-integers (floor/ceil/comparison thresholds) and large magnitudes.
fn states(species: usize, seed: u64) -> (Vec<Vec<f64>>, Vec<f64>, Vec<f64>) {
    let mut rng = Rng(seed);
    let mut sp = vec![Vec::with_capacity(STATES); species];
    for col in sp.iter_mut() {
        for _ in 0..STATES {
            let v = match rng.bits() % 16 {
                0 => 0.0,
                1 => -0.0,
                2 => 1e-300,
                3 => -1e-300,
                4 => -3.0 * rng.unit(),
                5 => 1e6 * (1.0 + rng.unit()),
                6 => -1e12 * rng.unit(),
                7 => (rng.unit() * 8.0).floor() * 0.5,
                8 => 1e200,
                9 => 1e-3 * rng.unit(),
                10 | 11 => 10.0 * rng.unit(),
                _ => 0.05 + 2.0 * rng.unit(),
            };
            col.push(v);
        }
    }
    let x = (0..STATES).map(|_| 10.0 * rng.unit() - 5.0).collect();
    let y = (0..STATES).map(|_| 10.0 * rng.unit() - 5.0).collect();
    (sp, x, y)
}

fn same(a: f64, b: f64) -> bool {
    a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan())
}

#[derive(Default, Debug, Clone, Copy)]
struct Tally {
    values: usize,
    finite: usize,
    checked: usize,
    /// Of those checked, how many had a non-zero derivative.
    nonzero: usize,
    smooth_candidates: usize,
}

fn eval(
    k: &dyn BatchKernel,
    sp: &[Vec<f64>],
    x: &[f64],
    y: &[f64],
) -> Result<Vec<f64>, TestCaseError> {
    let refs: Vec<&[f64]> = sp.iter().map(Vec::as_slice).collect();
    let input = KernelInput {
        species: &refs,
        x,
        y,
        t: T,
    };
    let mut out = vec![0.0; k.n_outputs() * x.len()];
    k.eval(&input, &mut out, &mut Scratch::new())
        .map_err(|e| TestCaseError::fail(format!("kernel error: {e:?}")))?;
    Ok(out)
}

/// Checks one model; returns what was checked.
fn check_source(src: &str, seed: u64) -> Result<Tally, TestCaseError> {
    let fail = |m: String| TestCaseError::fail(format!("{m}\n--- model file ---\n{src}"));
    let model =
        Model::load("random.rhai", src, &Overrides::new()).map_err(|e| fail(format!("{e}")))?;
    let compiled = model.compile().map_err(|e| fail(format!("refused: {e}")))?;
    let oracle = model
        .interpreted_reactions()
        .map_err(|e| fail(format!("oracle: {e}")))?;
    let k = &compiled.reactions;
    let ns = model.decl.species.len();
    let (sp, x, y) = states(ns, seed);
    let n = x.len();
    let no = k.n_outputs();

    // (a) Values: bit for bit against the engine, from both tapes.
    let fast = eval(k, &sp, &x, &y)?;
    let slow = eval(&oracle, &sp, &x, &y)?;
    let mut tally = Tally::default();
    for idx in 0..no * n {
        let (o, i) = (idx / n, idx % n);
        if !same(fast[idx], slow[idx]) {
            let state: Vec<String> = (0..ns)
                .map(|s| format!("{} = {:e}", SPECIES[s], sp[s][i]))
                .collect();
            return Err(fail(format!(
                "reaction of `{}` at {}, x = {:e}, y = {:e}, t = {T}: compiled {:e} ({:#x}) vs \
                 engine {:e} ({:#x})",
                SPECIES[o],
                state.join(", "),
                x[i],
                y[i],
                fast[idx],
                fast[idx].to_bits(),
                slow[idx],
                slow[idx].to_bits()
            )));
        }
        tally.values += 1;
        tally.finite += fast[idx].is_finite() as usize;
    }
    let refs: Vec<&[f64]> = sp.iter().map(Vec::as_slice).collect();
    let input = KernelInput {
        species: &refs,
        x: &x,
        y: &y,
        t: T,
    };
    let mut val = vec![0.0; no * n];
    let mut jac = vec![0.0; no * ns * n];
    k.eval_with_jacobian(&input, &mut val, &mut jac, &mut Scratch::new())
        .map_err(|e| fail(format!("kernel error: {e:?}")))?;
    if let Some(idx) = (0..no * n).find(|&j| !same(val[j], fast[j])) {
        return Err(fail(format!(
            "value tape {:e} vs Jacobian tape {:e} (output {}, state {})",
            fast[idx],
            val[idx],
            idx / n,
            idx % n
        )));
    }

    // (b) Derivatives against central differences where the term is smooth, at states whose
    // species are all moderate: beside a huge value a small step is absorbed by rounding
    // (`(v + w) - v` is 0 for v = 1e12 and every small w) and no difference quotient sees it.
    let moderate: Vec<bool> = (0..n)
        .map(|i| (0..ns).all(|q| sp[q][i].abs() <= 1e4))
        .collect();
    for s in 0..ns {
        // Steps are powers of two (common practice: v ± h is then exact, so the difference
        // quotient sees only the rounding of the term itself).
        let h: Vec<f64> = sp[s]
            .iter()
            .map(|v| (1e-5 * v.abs().max(1e-2)).log2().round().exp2())
            .collect();
        let shifted = |m: f64| -> Result<Vec<f64>, TestCaseError> {
            let mut sp2 = sp.clone();
            for (v, h) in sp2[s].iter_mut().zip(&h) {
                *v += m * h;
            }
            eval(k, &sp2, &x, &y)
        };
        let (p1, m1, p2, m2) = (shifted(1.0)?, shifted(-1.0)?, shifted(2.0)?, shifted(-2.0)?);
        let (ps, ms) = (shifted(1e-3)?, shifted(-1e-3)?);
        let (pl, ml) = (shifted(1024.0)?, shifted(-1024.0)?);
        // The symbolic derivatives one step either side.
        let jac_at = |m: f64| -> Result<Vec<f64>, TestCaseError> {
            let mut sp2 = sp.clone();
            for (v, h) in sp2[s].iter_mut().zip(&h) {
                *v += m * h;
            }
            let r: Vec<&[f64]> = sp2.iter().map(Vec::as_slice).collect();
            let inp = KernelInput {
                species: &r,
                x: &x,
                y: &y,
                t: T,
            };
            let mut v = vec![0.0; no * n];
            let mut jac = vec![0.0; no * ns * n];
            k.eval_with_jacobian(&inp, &mut v, &mut jac, &mut Scratch::new())
                .map_err(|e| fail(format!("kernel error: {e:?}")))?;
            Ok(jac)
        };
        let (jp, jm) = (jac_at(1.0)?, jac_at(-1.0)?);
        for (o, out_name) in SPECIES.iter().enumerate().take(no) {
            // Rounding inside a term can still fool every heuristic above at a few isolated
            // states (a cancellation whose result is a few ulps, then divided or taken the log
            // of). A wrong derivative rule is wrong at most states where its node matters, so
            // a column fails only when it disagrees at 3 states and at 5% of those checked.
            let (mut col_checked, mut col_bad, mut first_bad) = (0usize, 0usize, None);
            for i in 0..n {
                let j = o * n + i;
                let jdx = (o * ns + s) * n + i;
                let d = jac[jdx];
                let f0 = val[j];
                let all = [
                    d, f0, p1[j], m1[j], p2[j], m2[j], ps[j], ms[j], pl[j], ml[j], jp[jdx], jm[jdx],
                ];
                // Non-finite or huge values, or huge states: no meaningful difference quotient.
                if !moderate[i] || all.iter().any(|v| !v.is_finite() || v.abs() > 1e100) {
                    continue;
                }
                tally.smooth_candidates += 1;
                // Second-order one-sided differences: they agree to O(h^2) where the term is
                // smooth, so a kink is detected down to slope jumps below the tolerance.
                let fwd = (4.0 * p1[j] - 3.0 * f0 - p2[j]) / (2.0 * h[i]);
                let bwd = (3.0 * f0 - 4.0 * m1[j] + m2[j]) / (2.0 * h[i]);
                let c1 = (p1[j] - m1[j]) / (2.0 * h[i]);
                let c2 = (p2[j] - m2[j]) / (4.0 * h[i]);
                let cs = (ps[j] - ms[j]) / (2e-3 * h[i]);
                let cl = (pl[j] - ml[j]) / (2048.0 * h[i]);
                // Exactly constant over the stencil: either the term is locally constant or the
                // steps were absorbed by rounding inside it (`c + (v ** c - c)` is a constant
                // multiple of the resolution of c while v ** c is below it), where the float
                // function is flat but the exact one is not. The two cannot be told apart, so
                // such states are skipped; a non-zero derivative of a step function still shows
                // wherever the step function is added to something that varies.
                let flat = |a: f64| a.to_bits() == f0.to_bits();
                let absorbed = flat(p1[j]) && flat(m1[j]) && d != 0.0;
                let scale = d.abs().max(c1.abs()).max(1.0);
                // Rounding of the term values, magnified by the step.
                let fmax = all[1..10].iter().fold(0.0f64, |m, v| m.max(v.abs()));
                let noise = 16.0 * f64::EPSILON * fmax / h[i];
                // Not smooth here, so the difference quotient says nothing about the derivative,
                // when: one-sided quotients disagree (a kink or jump of if/else, min, max, abs,
                // floor within two steps); steps h and 2h disagree (rounding noise, or a jump);
                // steps h and h/1000 disagree, loosely as the small step is noisy (a staircase
                // finer than h, which looks like a slope from afar); steps h and 1000 h disagree,
                // loosely for curvature (absorption showing as a coarse staircase); the symbolic
                // derivative jumps between neighbours (a branch taken only at the state itself,
                // such as an epsilon-equality `w == 0`, invisible to the values).
                if absorbed
                    || (!flat(p1[j]) && (c1 - cl).abs() > 1e-2 * scale)
                    || (fwd - bwd).abs() > 1e-7 * scale + 4.0 * noise
                    || (jp[jdx] - d).abs() > 1e-3 * scale
                    || (jm[jdx] - d).abs() > 1e-3 * scale
                    || (c1 - c2).abs() > 1e-7 * scale + noise
                    || (c1 - cs).abs() > 1e-2 * scale
                {
                    continue;
                }
                col_checked += 1;
                tally.nonzero += (d != 0.0) as usize;
                if (d - c1).abs() > 1e-6 * scale + noise {
                    col_bad += 1;
                    if first_bad.is_none() {
                        let state: Vec<String> = (0..ns)
                            .map(|q| format!("{} = {:e}", SPECIES[q], sp[q][i]))
                            .collect();
                        first_bad = Some(format!(
                            "d(reaction of `{}`)/d{} at {}, x = {:e}, y = {:e}: symbolic {d:e}, \
                             central differences {c1:e} (step h) and {c2:e} (step 2h)",
                            out_name,
                            SPECIES[s],
                            state.join(", "),
                            x[i],
                            y[i]
                        ));
                    }
                }
            }
            if col_bad >= 3 && col_bad * 20 > col_checked {
                return Err(fail(format!(
                    "{} (and {} more of {col_checked} states checked)",
                    first_bad.unwrap_or_default(),
                    col_bad - 1
                )));
            }
            tally.checked += col_checked - col_bad;
        }
    }
    Ok(tally)
}

fn runner(cases: u32) -> TestRunner {
    let config = Config {
        cases,
        failure_persistence: None,
        max_shrink_iters: 4096,
        ..Config::default()
    };
    let seed = std::env::var("RANDOM_EXPRESSIONS_SEED")
        .ok()
        .and_then(|s| s.parse::<u64>().ok())
        .unwrap_or(0x0A6A_2105);
    let mut bytes = [0u8; 32];
    bytes[..8].copy_from_slice(&seed.to_le_bytes());
    TestRunner::new_with_rng(config, TestRng::from_seed(RngAlgorithm::ChaCha, &bytes))
}

#[test]
fn random_models_match_engine_and_finite_differences() {
    let cases = std::env::var("PROPTEST_CASES")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(128);
    let total = std::cell::Cell::new(Tally::default());
    let result = runner(cases).run(&case(), |c| {
        let t = check_source(&c.script(), c.seed)?;
        let mut a = total.get();
        a.values += t.values;
        a.finite += t.finite;
        a.checked += t.checked;
        a.nonzero += t.nonzero;
        a.smooth_candidates += t.smooth_candidates;
        total.set(a);
        Ok(())
    });
    match result {
        Ok(()) => {}
        Err(TestError::Fail(why, c)) => panic!("{why}\n(shrunk case: {c:?})"),
        Err(e) => panic!("{e}"),
    }
    // The generator must not degenerate into NaN everywhere or nothing smooth to check.
    let t = total.get();
    assert!(
        t.finite * 2 > t.values,
        "too few finite values for a meaningful test: {t:?}"
    );
    assert!(
        t.checked * 2 > t.smooth_candidates && t.nonzero * 20 > t.checked,
        "too few derivatives checked: {t:?}"
    );
}

// ----------------------------------------------------------------------------------------------
// Cases the generator found: an `if` standing alone as an expression string, and `if`s mixing an
// integer and a float branch (accepted where the engine's arithmetic agrees, refused elsewhere).

/// Loads and compiles `src` (one species `u`), then compares compiled and engine values at `us`.
fn assert_matches_engine(src: &str, us: &[f64]) {
    let model = Model::load("defect.rhai", src, &Overrides::new()).expect("loads");
    let compiled = match model.compile() {
        Ok(c) => c,
        Err(e) => panic!("valid model refused: {e}\n{src}"),
    };
    let oracle = model.interpreted_reactions().unwrap();
    let sp = vec![us.to_vec()];
    let zeros = vec![0.0; us.len()];
    let fast = eval(&compiled.reactions, &sp, &zeros, &zeros).unwrap();
    let slow = eval(&oracle, &sp, &zeros, &zeros).unwrap();
    for (i, u) in us.iter().enumerate() {
        assert!(
            same(fast[i], slow[i]),
            "u = {u}: compiled {:e} vs engine {:e}\n{src}",
            fast[i],
            slow[i]
        );
    }
}

/// A model the compiler must refuse with a message containing `expected`.
fn assert_refused(src: &str, expected: &str) {
    let model = Model::load("mixed.rhai", src, &Overrides::new()).expect("loads");
    match model.compile() {
        Ok(_) => panic!("compiled, but the engine's arithmetic would depend on the state\n{src}"),
        Err(e) => assert!(e.to_string().contains(expected), "{e}\n{src}"),
    }
}

#[test]
fn expression_string_that_is_an_if_compiles() {
    // The engine evaluates this term (1.0 for u > 0, 2.0 otherwise).
    assert_matches_engine(
        r#"species("u", #{ kind: "mobile", diffusion: 1.0,
                          reaction: "if u > 0.0 { 1.0 } else { 2.0 }" });"#,
        &[-1.0, 0.5, 2.0],
    );
}

#[test]
fn integer_branch_beside_float_branch_acts_as_a_float_next_to_floats() {
    // `0` beside `u` meets only floats afterwards: the engine's int*float is the float product.
    assert_matches_engine(
        r#"species("u", #{ kind: "mobile", diffusion: 1.0,
                          reaction: |u| 2.0 * (if u > 1.0 { 0 } else { u }) + (if u < 0.0 { 3 } else { u }) * 3 });"#,
        &[-1.0, 0.5, 2.0],
    );
}

#[test]
fn integer_branch_where_integer_arithmetic_would_differ_is_refused() {
    // For u > 1 the engine's `if` yields the integer 7, so `7 / 2` is integer division (3),
    // while for u ≤ 1 it divides floats: no single compiled formula is the engine's, so the
    // compiler refuses with the position and a fix.
    assert_refused(
        r#"species("u", #{ kind: "mobile", diffusion: 1.0,
                          reaction: |u| (if u > 1.0 { 7 } else { u }) / 2 });"#,
        "mixed.rhai:2:",
    );
    assert_refused(
        r#"species("u", #{ kind: "mobile", diffusion: 1.0,
                          reaction: |u| (if u > 1.0 { 7 } else { u }) / 2 });"#,
        "write the integer branch as a float",
    );
    // The engine has no integer `sqrt`: the integer branch would fail there.
    assert_refused(
        r#"species("u", #{ kind: "mobile", diffusion: 1.0,
                          reaction: |u| sqrt(if u > 1.0 { 4 } else { u }) });"#,
        "`sqrt` (which has no integer version)",
    );
    assert_refused(
        r#"species("u", #{ kind: "mobile", diffusion: 1.0,
                          reaction: |u| (if u > 1.0 { 4 } else { u }) ** 2 });"#,
        "`**`",
    );
}
