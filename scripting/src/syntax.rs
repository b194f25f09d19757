//! The numeric subset of the language as a small tree of our own, so the compiler never touches
//! the script engine's internal types (those stay in [`crate::rhai_ast`]).

use std::fmt;

/// A line/column position in a source text (1-based; 0 when unknown).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Pos {
    /// Line, 1-based.
    pub line: usize,
    /// Column, 1-based.
    pub column: usize,
}

impl fmt::Display for Pos {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}:{}", self.line, self.column)
    }
}

/// An expression of the numeric subset.
#[derive(Clone, Debug, PartialEq)]
pub enum Expr {
    /// A float literal.
    Float(f64, Pos),
    /// An integer literal.
    Int(i64, Pos),
    /// A boolean literal.
    Bool(bool, Pos),
    /// A variable read.
    Var(String, Pos),
    /// A call: an operator (`+`, `**`, `<`, unary `-`, `!`, ...) or a named function.
    Call {
        /// Operator symbol or function name.
        name: String,
        /// Arguments.
        args: Vec<Expr>,
        /// Where the call is.
        pos: Pos,
    },
    /// `a && b && ...`
    And(Vec<Expr>, Pos),
    /// `a || b || ...`
    Or(Vec<Expr>, Pos),
    /// A block `{ ... }` whose value is its last statement's.
    Block(Vec<Stmt>, Pos),
}

impl Expr {
    /// Where the expression is.
    pub fn pos(&self) -> Pos {
        match self {
            Expr::Float(_, p)
            | Expr::Int(_, p)
            | Expr::Bool(_, p)
            | Expr::Var(_, p)
            | Expr::And(_, p)
            | Expr::Or(_, p)
            | Expr::Block(_, p) => *p,
            Expr::Call { pos, .. } => *pos,
        }
    }
}

/// A statement of the numeric subset.
#[derive(Clone, Debug, PartialEq)]
pub enum Stmt {
    /// `let name = value;` (also `const`).
    Let {
        /// Bound name.
        name: String,
        /// Value.
        value: Expr,
        /// Where.
        pos: Pos,
    },
    /// `name = value;` or `name op= value;` (`op` is the plain operator, e.g. `+`).
    Assign {
        /// Assigned variable.
        name: String,
        /// Operator of a compound assignment.
        op: Option<String>,
        /// Right-hand side.
        value: Expr,
        /// Where.
        pos: Pos,
    },
    /// `if cond { .. } else { .. }` (statement or value).
    If {
        /// Condition.
        cond: Expr,
        /// Then branch.
        then: Vec<Stmt>,
        /// Else branch (empty when absent).
        otherwise: Vec<Stmt>,
        /// Whether an `else` was written.
        has_else: bool,
        /// Where.
        pos: Pos,
    },
    /// An expression statement.
    Expr(Expr),
    /// `return value;`
    Return(Option<Expr>, Pos),
}

impl Stmt {
    /// Whether this statement (or a nested one) returns.
    pub fn contains_return(&self) -> bool {
        match self {
            Stmt::Return(..) => true,
            Stmt::If {
                then, otherwise, ..
            } => {
                then.iter().any(Stmt::contains_return)
                    || otherwise.iter().any(Stmt::contains_return)
            }
            Stmt::Expr(Expr::Block(b, _)) => b.iter().any(Stmt::contains_return),
            _ => false,
        }
    }
}

/// A function of the script, converted.
#[derive(Clone, Debug, PartialEq)]
pub struct Function {
    /// Name.
    pub name: String,
    /// Parameter names.
    pub params: Vec<String>,
    /// Body statements.
    pub body: Vec<Stmt>,
    /// Position of the body (best known).
    pub pos: Pos,
}
