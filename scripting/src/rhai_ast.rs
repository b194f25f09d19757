//! The only module that touches the script engine's internal syntax tree (`internals` feature of
//! rhai, pinned to one exact version). It converts a parsed script into our own
//! [`crate::syntax`] tree and rejects every construct outside the numeric subset with its name
//! and position. Upgrading rhai means revisiting this file only.

use rhai::{ASTFlags, ASTNode, Expr as RExpr, Position, Stmt as RStmt, AST};
use thiserror::Error;

use crate::syntax::{Expr, Function, Pos, Stmt};

/// A construct outside the numeric subset.
#[derive(Debug, Error, Clone, PartialEq, Eq)]
#[error("{construct} is not supported in model terms")]
pub struct Unsupported {
    /// Name of the construct (for example "while loop").
    pub construct: String,
    /// Where it is.
    pub pos: Pos,
}

/// Converts an engine position.
pub fn pos_of(p: Position) -> Pos {
    Pos {
        line: p.line().unwrap_or(0),
        column: p.position().unwrap_or(0),
    }
}

fn unsupported<T>(construct: &str, p: Position) -> Result<T, Unsupported> {
    Err(Unsupported {
        construct: construct.to_string(),
        pos: pos_of(p),
    })
}

/// Names and arities of the script-defined functions in `ast` (including anonymous ones).
pub fn function_signatures(ast: &AST) -> Vec<(String, Vec<String>)> {
    ast.iter_functions()
        .map(|f| {
            (
                f.name.to_string(),
                f.params.iter().map(|p| p.to_string()).collect(),
            )
        })
        .collect()
}

/// Converts the body of the script function `name` with `arity` parameters.
pub fn function_body(ast: &AST, name: &str, params: &[String]) -> Result<Function, Unsupported> {
    let arity = params.len();
    // (`clone_functions_only_filtered` does not filter in this rhai version when the target
    // module is empty, so the clone is narrowed with `retain_functions` instead.)
    let mut only = ast.clone_functions_only();
    only.retain_functions(|_, _, n, a| n == name && a == arity);
    // The body is not reachable as a field; walking the function-only AST yields its top-level
    // statements as the nodes at depth one.
    let mut top: Vec<RStmt> = Vec::new();
    only.walk(&mut |path: &[ASTNode]| {
        if let [ASTNode::Stmt(s)] = path {
            top.push((*s).clone());
        }
        true
    });
    let pos = top
        .first()
        .map(|s| pos_of(s.position()))
        .unwrap_or_default();
    let body = stmts(&top)?;
    Ok(Function {
        name: name.to_string(),
        params: params.to_vec(),
        body,
        pos,
    })
}

/// Converts the single expression of an AST made by `Engine::compile_expression`.
pub fn expression(ast: &AST) -> Result<Expr, Unsupported> {
    match ast.statements() {
        [RStmt::Expr(e)] => expr(e),
        [RStmt::FnCall(f, p)] => call(f, *p),
        [] => Ok(Expr::Float(0.0, Pos::default())),
        // An `if` (or other statement) standing alone is a statement whose value is the
        // expression's, exactly as in a block.
        list => Ok(Expr::Block(stmts(list)?, pos_of(list[0].position()))),
    }
}

fn stmts(list: &[RStmt]) -> Result<Vec<Stmt>, Unsupported> {
    let mut out = Vec::with_capacity(list.len());
    for s in list {
        if let Some(s) = stmt(s)? {
            out.push(s);
        }
    }
    Ok(out)
}

fn stmt(s: &RStmt) -> Result<Option<Stmt>, Unsupported> {
    Ok(Some(match s {
        RStmt::Noop(_) => return Ok(None),
        RStmt::If(fc, p) => Stmt::If {
            cond: expr(&fc.expr)?,
            then: stmts(fc.body.statements())?,
            otherwise: stmts(fc.branch.statements())?,
            has_else: !fc.branch.is_empty(),
            pos: pos_of(*p),
        },
        RStmt::Switch(_, p) => return unsupported("switch", *p),
        RStmt::While(_, p) => return unsupported("while/loop", *p),
        RStmt::Do(_, _, p) => return unsupported("do loop", *p),
        RStmt::For(_, p) => return unsupported("for loop", *p),
        RStmt::Var(v, _, p) => Stmt::Let {
            name: v.0.name.to_string(),
            value: expr(&v.1)?,
            pos: pos_of(*p),
        },
        RStmt::Assignment(a) => {
            let (op, bin) = &**a;
            let RExpr::Variable(v, _, _) = &bin.lhs else {
                return unsupported("assignment to a property or index", op.position());
            };
            let name = v.1.to_string();
            let op_name = op.get_op_assignment_info().map(|info| info.5.to_string());
            Stmt::Assign {
                name,
                op: op_name,
                value: expr(&bin.rhs)?,
                pos: pos_of(op.position()),
            }
        }
        RStmt::FnCall(f, p) => Stmt::Expr(call(f, *p)?),
        RStmt::Block(b) => Stmt::Expr(Expr::Block(stmts(b.statements())?, pos_of(b.position()))),
        RStmt::TryCatch(_, p) => return unsupported("try/catch", *p),
        RStmt::Expr(e) => Stmt::Expr(expr(e)?),
        RStmt::BreakLoop(_, _, p) => return unsupported("break/continue", *p),
        RStmt::Return(_, flags, p) if flags.intersects(ASTFlags::BREAK) => {
            return unsupported("throw", *p)
        }
        RStmt::Return(e, _, p) => {
            Stmt::Return(e.as_ref().map(|e| expr(e)).transpose()?, pos_of(*p))
        }
        RStmt::Import(_, p) => return unsupported("import", *p),
        RStmt::Export(_, p) => return unsupported("export", *p),
        RStmt::Share(_) => return unsupported("closure capture", s.position()),
        _ => return unsupported("statement", s.position()),
    }))
}

fn call(f: &rhai::FnCallExpr, p: Position) -> Result<Expr, Unsupported> {
    if !f.namespace.is_empty() {
        return unsupported("namespaced function call", p);
    }
    if f.capture_parent_scope {
        return unsupported("call capturing the caller's scope (`!`)", p);
    }
    let args = f.args.iter().map(expr).collect::<Result<Vec<_>, _>>()?;
    Ok(Expr::Call {
        name: f.name.to_string(),
        args,
        pos: pos_of(p),
    })
}

fn expr(e: &RExpr) -> Result<Expr, Unsupported> {
    Ok(match e {
        RExpr::DynamicConstant(d, p) => {
            if let Ok(v) = d.as_float() {
                Expr::Float(v, pos_of(*p))
            } else if let Ok(v) = d.as_int() {
                Expr::Int(v, pos_of(*p))
            } else if let Ok(v) = d.as_bool() {
                Expr::Bool(v, pos_of(*p))
            } else {
                return unsupported(&format!("constant of type {}", d.type_name()), *p);
            }
        }
        RExpr::BoolConstant(b, p) => Expr::Bool(*b, pos_of(*p)),
        RExpr::IntegerConstant(i, p) => Expr::Int(*i, pos_of(*p)),
        RExpr::FloatConstant(f, p) => Expr::Float(**f, pos_of(*p)),
        RExpr::CharConstant(_, p) => return unsupported("character", *p),
        RExpr::StringConstant(_, p) => return unsupported("string", *p),
        RExpr::InterpolatedString(_, p) => return unsupported("string interpolation", *p),
        RExpr::Array(_, p) => return unsupported("array", *p),
        RExpr::Map(_, p) => return unsupported("object map", *p),
        RExpr::Unit(p) => return unsupported("unit value `()`", *p),
        RExpr::Variable(v, _, p) => {
            if !v.2.is_empty() {
                return unsupported("namespaced variable", *p);
            }
            Expr::Var(v.1.to_string(), pos_of(*p))
        }
        RExpr::ThisPtr(p) => return unsupported("`this`", *p),
        RExpr::Property(_, p) => return unsupported("property access", *p),
        RExpr::MethodCall(_, p) => return unsupported("method call", *p),
        RExpr::Stmt(b) => Expr::Block(stmts(b.statements())?, pos_of(b.position())),
        RExpr::FnCall(f, p) => call(f, *p)?,
        RExpr::Dot(_, _, p) => return unsupported("method call or property access", *p),
        RExpr::Index(_, _, p) => return unsupported("indexing", *p),
        RExpr::And(list, p) => {
            Expr::And(list.iter().map(expr).collect::<Result<_, _>>()?, pos_of(*p))
        }
        RExpr::Or(list, p) => {
            Expr::Or(list.iter().map(expr).collect::<Result<_, _>>()?, pos_of(*p))
        }
        RExpr::Coalesce(_, p) => return unsupported("`??` operator", *p),
        RExpr::Custom(_, p) => return unsupported("custom syntax", *p),
        _ => return unsupported("expression", e.position()),
    })
}
