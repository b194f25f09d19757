//! Lowering of the numeric subset onto the expression graph: static typing (float, integer,
//! boolean) as the engine would type the values, integer arithmetic done at compile time with
//! the engine's checked semantics, callee inlining with recursion detection, `let` bindings and
//! reassignment in SSA form, `if` as selects, and early `return` by duplicating the rest of the
//! function into both branches (hash-consing merges the copies).

use std::collections::HashMap;

use thiserror::Error;

use crate::graph::{Bin, Graph, NodeId, Un};
use crate::rhai_ast::Unsupported;
use crate::syntax::{Expr, Function, Pos, Stmt};

/// Deepest chain of inlined calls.
pub const MAX_INLINE_DEPTH: usize = 64;

/// Why a term could not be compiled.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum LowerError {
    /// A construct outside the numeric subset.
    #[error(transparent)]
    Unsupported(#[from] Unsupported),
    /// A name that is none of those the term may use.
    #[error("unknown name `{name}` in {context} ({allowed})")]
    UnknownName {
        /// The name.
        name: String,
        /// Function or expression it appears in.
        context: String,
        /// Which names this kind of term may use.
        allowed: &'static str,
        /// Where.
        pos: Pos,
    },
    /// A call of a function that is neither the file's own nor a supported math function.
    #[error("unknown function `{name}` with {arity} argument(s)")]
    UnknownFunction {
        /// Name.
        name: String,
        /// Argument count.
        arity: usize,
        /// Where.
        pos: Pos,
    },
    /// A function calling itself, directly or through others.
    #[error("recursion: `{function}` calls itself (chain: {chain}); model terms must not recurse")]
    Recursion {
        /// The function.
        function: String,
        /// The call chain.
        chain: String,
        /// Where.
        pos: Pos,
    },
    /// Inlining went deeper than [`MAX_INLINE_DEPTH`] or the graph grew too large.
    #[error("term too large: {what}")]
    TooLarge {
        /// What overflowed.
        what: String,
        /// Where.
        pos: Pos,
    },
    /// A value of the wrong type (for example a boolean where a number is needed).
    #[error("{message}")]
    Type {
        /// Explanation.
        message: String,
        /// Where.
        pos: Pos,
    },
    /// Integer arithmetic that the engine would reject (overflow, division by zero).
    #[error("{message}")]
    Arithmetic {
        /// Explanation.
        message: String,
        /// Where.
        pos: Pos,
    },
    /// A block or function that yields no value.
    #[error("{what} yields no value")]
    NoValue {
        /// What.
        what: String,
        /// Where.
        pos: Pos,
    },
}

impl LowerError {
    /// Where the error is (relative to the text the term came from).
    pub fn pos(&self) -> Pos {
        match self {
            LowerError::Unsupported(u) => u.pos,
            LowerError::UnknownName { pos, .. }
            | LowerError::UnknownFunction { pos, .. }
            | LowerError::Recursion { pos, .. }
            | LowerError::TooLarge { pos, .. }
            | LowerError::Type { pos, .. }
            | LowerError::Arithmetic { pos, .. }
            | LowerError::NoValue { pos, .. } => *pos,
        }
    }
}

/// A typed value during lowering.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Val {
    /// A float node.
    F(NodeId),
    /// An integer (always a compile-time constant).
    I(i64),
    /// A boolean node holding 0/1.
    B(NodeId),
    /// A float node whose value the script engine holds as an integer on some states: an `if`
    /// with an integer literal in one branch and a float in the other. It acts as that float
    /// wherever it meets a float, and stays mixed through `+ - *` with integers (the values are
    /// equal either way); operations that the engine computes differently on integers (`/`,
    /// `%`, `**`, comparisons with integers, float-only functions) are refused, since which
    /// arithmetic applies would depend on the state.
    W(NodeId),
}

/// Why a mixed value cannot be used by `what`.
fn mixed_error(what: &str, pos: Pos) -> LowerError {
    LowerError::Type {
        message: format!(
            "{what} would get an integer on some states and a float on others (an `if` with an \
             integer branch and a float branch), and the script engine computes the two \
             differently; write the integer branch as a float (7.0, not 7)"
        ),
        pos,
    }
}

/// The file's functions, by name and arity; a function using constructs outside the numeric
/// subset is kept as its error, reported only if a term calls it (top-level helpers may use
/// loops freely).
pub type Functions = HashMap<(String, usize), Result<Function, Unsupported>>;

enum Flow {
    Value(Option<Val>),
    Return(Val),
}

#[derive(Clone, Copy)]
enum Item<'a> {
    S(&'a Stmt),
    /// Drops the bindings of a block that ended (keeps assignments to outer variables).
    EndScope(usize),
}

type Env = Vec<(String, Val)>;

/// Lowers terms onto one shared graph.
pub struct Lowerer<'a> {
    graph: &'a mut Graph,
    funcs: &'a Functions,
    stack: Vec<String>,
    /// Which free names the term may use, for the unknown-name message.
    allowed: &'static str,
}

/// The names a term of the full scope may use.
pub const ALL_NAMES: &str = "a term may use local variables, species, parameters, x, y and t";

impl<'a> Lowerer<'a> {
    /// A lowerer writing into `graph`, resolving calls in `funcs`.
    pub fn new(graph: &'a mut Graph, funcs: &'a Functions) -> Self {
        Self {
            graph,
            funcs,
            stack: Vec::new(),
            allowed: ALL_NAMES,
        }
    }

    /// Names the free names this term may use (for the unknown-name message).
    pub fn allowing(mut self, allowed: &'static str) -> Self {
        self.allowed = allowed;
        self
    }

    /// Lowers an expression whose free names are resolved in `scope`.
    pub fn expression(
        &mut self,
        e: &Expr,
        scope: &HashMap<String, Val>,
        context: &str,
    ) -> Result<NodeId, LowerError> {
        self.stack.push(context.to_string());
        let mut env: Env = scope.iter().map(|(k, v)| (k.clone(), *v)).collect();
        let v = self.expr(e, &mut env);
        self.stack.pop();
        self.float(v?, e.pos(), "the expression")
    }

    /// Lowers the function `f`, binding each parameter by name from `scope`.
    pub fn function_by_names(
        &mut self,
        f: &Function,
        scope: &HashMap<String, Val>,
    ) -> Result<NodeId, LowerError> {
        let mut args = Vec::with_capacity(f.params.len());
        for p in &f.params {
            match scope.get(p) {
                Some(v) => args.push(*v),
                None => {
                    return Err(LowerError::UnknownName {
                        name: p.clone(),
                        context: format!("the parameter list of `{}`", f.name),
                        allowed: self.allowed,
                        pos: f.pos,
                    })
                }
            }
        }
        let v = self.inline(f, args, f.pos)?;
        self.float(v, f.pos, &format!("function `{}`", f.name))
    }

    /// Converts a term result to a float node (integers widen exactly as the engine's `as`).
    fn float(&mut self, v: Val, pos: Pos, what: &str) -> Result<NodeId, LowerError> {
        match v {
            Val::F(n) | Val::W(n) => Ok(n),
            Val::I(i) => Ok(self.graph.konst(i as f64)),
            Val::B(_) => Err(LowerError::Type {
                message: format!("{what} yields a boolean where a number is needed"),
                pos,
            }),
        }
    }

    fn inline(&mut self, f: &Function, args: Vec<Val>, pos: Pos) -> Result<Val, LowerError> {
        if self.stack.iter().any(|s| s == &f.name) {
            let mut chain = self.stack.clone();
            chain.push(f.name.clone());
            return Err(LowerError::Recursion {
                function: f.name.clone(),
                chain: chain.join(" -> "),
                pos,
            });
        }
        if self.stack.len() > MAX_INLINE_DEPTH {
            return Err(LowerError::TooLarge {
                what: "calls nested too deeply".into(),
                pos,
            });
        }
        self.stack.push(f.name.clone());
        let mut env: Env = f.params.iter().cloned().zip(args).collect();
        let items: Vec<Item> = f.body.iter().map(Item::S).collect();
        let flow = self.seq(&items, &mut env);
        self.stack.pop();
        match flow? {
            Flow::Value(Some(v)) | Flow::Return(v) => Ok(v),
            Flow::Value(None) => Err(LowerError::NoValue {
                what: format!("function `{}`", f.name),
                pos: f.pos,
            }),
        }
    }

    fn context(&self) -> String {
        match self.stack.last() {
            Some(s) => format!("`{s}`"),
            None => "the term".into(),
        }
    }

    fn check_size(&self, pos: Pos) -> Result<(), LowerError> {
        if self.graph.too_large() {
            return Err(LowerError::TooLarge {
                what: "expression graph limit reached".into(),
                pos,
            });
        }
        Ok(())
    }

    fn seq(&mut self, items: &[Item], env: &mut Env) -> Result<Flow, LowerError> {
        let mut last = None;
        for (i, item) in items.iter().enumerate() {
            let s = match item {
                Item::EndScope(n) => {
                    env.truncate(*n);
                    continue;
                }
                Item::S(s) => *s,
            };
            last = None;
            match s {
                Stmt::Let { name, value, .. } => {
                    let v = self.expr(value, env)?;
                    env.push((name.clone(), v));
                }
                Stmt::Assign {
                    name,
                    op,
                    value,
                    pos,
                } => {
                    let rhs = self.expr(value, env)?;
                    let slot = env.iter().rposition(|(n, _)| n == name).ok_or_else(|| {
                        LowerError::UnknownName {
                            name: name.clone(),
                            context: self.context(),
                            allowed: self.allowed,
                            pos: *pos,
                        }
                    })?;
                    let new = match op {
                        None => rhs,
                        Some(op) => self.operator(op, &[env[slot].1, rhs], *pos)?,
                    };
                    env[slot].1 = new;
                }
                Stmt::Return(e, pos) => {
                    let Some(e) = e else {
                        return Err(LowerError::NoValue {
                            what: "`return`".into(),
                            pos: *pos,
                        });
                    };
                    return Ok(Flow::Return(self.expr(e, env)?));
                }
                Stmt::If {
                    cond,
                    then,
                    otherwise,
                    pos,
                    ..
                } if s.contains_return() => {
                    let c = self.condition(cond, env)?;
                    let mark = env.len();
                    let rest = &items[i + 1..];
                    let mut t_items = branch(then, mark);
                    t_items.extend_from_slice(rest);
                    let mut e_items = branch(otherwise, mark);
                    e_items.extend_from_slice(rest);
                    if let Some(cv) = self.graph.constant(c) {
                        let chosen = if cv != 0.0 { &t_items } else { &e_items };
                        return self.seq(chosen, env);
                    }
                    let mut env_t = env.clone();
                    let ft = self.seq(&t_items, &mut env_t)?;
                    let ft = flow_value(ft, *pos)?;
                    let fe = self.seq(&e_items, env)?;
                    let fe = flow_value(fe, *pos)?;
                    return Ok(Flow::Return(self.merge(c, ft, fe, *pos)?));
                }
                Stmt::If {
                    cond,
                    then,
                    otherwise,
                    has_else,
                    pos,
                } => {
                    let c = self.condition(cond, env)?;
                    let mark = env.len();
                    if let Some(cv) = self.graph.constant(c) {
                        let body = if cv != 0.0 { then } else { otherwise };
                        let v = self.block(body, env)?;
                        env.truncate(mark);
                        last = v;
                        continue;
                    }
                    let mut env_t = env.clone();
                    let vt = self.block(then, &mut env_t)?;
                    env_t.truncate(mark);
                    let ve = self.block(otherwise, env)?;
                    env.truncate(mark);
                    for k in 0..mark {
                        let (a, b) = (env_t[k].1, env[k].1);
                        if a != b {
                            env[k].1 = self.merge(c, a, b, *pos)?;
                        }
                    }
                    if let (Some(a), Some(b), true) = (vt, ve, *has_else) {
                        last = Some(self.merge(c, a, b, *pos)?);
                    }
                }
                Stmt::Expr(e) => {
                    last = Some(self.expr(e, env)?);
                }
            }
        }
        Ok(Flow::Value(last))
    }

    fn block(&mut self, body: &[Stmt], env: &mut Env) -> Result<Option<Val>, LowerError> {
        let items: Vec<Item> = body.iter().map(Item::S).collect();
        match self.seq(&items, env)? {
            Flow::Value(v) => Ok(v),
            Flow::Return(_) => Err(Unsupported {
                construct: "`return` inside an expression block".into(),
                pos: body.first().map(stmt_pos).unwrap_or_default(),
            }
            .into()),
        }
    }

    fn merge(&mut self, c: NodeId, a: Val, b: Val, pos: Pos) -> Result<Val, LowerError> {
        Ok(match (a, b) {
            (Val::F(x), Val::F(y)) => Val::F(self.graph.select(c, x, y)),
            // Any branch that may be an integer makes the result mixed (see `Val::W`).
            (Val::W(x), Val::F(y) | Val::W(y)) | (Val::F(x), Val::W(y)) => {
                Val::W(self.graph.select(c, x, y))
            }
            (Val::W(x), Val::I(y)) => {
                let k = self.graph.konst(y as f64);
                Val::W(self.graph.select(c, x, k))
            }
            (Val::I(x), Val::W(y)) => {
                let k = self.graph.konst(x as f64);
                Val::W(self.graph.select(c, k, y))
            }
            (Val::B(x), Val::B(y)) => Val::B(self.graph.select(c, x, y)),
            (Val::I(x), Val::I(y)) if x == y => Val::I(x),
            // A literal integer beside a float (`0` for `0.0`): mixed, see `Val::W`.
            (Val::I(x), Val::F(y)) => {
                let k = self.graph.konst(x as f64);
                Val::W(self.graph.select(c, k, y))
            }
            (Val::F(x), Val::I(y)) => {
                let k = self.graph.konst(y as f64);
                Val::W(self.graph.select(c, x, k))
            }
            (Val::I(_), Val::I(_)) => {
                return Err(LowerError::Type {
                    message: "the branches of this `if` give different integers depending on \
                              the state; write float literals (1.0, not 1)"
                        .into(),
                    pos,
                })
            }
            _ => {
                return Err(LowerError::Type {
                    message: "the branches of this `if` give a boolean and a number".into(),
                    pos,
                })
            }
        })
    }

    fn condition(&mut self, e: &Expr, env: &mut Env) -> Result<NodeId, LowerError> {
        match self.expr(e, env)? {
            Val::B(n) => Ok(n),
            _ => Err(LowerError::Type {
                message: "a condition must be a boolean (a comparison)".into(),
                pos: e.pos(),
            }),
        }
    }

    fn expr(&mut self, e: &Expr, env: &mut Env) -> Result<Val, LowerError> {
        self.check_size(e.pos())?;
        Ok(match e {
            Expr::Float(v, _) => Val::F(self.graph.konst(*v)),
            Expr::Int(i, _) => Val::I(*i),
            Expr::Bool(b, _) => Val::B(self.graph.konst(if *b { 1.0 } else { 0.0 })),
            Expr::Var(name, pos) => match env.iter().rev().find(|(n, _)| n == name) {
                Some((_, v)) => *v,
                None => {
                    return Err(LowerError::UnknownName {
                        name: name.clone(),
                        context: self.context(),
                        allowed: self.allowed,
                        pos: *pos,
                    })
                }
            },
            Expr::And(list, pos) | Expr::Or(list, pos) => {
                let op = if matches!(e, Expr::And(..)) {
                    Bin::And
                } else {
                    Bin::Or
                };
                let mut acc: Option<NodeId> = None;
                for item in list {
                    let n = match self.expr(item, env)? {
                        Val::B(n) => n,
                        _ => {
                            return Err(LowerError::Type {
                                message: "`&&` and `||` need booleans".into(),
                                pos: *pos,
                            })
                        }
                    };
                    acc = Some(match acc {
                        None => n,
                        Some(a) => self.graph.bin(op, a, n),
                    });
                }
                match acc {
                    Some(n) => Val::B(n),
                    None => Val::B(self.graph.konst(1.0)),
                }
            }
            Expr::Block(body, pos) => {
                let mark = env.len();
                let v = self.block(body, env)?;
                env.truncate(mark);
                v.ok_or_else(|| LowerError::NoValue {
                    what: "this block".into(),
                    pos: *pos,
                })?
            }
            Expr::Call { name, args, pos } => {
                let mut vals = Vec::with_capacity(args.len());
                for a in args {
                    vals.push(self.expr(a, env)?);
                }
                self.call(name, vals, *pos)?
            }
        })
    }

    fn call(&mut self, name: &str, args: Vec<Val>, pos: Pos) -> Result<Val, LowerError> {
        if let Some(f) = self.funcs.get(&(name.to_string(), args.len())) {
            let f = f.as_ref().map_err(|e| LowerError::Unsupported(e.clone()))?;
            return self.inline(f, args, pos);
        }
        if is_operator(name) {
            return self.operator(name, &args, pos);
        }
        self.math(name, &args, pos)
    }

    fn need_float(&mut self, name: &str, v: Val, pos: Pos) -> Result<NodeId, LowerError> {
        match v {
            Val::F(n) => Ok(n),
            Val::W(_) => Err(mixed_error(
                &format!("`{name}` (which has no integer version)"),
                pos,
            )),
            // An integer where a float is meant (`sqrt(6)`): taken as that float. The
            // script engine itself has no integer `sqrt`; users write integers, and the
            // value is the same either way.
            Val::I(i) => Ok(self.graph.konst(i as f64)),
            Val::B(_) => Err(LowerError::Type {
                message: format!("`{name}` takes a number, not a boolean"),
                pos,
            }),
        }
    }

    fn widen(&mut self, v: Val, pos: Pos, what: &str) -> Result<NodeId, LowerError> {
        match v {
            Val::F(n) | Val::W(n) => Ok(n),
            Val::I(i) => Ok(self.graph.konst(i as f64)),
            Val::B(_) => Err(LowerError::Type {
                message: format!("{what} needs numbers, not booleans"),
                pos,
            }),
        }
    }

    fn math(&mut self, name: &str, args: &[Val], pos: Pos) -> Result<Val, LowerError> {
        let un = match (name, args.len()) {
            ("exp", 1) => Some(Un::Exp),
            ("ln", 1) => Some(Un::Ln),
            ("log", 1) => Some(Un::Log10),
            ("sqrt", 1) => Some(Un::Sqrt),
            ("tanh", 1) => Some(Un::Tanh),
            ("floor", 1) => Some(Un::Floor),
            ("ceiling" | "ceil", 1) => Some(Un::Ceil),
            ("sin", 1) => Some(Un::Sin),
            ("cos", 1) => Some(Un::Cos),
            _ => None,
        };
        if let Some(op) = un {
            let a = self.need_float(name, args[0], pos)?;
            return Ok(Val::F(self.graph.un(op, a)));
        }
        match (name, args) {
            ("abs", [Val::I(i)]) => {
                i.checked_abs()
                    .map(Val::I)
                    .ok_or_else(|| LowerError::Arithmetic {
                        message: format!("negation overflow: abs({i})"),
                        pos,
                    })
            }
            ("abs", [Val::W(a)]) => Ok(Val::W(self.graph.un(Un::Abs, *a))),
            ("abs", [a]) => {
                let a = self.need_float(name, *a, pos)?;
                Ok(Val::F(self.graph.un(Un::Abs, a)))
            }
            ("log", [a, b]) => {
                let a = self.need_float(name, *a, pos)?;
                let b = self.need_float(name, *b, pos)?;
                Ok(Val::F(self.graph.bin(Bin::LogBase, a, b)))
            }
            ("min" | "max", [Val::I(a), Val::I(b)]) => {
                Ok(Val::I(if name == "min" { *a.min(b) } else { *a.max(b) }))
            }
            ("min" | "max", [a, b]) => {
                let mixed = matches!(a, Val::W(_)) || matches!(b, Val::W(_));
                let a = self.widen(*a, pos, name)?;
                let b = self.widen(*b, pos, name)?;
                let op = if name == "min" { Bin::Min } else { Bin::Max };
                let n = self.graph.bin(op, a, b);
                // The smaller or larger value is the same number whichever type it has.
                Ok(if mixed { Val::W(n) } else { Val::F(n) })
            }
            ("pow", [a, b]) => {
                if matches!(a, Val::W(_)) || matches!(b, Val::W(_)) {
                    return Err(mixed_error("`pow`", pos));
                }
                if let (Val::I(_), Val::I(_)) = (a, b) {
                    return Err(LowerError::Type {
                        message: "`pow` takes floats (write 2.0, not 2); use `**` for integers"
                            .into(),
                        pos,
                    });
                }
                let a = self.widen(*a, pos, name)?;
                let b = self.widen(*b, pos, name)?;
                Ok(Val::F(self.graph.bin(Bin::Pow, a, b)))
            }
            _ => Err(LowerError::UnknownFunction {
                name: name.to_string(),
                arity: args.len(),
                pos,
            }),
        }
    }

    fn operator(&mut self, op: &str, args: &[Val], pos: Pos) -> Result<Val, LowerError> {
        let arith = |message: String| LowerError::Arithmetic { message, pos };
        match (op, args) {
            ("-", [Val::I(i)]) => i
                .checked_neg()
                .map(Val::I)
                .ok_or_else(|| arith(format!("negation overflow: -{i}"))),
            ("-", [Val::F(a)]) => Ok(Val::F(self.graph.un(Un::Neg, *a))),
            ("-", [Val::W(a)]) => Ok(Val::W(self.graph.un(Un::Neg, *a))),
            ("+", [v @ (Val::I(_) | Val::F(_) | Val::W(_))]) => Ok(*v),
            ("!", [Val::B(a)]) => Ok(Val::B(self.graph.un(Un::Not, *a))),
            (_, [Val::I(a), Val::I(b)]) => int_op(op, *a, *b, pos, self.graph),
            (_, [a, b]) => {
                let bop = match op {
                    "+" => Bin::Add,
                    "-" => Bin::Sub,
                    "*" => Bin::Mul,
                    "/" => Bin::Div,
                    "%" => Bin::Rem,
                    "**" => Bin::Pow,
                    "<" => Bin::Lt,
                    "<=" => Bin::Le,
                    ">" => Bin::Gt,
                    ">=" => Bin::Ge,
                    "==" => Bin::Eq,
                    "!=" => Bin::Ne,
                    _ => {
                        return Err(Unsupported {
                            construct: format!("operator `{op}`"),
                            pos,
                        }
                        .into())
                    }
                };
                // A mixed value next to a float is a float; next to an integer or another mixed
                // value it stays mixed through + - * and is refused elsewhere.
                let mixed = match (a, b) {
                    (Val::W(_), Val::I(_) | Val::W(_)) | (Val::I(_), Val::W(_)) => {
                        if !matches!(op, "+" | "-" | "*") {
                            return Err(mixed_error(&format!("`{op}`"), pos));
                        }
                        true
                    }
                    _ => false,
                };
                let x = self.widen(*a, pos, &format!("`{op}`"))?;
                let y = self.widen(*b, pos, &format!("`{op}`"))?;
                let n = self.graph.bin(bop, x, y);
                Ok(if is_comparison(op) {
                    Val::B(n)
                } else if mixed {
                    Val::W(n)
                } else {
                    Val::F(n)
                })
            }
            _ => Err(LowerError::Type {
                message: format!("operator `{op}` does not apply to these operands"),
                pos,
            }),
        }
    }
}

fn branch(body: &[Stmt], mark: usize) -> Vec<Item<'_>> {
    let mut v: Vec<Item> = body.iter().map(Item::S).collect();
    v.push(Item::EndScope(mark));
    v
}

fn stmt_pos(s: &Stmt) -> Pos {
    match s {
        Stmt::Let { pos, .. } | Stmt::Assign { pos, .. } | Stmt::If { pos, .. } => *pos,
        Stmt::Return(_, pos) => *pos,
        Stmt::Expr(e) => e.pos(),
    }
}

fn flow_value(f: Flow, pos: Pos) -> Result<Val, LowerError> {
    match f {
        Flow::Return(v) | Flow::Value(Some(v)) => Ok(v),
        Flow::Value(None) => Err(LowerError::NoValue {
            what: "a branch of this `if`".into(),
            pos,
        }),
    }
}

fn is_comparison(op: &str) -> bool {
    matches!(op, "<" | "<=" | ">" | ">=" | "==" | "!=")
}

fn is_operator(name: &str) -> bool {
    matches!(
        name,
        "+" | "-" | "*" | "/" | "%" | "**" | "<" | "<=" | ">" | ">=" | "==" | "!=" | "!"
    )
}

/// Integer operations with the engine's checked semantics (truncating division, errors on
/// overflow and division by zero).
fn int_op(op: &str, a: i64, b: i64, pos: Pos, g: &mut Graph) -> Result<Val, LowerError> {
    let err = |what: &str| LowerError::Arithmetic {
        message: format!("{what}: {a} {op} {b}"),
        pos,
    };
    let boolean = |g: &mut Graph, v: bool| Val::B(g.konst(if v { 1.0 } else { 0.0 }));
    Ok(match op {
        "+" => Val::I(a.checked_add(b).ok_or_else(|| err("integer overflow"))?),
        "-" => Val::I(a.checked_sub(b).ok_or_else(|| err("integer overflow"))?),
        "*" => Val::I(a.checked_mul(b).ok_or_else(|| err("integer overflow"))?),
        "/" if b == 0 => return Err(err("division by zero")),
        "/" => Val::I(a.checked_div(b).ok_or_else(|| err("division overflow"))?),
        "%" => Val::I(
            a.checked_rem(b)
                .ok_or_else(|| err("modulo by zero or overflow"))?,
        ),
        "**" if b < 0 => return Err(err("integer raised to a negative power")),
        "**" => {
            let e = u32::try_from(b).map_err(|_| err("exponential overflow"))?;
            Val::I(
                a.checked_pow(e)
                    .ok_or_else(|| err("exponential overflow"))?,
            )
        }
        "<" => boolean(g, a < b),
        "<=" => boolean(g, a <= b),
        ">" => boolean(g, a > b),
        ">=" => boolean(g, a >= b),
        "==" => boolean(g, a == b),
        "!=" => boolean(g, a != b),
        _ => {
            return Err(Unsupported {
                construct: format!("operator `{op}`"),
                pos,
            }
            .into())
        }
    })
}
