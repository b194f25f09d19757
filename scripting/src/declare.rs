//! The declaration surface of a model file: a sandboxed script engine whose top-level code calls
//! `param`, `species`, `chemotaxis`, `integral` and `field` to describe the model. Only the
//! engine's public API is used here.

use std::sync::{Arc, Mutex};

use rhai::packages::{Package, StandardPackage};
use rhai::{Dynamic, Engine, EvalAltResult, FnPtr, Map, NativeCallContext, Position};

use crate::error::{ModelError, SourcePos};
use crate::overrides::Overrides;

/// Operation budget of a model's top-level code.
pub const MAX_OPERATIONS: u64 = 2_000_000;
/// Deepest call nesting in top-level code.
pub const MAX_CALL_LEVELS: usize = 48;
/// Longest string top-level code may build.
pub const MAX_STRING: usize = 16 * 1024;
/// Largest array or map top-level code may build.
pub const MAX_COLLECTION: usize = 16 * 1024;

/// Helper functions every model can call (compiled like the model's own functions).
pub const PRELUDE: &str = r#"
// Gaussian bump of unit height centred at (x0, y0) with standard deviation `width`.
fn bump(x, y, x0, y0, width) {
    exp(-((x - x0) * (x - x0) + (y - y0) * (y - y0)) / (2.0 * width * width))
}
// 1 inside the disc of `radius` around (x0, y0), 0 outside.
fn disc(x, y, x0, y0, radius) {
    if (x - x0) * (x - x0) + (y - y0) * (y - y0) <= radius * radius { 1.0 } else { 0.0 }
}
// Disc with a smooth edge of width `edge` (a tanh step), to avoid a jump on the mesh.
fn soft_disc(x, y, x0, y0, radius, edge) {
    0.5 * (1.0 - tanh((sqrt((x - x0) * (x - x0) + (y - y0) * (y - y0)) - radius) / edge))
}
"#;

/// A term as written: a number, an expression string or a reference to a function.
#[derive(Clone, Debug, PartialEq)]
pub enum TermSrc {
    /// A constant.
    Number(f64),
    /// An expression whose free names are species, parameters, x, y, t.
    Expr(String),
    /// A function (named or anonymous) whose parameter names are species, parameters, x, y, t.
    Function(String),
}

/// Species kinds as declared.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum KindDecl {
    /// Diffuses and may be transported.
    Mobile,
    /// Does not move.
    Immobile,
    /// Elliptic (0 = D Δc + source).
    QuasiSteady,
}

impl KindDecl {
    /// The name used in model files.
    pub fn name(self) -> &'static str {
        match self {
            KindDecl::Mobile => "motile",
            KindDecl::Immobile => "immobile",
            KindDecl::QuasiSteady => "quasi-steady",
        }
    }
}

/// A declared parameter.
#[derive(Clone, Debug, PartialEq)]
pub struct ParamDecl {
    /// Name.
    pub name: String,
    /// Default value.
    pub default: f64,
    /// Effective value (after overrides).
    pub value: f64,
    /// Unit, free text.
    pub unit: String,
    /// Description.
    pub about: String,
    /// Lower bound.
    pub min: f64,
    /// Upper bound.
    pub max: f64,
    /// Declaration.
    pub at: SourcePos,
}

/// A declared species.
#[derive(Clone, Debug, PartialEq)]
pub struct SpeciesDecl {
    /// Name.
    pub name: String,
    /// Kind.
    pub kind: KindDecl,
    /// Diffusion coefficient (mobile and quasi-steady).
    pub diffusion: Option<TermSrc>,
    /// Initial condition.
    pub initial: TermSrc,
    /// Where the initial condition was given when it replaced the model's own (a run
    /// file or the command line); `None` for the declaration itself.
    pub initial_at: Option<SourcePos>,
    /// Reaction term.
    pub reaction: TermSrc,
    /// Unit, free text.
    pub unit: String,
    /// Description.
    pub about: String,
    /// Declaration.
    pub at: SourcePos,
}

/// A declared chemotaxis term.
#[derive(Clone, Debug, PartialEq)]
pub struct ChemotaxisDecl {
    /// The climbing species.
    pub cells: String,
    /// The signal.
    pub signal: String,
    /// χ(c) when true, χ'(c) when false.
    pub potential: bool,
    /// The sensitivity term.
    pub sensitivity: TermSrc,
    /// Density-dependent mobility replacing the cell density in the flux.
    pub factor: Option<TermSrc>,
    /// Declaration.
    pub at: SourcePos,
}

/// A declared diagnostic: an integral over the plate, or an output field.
#[derive(Clone, Debug, PartialEq)]
pub struct DiagnosticDecl {
    /// Name.
    pub name: String,
    /// Integrand or field value.
    pub expr: TermSrc,
    /// An integral (true) or a derived output field (false).
    pub integral: bool,
    /// The run checks that the integral stays constant.
    pub conserved: bool,
    /// Declaration.
    pub at: SourcePos,
}

/// Everything the top-level code declared.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Declarations {
    /// Parameters in declaration order.
    pub params: Vec<ParamDecl>,
    /// Species in declaration order.
    pub species: Vec<SpeciesDecl>,
    /// Chemotaxis terms.
    pub chemotaxis: Vec<ChemotaxisDecl>,
    /// Diagnostics.
    pub diagnostics: Vec<DiagnosticDecl>,
}

#[derive(Default)]
struct State {
    decl: Declarations,
    error: Option<ModelError>,
    file: String,
    overrides: Overrides,
}

type Shared = Arc<Mutex<State>>;
type RResult<T> = Result<T, Box<EvalAltResult>>;

/// A sandboxed engine: no file or network access (no module resolver, no I/O functions
/// registered), `eval` disabled, output discarded, and every resource bounded.
pub fn sandbox() -> Engine {
    let mut e = Engine::new_raw();
    e.register_global_module(StandardPackage::new().as_shared_module());
    e.set_max_operations(MAX_OPERATIONS)
        .set_max_call_levels(MAX_CALL_LEVELS)
        .set_max_expr_depths(64, 64)
        .set_max_string_size(MAX_STRING)
        .set_max_array_size(MAX_COLLECTION)
        .set_max_map_size(MAX_COLLECTION);
    e.disable_symbol("eval");
    // `pow` and `ceil` are not in the engine's library; they are given the same semantics as
    // `**` (always powf) and `ceiling`, so interpreted and compiled terms agree.
    e.register_fn("pow", |a: f64, b: f64| a.powf(b));
    e.register_fn("pow", |a: f64, b: i64| a.powf(b as f64));
    e.register_fn("pow", |a: i64, b: f64| (a as f64).powf(b));
    e.register_fn("ceil", |a: f64| a.ceil());
    e
}

fn at(state: &State, p: Position) -> SourcePos {
    SourcePos {
        file: state.file.clone(),
        line: p.line().unwrap_or(0),
        column: p.position().unwrap_or(0),
    }
}

/// Records a declaration error and stops the script.
fn fail<T>(state: &mut State, err: ModelError) -> RResult<T> {
    let msg = err.to_string();
    if state.error.is_none() {
        state.error = Some(err);
    }
    Err(msg.into())
}

fn with_state<T>(s: &Shared, f: impl FnOnce(&mut State) -> RResult<T>) -> RResult<T> {
    let mut guard = s
        .lock()
        .map_err(|_| Box::<EvalAltResult>::from("internal lock poisoned"))?;
    f(&mut guard)
}

fn decl_error(state: &mut State, p: Position, message: String) -> RResult<()> {
    let at = at(state, p);
    fail(state, ModelError::Declaration { at, message })
}

fn check_new_name(state: &mut State, name: &str, p: Position) -> RResult<()> {
    let here = at(state, p);
    let valid = !name.is_empty()
        && name.chars().all(|c| c.is_alphanumeric() || c == '_')
        && !name.starts_with(|c: char| c.is_ascii_digit());
    if !valid {
        return fail(
            state,
            ModelError::Declaration {
                at: here,
                message: format!("`{name}` is not a valid name"),
            },
        );
    }
    let d = &state.decl;
    let first = if ["x", "y", "t"].contains(&name) {
        Some(0)
    } else {
        d.params
            .iter()
            .map(|p| (&p.name, p.at.line))
            .chain(d.species.iter().map(|s| (&s.name, s.at.line)))
            .chain(d.diagnostics.iter().map(|s| (&s.name, s.at.line)))
            .find(|(n, _)| *n == name)
            .map(|(_, l)| l)
    };
    match first {
        Some(first_line) => fail(
            state,
            ModelError::Duplicate {
                name: name.to_string(),
                at: here,
                first_line,
            },
        ),
        None => Ok(()),
    }
}

fn term(state: &mut State, v: &Dynamic, what: &str, p: Position) -> RResult<TermSrc> {
    if let Ok(f) = v.as_float() {
        return Ok(TermSrc::Number(f));
    }
    if let Ok(i) = v.as_int() {
        return Ok(TermSrc::Number(i as f64));
    }
    if v.is_string() {
        return Ok(TermSrc::Expr(v.to_string()));
    }
    if let Some(f) = v.clone().try_cast::<FnPtr>() {
        if f.is_curried() {
            decl_error(
                state,
                p,
                format!("{what}: closures must not capture variables; pass values as parameters"),
            )?;
        }
        return Ok(TermSrc::Function(f.fn_name().to_string()));
    }
    decl_error(
        state,
        p,
        format!(
            "{what}: expected a number, an expression string or a function, got {}",
            v.type_name()
        ),
    )?;
    Ok(TermSrc::Number(0.0))
}

fn number(state: &mut State, v: &Dynamic, what: &str, p: Position) -> RResult<f64> {
    if let Ok(f) = v.as_float() {
        return Ok(f);
    }
    if let Ok(i) = v.as_int() {
        return Ok(i as f64);
    }
    decl_error(
        state,
        p,
        format!("{what}: expected a number, got {}", v.type_name()),
    )?;
    Ok(0.0)
}

fn text(state: &mut State, v: &Dynamic, what: &str, p: Position) -> RResult<String> {
    if v.is_string() {
        return Ok(v.to_string());
    }
    decl_error(
        state,
        p,
        format!("{what}: expected a string, got {}", v.type_name()),
    )?;
    Ok(String::new())
}

fn check_keys(
    state: &mut State,
    map: &Map,
    allowed: &[&str],
    what: &str,
    p: Position,
) -> RResult<()> {
    for k in map.keys() {
        if !allowed.contains(&k.as_str()) {
            decl_error(
                state,
                p,
                format!(
                    "{what}: unknown key `{k}` (allowed: {})",
                    allowed.join(", ")
                ),
            )?;
        }
    }
    Ok(())
}

fn param(
    s: &Shared,
    ctx: &NativeCallContext,
    name: &str,
    default: Dynamic,
    opts: Map,
) -> RResult<f64> {
    let p = ctx.call_position();
    with_state(s, |st| {
        check_new_name(st, name, p)?;
        let what = format!("parameter `{name}`");
        check_keys(st, &opts, &["unit", "about", "min", "max"], &what, p)?;
        let default = number(st, &default, &what, p)?;
        let get_num = |st: &mut State, k: &str, dflt: f64| -> RResult<f64> {
            match opts.get(k) {
                Some(v) => number(st, v, &format!("{what}, {k}"), p),
                None => Ok(dflt),
            }
        };
        let min = get_num(st, "min", f64::NEG_INFINITY)?;
        let max = get_num(st, "max", f64::INFINITY)?;
        let unit = match opts.get("unit") {
            Some(v) => text(st, v, &what, p)?,
            None => String::new(),
        };
        let about = match opts.get("about") {
            Some(v) => text(st, v, &what, p)?,
            None => String::new(),
        };
        let value = st.overrides.get(name).unwrap_or(default);
        let here = at(st, p);
        if !default.is_finite() {
            return fail(
                st,
                ModelError::Declaration {
                    at: here,
                    message: format!("{what}: default is not finite"),
                },
            );
        }
        if min > max {
            return fail(
                st,
                ModelError::Declaration {
                    at: here,
                    message: format!("{what}: min {min} is above max {max}"),
                },
            );
        }
        if !(value >= min && value <= max) {
            return fail(
                st,
                ModelError::OutOfBounds {
                    name: name.to_string(),
                    value,
                    min,
                    max,
                    at: here,
                },
            );
        }
        st.decl.params.push(ParamDecl {
            name: name.to_string(),
            default,
            value,
            unit,
            about,
            min,
            max,
            at: here,
        });
        Ok(value)
    })
}

fn species(s: &Shared, ctx: &NativeCallContext, name: &str, spec: Map) -> RResult<()> {
    let p = ctx.call_position();
    with_state(s, |st| {
        check_new_name(st, name, p)?;
        let what = format!("species `{name}`");
        check_keys(
            st,
            &spec,
            &["kind", "diffusion", "initial", "reaction", "unit", "about"],
            &what,
            p,
        )?;
        let here = at(st, p);
        let Some(kind) = spec.get("kind") else {
            return fail(
                st,
                ModelError::MissingKind {
                    species: name.to_string(),
                    at: here,
                },
            );
        };
        let kind_name = text(st, kind, &what, p)?;
        let kind = match kind_name.as_str() {
            // "mobile" is the earlier word, still accepted.
            "motile" | "mobile" => KindDecl::Mobile,
            "immobile" => KindDecl::Immobile,
            "quasi-steady" | "quasi_steady" => KindDecl::QuasiSteady,
            other => {
                return decl_error(
                    st,
                    p,
                    format!(
                        "{what}: unknown kind \"{other}\" (use \"motile\", \"immobile\" or \"quasi-steady\"; \"mobile\" is accepted for \"motile\")"
                    ),
                )
            }
        };
        let diffusion = match (kind, spec.get("diffusion")) {
            (KindDecl::Immobile, Some(_)) => {
                return decl_error(
                    st,
                    p,
                    format!("{what}: an immobile species has no diffusion"),
                )
            }
            (KindDecl::Immobile, None) => None,
            (_, Some(d)) => Some(term(st, d, &format!("{what}, diffusion"), p)?),
            (_, None) => {
                return decl_error(
                    st,
                    p,
                    format!("{what}: a {} species needs `diffusion`", kind.name()),
                )
            }
        };
        let get_term = |st: &mut State, k: &str| -> RResult<TermSrc> {
            match spec.get(k) {
                Some(v) => term(st, v, &format!("{what}, {k}"), p),
                None => Ok(TermSrc::Number(0.0)),
            }
        };
        let initial = get_term(st, "initial")?;
        let reaction = get_term(st, "reaction")?;
        let unit = match spec.get("unit") {
            Some(v) => text(st, v, &what, p)?,
            None => String::new(),
        };
        let about = match spec.get("about") {
            Some(v) => text(st, v, &what, p)?,
            None => String::new(),
        };
        st.decl.species.push(SpeciesDecl {
            name: name.to_string(),
            kind,
            diffusion,
            initial,
            initial_at: None,
            reaction,
            unit,
            about,
            at: here,
        });
        Ok(())
    })
}

fn chemotaxis(s: &Shared, ctx: &NativeCallContext, spec: Map) -> RResult<()> {
    let p = ctx.call_position();
    with_state(s, |st| {
        let what = "chemotaxis";
        check_keys(
            st,
            &spec,
            &["cells", "signal", "potential", "sensitivity", "factor"],
            what,
            p,
        )?;
        let get_name = |st: &mut State, k: &str| -> RResult<String> {
            match spec.get(k) {
                Some(v) => text(st, v, &format!("{what}, {k}"), p),
                None => {
                    decl_error(st, p, format!("{what}: `{k}` is required"))?;
                    Ok(String::new())
                }
            }
        };
        let cells = get_name(st, "cells")?;
        let signal = get_name(st, "signal")?;
        let (potential, sens) = match (spec.get("potential"), spec.get("sensitivity")) {
            (Some(v), None) => (true, v),
            (None, Some(v)) => (false, v),
            _ => {
                return decl_error(
                    st,
                    p,
                    format!(
                        "{what}: give exactly one of `potential` (χ(c), flux -u∇χ(c)) or \
                         `sensitivity` (χ'(c), flux -u χ'(c)∇c)"
                    ),
                )
            }
        };
        let sensitivity = term(st, sens, what, p)?;
        let factor = match spec.get("factor") {
            Some(v) => Some(term(st, v, &format!("{what}, factor"), p)?),
            None => None,
        };
        let here = at(st, p);
        st.decl.chemotaxis.push(ChemotaxisDecl {
            cells,
            signal,
            potential,
            sensitivity,
            factor,
            at: here,
        });
        Ok(())
    })
}

fn diagnostic(
    s: &Shared,
    ctx: &NativeCallContext,
    name: &str,
    expr: Dynamic,
    opts: Map,
    integral: bool,
) -> RResult<()> {
    let p = ctx.call_position();
    with_state(s, |st| {
        check_new_name(st, name, p)?;
        let what = format!("{} `{name}`", if integral { "integral" } else { "field" });
        let allowed: &[&str] = if integral { &["conserved"] } else { &[] };
        check_keys(st, &opts, allowed, &what, p)?;
        let conserved = match opts.get("conserved") {
            Some(v) => match v.as_bool() {
                Ok(b) => b,
                Err(_) => {
                    return decl_error(st, p, format!("{what}: `conserved` must be true or false"))
                }
            },
            None => false,
        };
        let expr = term(st, &expr, &what, p)?;
        let here = at(st, p);
        st.decl.diagnostics.push(DiagnosticDecl {
            name: name.to_string(),
            expr,
            integral,
            conserved,
            at: here,
        });
        Ok(())
    })
}

/// Registers the declaration functions on `engine`; returns the state they fill.
fn register(engine: &mut Engine, file: &str, overrides: &Overrides) -> Shared {
    let state: Shared = Arc::new(Mutex::new(State {
        file: file.to_string(),
        overrides: overrides.clone(),
        ..State::default()
    }));
    let s = state.clone();
    engine.register_fn(
        "param",
        move |ctx: NativeCallContext, n: &str, d: Dynamic| param(&s, &ctx, n, d, Map::new()),
    );
    let s = state.clone();
    engine.register_fn(
        "param",
        move |ctx: NativeCallContext, n: &str, d: Dynamic, o: Map| param(&s, &ctx, n, d, o),
    );
    let s = state.clone();
    engine.register_fn("species", move |ctx: NativeCallContext, n: &str, m: Map| {
        species(&s, &ctx, n, m)
    });
    let s = state.clone();
    engine.register_fn("chemotaxis", move |ctx: NativeCallContext, m: Map| {
        chemotaxis(&s, &ctx, m)
    });
    let s = state.clone();
    engine.register_fn(
        "integral",
        move |ctx: NativeCallContext, n: &str, e: Dynamic| {
            diagnostic(&s, &ctx, n, e, Map::new(), true)
        },
    );
    let s = state.clone();
    engine.register_fn(
        "integral",
        move |ctx: NativeCallContext, n: &str, e: Dynamic, o: Map| {
            diagnostic(&s, &ctx, n, e, o, true)
        },
    );
    let s = state.clone();
    engine.register_fn(
        "field",
        move |ctx: NativeCallContext, n: &str, e: Dynamic| {
            diagnostic(&s, &ctx, n, e, Map::new(), false)
        },
    );
    state
}

/// Parses `source`, runs its top-level code in the sandbox and returns the declarations, the
/// engine (without the declaration functions' side effects mattering any more) and the AST with
/// the prelude merged in.
pub fn run_declarations(
    file: &str,
    source: &str,
    overrides: &Overrides,
) -> Result<(Engine, rhai::AST, Declarations), ModelError> {
    let mut engine = sandbox();
    let state = register(&mut engine, file, overrides);
    let pos = |p: Position| SourcePos {
        file: file.to_string(),
        line: p.line().unwrap_or(0),
        column: p.position().unwrap_or(0),
    };
    let user = engine.compile(source).map_err(|e| ModelError::Syntax {
        at: pos(e.1),
        message: e.0.to_string(),
    })?;
    let prelude = engine.compile(PRELUDE).map_err(|e| ModelError::Syntax {
        at: SourcePos {
            file: "<prelude>".into(),
            line: e.1.line().unwrap_or(0),
            column: 0,
        },
        message: e.0.to_string(),
    })?;
    let ast = prelude.merge(&user);
    let run = engine.run_ast(&ast);
    let mut st = state.lock().map_err(|_| ModelError::Script {
        at: pos(Position::NONE),
        message: "internal lock poisoned".into(),
    })?;
    if let Some(err) = st.error.take() {
        return Err(err);
    }
    if let Err(e) = run {
        return Err(script_error(*e, &pos));
    }
    let decl = std::mem::take(&mut st.decl);
    let known = decl.params.iter().map(|p| p.name.as_str());
    overrides.check_known(known)?;
    Ok((engine, ast, decl))
}

fn script_error(e: EvalAltResult, pos: &dyn Fn(Position) -> SourcePos) -> ModelError {
    let p = e.position();
    let inner = match &e {
        EvalAltResult::ErrorInFunctionCall(_, _, inner, _) => inner.as_ref(),
        _ => &e,
    };
    let limit = match inner {
        EvalAltResult::ErrorTooManyOperations(_) => Some(format!(
            "more than {MAX_OPERATIONS} operations (a runaway loop?)"
        )),
        EvalAltResult::ErrorStackOverflow(_) => Some(format!(
            "calls nested deeper than {MAX_CALL_LEVELS} (runaway recursion?)"
        )),
        EvalAltResult::ErrorDataTooLarge(what, _) => Some(format!("{what} too large")),
        _ => None,
    };
    let at = pos(if inner.position().is_none() {
        p
    } else {
        inner.position()
    });
    match limit {
        Some(limit) => ModelError::Limit { at, limit },
        None => ModelError::Script {
            at,
            message: e.to_string(),
        },
    }
}
