//! From declarations to a compiled model: every term is lowered onto one shared graph (so
//! subexpressions shared between terms are computed once), differentiated, and turned into
//! batch kernels.

use std::collections::HashMap;
use std::sync::Arc;

use agarium_core::kernel::{SensitivityForm, SpeciesKind};
use rhai::{Engine, AST};

use crate::declare::{run_declarations, Declarations, KindDecl, TermSrc};
use crate::diff::Differentiator;
use crate::error::{ModelError, SourcePos};
use crate::graph::{Graph, Input, NodeId};
use crate::lower::{Functions, LowerError, Lowerer, Val};
use crate::overrides::Overrides;
use crate::rhai_ast;
use crate::syntax::Pos;
use crate::tape::GraphKernel;

/// A model file after its top-level code ran: declarations plus the parsed functions. Cheap to
/// compile again (parameters are folded into the kernels as constants).
pub struct Model {
    /// File name used in messages.
    pub file: String,
    /// What the file declared (parameter values already include the overrides).
    pub decl: Declarations,
    pub(crate) engine: Arc<Engine>,
    pub(crate) ast: Arc<AST>,
    funcs: Functions,
    signatures: HashMap<String, Vec<String>>,
}

impl std::fmt::Debug for Model {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Model")
            .field("file", &self.file)
            .field("decl", &self.decl)
            .finish_non_exhaustive()
    }
}

/// One species of a compiled model.
#[derive(Clone, Debug, PartialEq)]
pub struct Species {
    /// Name.
    pub name: String,
    /// Kind and diffusion coefficient.
    pub kind: SpeciesKind,
}

/// A compiled chemotaxis term.
#[derive(Clone, Debug)]
pub struct Chemotaxis {
    /// Index of the climbing species.
    pub cells: usize,
    /// Index of the signal.
    pub signal: usize,
    /// Whether `sensitivity` is χ(c) or χ'(c).
    pub form: SensitivityForm,
    /// One output: χ(c) or χ'(c); its Jacobian column `signal` is the derivative in c.
    pub sensitivity: GraphKernel,
    /// One output: the density-dependent mobility f(u) replacing u in the flux, if declared.
    pub factor: Option<GraphKernel>,
}

/// A compiled diagnostic.
#[derive(Clone, Debug)]
pub struct Diagnostic {
    /// Name.
    pub name: String,
    /// Integral (true) or output field (false).
    pub integral: bool,
    /// The run checks that the integral is conserved.
    pub conserved: bool,
    /// One output: the integrand or field value.
    pub kernel: GraphKernel,
}

/// A model ready for the solver.
#[derive(Clone, Debug)]
pub struct CompiledModel {
    /// Species in order; kernels read species in this order.
    pub species: Vec<Species>,
    /// One output per species: its reaction term, with the full Jacobian.
    pub reactions: GraphKernel,
    /// One output per species: the initial condition (a function of x, y).
    pub initial: GraphKernel,
    /// Chemotaxis terms.
    pub chemotaxis: Vec<Chemotaxis>,
    /// Diagnostics.
    pub diagnostics: Vec<Diagnostic>,
    /// Nodes of the shared expression graph.
    pub graph_nodes: usize,
}

/// Which names a term may use.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Scope {
    /// Parameters only (diffusion coefficients).
    Params,
    /// Parameters, x and y (initial conditions).
    Space,
    /// Everything: species, parameters, x, y, t.
    All,
}

impl Model {
    /// Runs the model file's top-level code with `overrides` applied to the parameters.
    pub fn load(file: &str, source: &str, overrides: &Overrides) -> Result<Model, ModelError> {
        // A UTF-8 byte-order mark (some editors write one) is not part of the text.
        let source = source.strip_prefix('\u{feff}').unwrap_or(source);
        let (engine, ast, decl) = run_declarations(file, source, overrides)?;
        let mut funcs = Functions::new();
        let mut signatures = HashMap::new();
        for (name, params) in rhai_ast::function_signatures(&ast) {
            let f = rhai_ast::function_body(&ast, &name, &params);
            funcs.insert((name.clone(), params.len()), f);
            signatures.insert(name, params);
        }
        let model = Model {
            file: file.to_string(),
            decl,
            engine: Arc::new(engine),
            ast: Arc::new(ast),
            funcs,
            signatures,
        };
        model.check_references()?;
        Ok(model)
    }

    /// Reads and loads a model file.
    pub fn load_file(path: &std::path::Path, overrides: &Overrides) -> Result<Model, ModelError> {
        let file = path.display().to_string();
        let source = std::fs::read_to_string(path).map_err(|e| ModelError::Io {
            file: file.clone(),
            message: e.to_string(),
        })?;
        Self::load(&file, &source, overrides)
    }

    /// Index of species `name`.
    pub fn species_index(&self, name: &str) -> Option<usize> {
        self.decl.species.iter().position(|s| s.name == name)
    }

    /// Parameter names of the function `name` (for terms given as functions).
    pub fn function_params(&self, name: &str) -> Option<&[String]> {
        self.signatures.get(name).map(Vec::as_slice)
    }

    fn check_references(&self) -> Result<(), ModelError> {
        for c in &self.decl.chemotaxis {
            for (role, name) in [("cells", &c.cells), ("signal", &c.signal)] {
                if self.species_index(name).is_none() {
                    return Err(ModelError::Declaration {
                        at: c.at.clone(),
                        message: format!("chemotaxis {role}: unknown species `{name}`"),
                    });
                }
            }
        }
        for (src, at) in self.all_terms() {
            if let TermSrc::Function(f) = src {
                if !self.signatures.contains_key(f) {
                    return Err(ModelError::Declaration {
                        at: at.clone(),
                        message: format!("unknown function `{f}`"),
                    });
                }
            }
        }
        Ok(())
    }

    fn all_terms(&self) -> Vec<(&TermSrc, &SourcePos)> {
        let d = &self.decl;
        let mut v = Vec::new();
        for s in &d.species {
            v.push((&s.initial, s.initial_at.as_ref().unwrap_or(&s.at)));
            v.push((&s.reaction, &s.at));
            if let Some(t) = &s.diffusion {
                v.push((t, &s.at));
            }
        }
        for c in &d.chemotaxis {
            v.push((&c.sensitivity, &c.at));
            if let Some(f) = &c.factor {
                v.push((f, &c.at));
            }
        }
        for g in &d.diagnostics {
            v.push((&g.expr, &g.at));
        }
        v
    }

    fn scope(&self, g: &mut Graph, which: Scope) -> HashMap<String, Val> {
        let mut m = HashMap::new();
        for p in &self.decl.params {
            m.insert(p.name.clone(), Val::F(g.konst(p.value)));
        }
        if which != Scope::Params {
            m.insert("x".into(), Val::F(g.input(Input::X)));
            m.insert("y".into(), Val::F(g.input(Input::Y)));
        }
        if which == Scope::All {
            m.insert("t".into(), Val::F(g.input(Input::T)));
            for (i, s) in self.decl.species.iter().enumerate() {
                m.insert(s.name.clone(), Val::F(g.input(Input::Species(i as u32))));
            }
        }
        m
    }

    /// Parses an expression string into our tree.
    pub(crate) fn parse_expression(&self, text: &str) -> Result<crate::syntax::Expr, String> {
        let ast = self
            .engine
            .compile_expression(text)
            .map_err(|e| e.to_string())?;
        rhai_ast::expression(&ast).map_err(|u| format!("{u} (column {})", u.pos.column))
    }

    /// Lowers one term onto `g`.
    fn lower(
        &self,
        g: &mut Graph,
        src: &TermSrc,
        which: Scope,
        context: &str,
        at: &SourcePos,
    ) -> Result<NodeId, ModelError> {
        let scope = self.scope(g, which);
        let allowed = match which {
            Scope::Params => {
                "a diffusion coefficient is a constant: it may use local variables and \
                 parameters, not species, x, y or t"
            }
            Scope::Space => {
                "an initial value may use local variables, parameters, x and y, not species or t"
            }
            Scope::All => crate::lower::ALL_NAMES,
        };
        let wrap = |e: LowerError, from_file: bool| {
            let p = e.pos();
            let at = if from_file && p.line > 0 {
                SourcePos {
                    file: self.file.clone(),
                    line: p.line,
                    column: p.column,
                }
            } else {
                at.clone()
            };
            let context = if from_file {
                context.to_string()
            } else {
                format!("{context} (column {} of the expression)", p.column)
            };
            ModelError::Compile {
                at,
                context,
                source: e,
            }
        };
        match src {
            TermSrc::Number(v) => Ok(g.konst(*v)),
            TermSrc::Expr(text) => {
                let e = self
                    .parse_expression(text)
                    .map_err(|message| ModelError::Declaration {
                        at: at.clone(),
                        message: format!("{context}: in expression \"{text}\": {message}"),
                    })?;
                let mut l = Lowerer::new(g, &self.funcs).allowing(allowed);
                l.expression(&e, &scope, &format!("expression \"{text}\""))
                    .map_err(|e| wrap(e, false))
            }
            TermSrc::Function(name) => {
                let arity = self.signatures.get(name).map_or(0, Vec::len);
                let f = match self.funcs.get(&(name.clone(), arity)) {
                    Some(Ok(f)) => f,
                    Some(Err(u)) => return Err(wrap(LowerError::Unsupported(u.clone()), true)),
                    None => {
                        return Err(ModelError::Declaration {
                            at: at.clone(),
                            message: format!("{context}: unknown function `{name}`"),
                        })
                    }
                };
                let mut l = Lowerer::new(g, &self.funcs).allowing(allowed);
                l.function_by_names(f, &scope).map_err(|e| wrap(e, true))
            }
        }
    }

    /// Replaces the initial condition of `species` by the expression `expr` (a function of
    /// x, y and the parameters, like the model's own), given at `at` (a run file or the
    /// command line), so errors in it point there. It is checked when the model compiles.
    pub fn set_initial(
        &mut self,
        species: &str,
        expr: &str,
        at: SourcePos,
    ) -> Result<(), ModelError> {
        let Some(s) = self.decl.species.iter_mut().find(|s| s.name == species) else {
            let names: Vec<&str> = self.decl.species.iter().map(|s| s.name.as_str()).collect();
            return Err(ModelError::Declaration {
                at,
                message: format!(
                    "initial condition for unknown species `{species}` (the model has: {})",
                    names.join(", ")
                ),
            });
        };
        s.initial = TermSrc::Expr(expr.to_string());
        s.initial_at = Some(at);
        Ok(())
    }

    /// Compiles every term into kernels.
    pub fn compile(&self) -> Result<CompiledModel, ModelError> {
        let mut g = Graph::new();
        let d = &self.decl;
        let ns = d.species.len();
        let mut species = Vec::with_capacity(ns);
        let mut reactions = Vec::with_capacity(ns);
        let mut initial = Vec::with_capacity(ns);
        for s in &d.species {
            let diffusion = match &s.diffusion {
                None => 0.0,
                Some(src) => {
                    let ctx = format!("diffusion of `{}`", s.name);
                    let n = self.lower(&mut g, src, Scope::Params, &ctx, &s.at)?;
                    let Some(v) = g.constant(n) else {
                        return Err(ModelError::Declaration {
                            at: s.at.clone(),
                            message: format!("{ctx} must be a constant (parameters only)"),
                        });
                    };
                    if !(v >= 0.0 && v.is_finite()) {
                        return Err(ModelError::BadDiffusion {
                            species: s.name.clone(),
                            value: v,
                            at: s.at.clone(),
                        });
                    }
                    v
                }
            };
            let kind = match s.kind {
                KindDecl::Mobile => SpeciesKind::Mobile { diffusion },
                KindDecl::Immobile => SpeciesKind::Immobile,
                KindDecl::QuasiSteady => SpeciesKind::QuasiSteady { diffusion },
            };
            species.push(Species {
                name: s.name.clone(),
                kind,
            });
            let ctx = format!("reaction of `{}`", s.name);
            reactions.push(self.lower(&mut g, &s.reaction, Scope::All, &ctx, &s.at)?);
            let ctx = format!("initial condition of `{}`", s.name);
            let at = s.initial_at.as_ref().unwrap_or(&s.at);
            initial.push(self.lower(&mut g, &s.initial, Scope::Space, &ctx, at)?);
        }
        let reactions = kernel(&mut g, ns, &reactions, true);
        let initial = kernel(&mut g, ns, &initial, false);
        let mut chemotaxis = Vec::new();
        for c in &d.chemotaxis {
            let (Some(cells), Some(signal)) =
                (self.species_index(&c.cells), self.species_index(&c.signal))
            else {
                continue;
            };
            let ctx = format!("sensitivity of `{}` to `{}`", c.cells, c.signal);
            let chi = self.lower(&mut g, &c.sensitivity, Scope::All, &ctx, &c.at)?;
            let factor = match &c.factor {
                Some(f) => {
                    let ctx = format!("density factor of `{}`", c.cells);
                    let n = self.lower(&mut g, f, Scope::All, &ctx, &c.at)?;
                    Some(kernel(&mut g, ns, &[n], true))
                }
                None => None,
            };
            chemotaxis.push(Chemotaxis {
                cells,
                signal,
                form: if c.potential {
                    SensitivityForm::Potential
                } else {
                    SensitivityForm::Derivative
                },
                sensitivity: kernel(&mut g, ns, &[chi], true),
                factor,
            });
        }
        let mut diagnostics = Vec::new();
        for dg in &d.diagnostics {
            let ctx = format!("diagnostic `{}`", dg.name);
            let n = self.lower(&mut g, &dg.expr, Scope::All, &ctx, &dg.at)?;
            diagnostics.push(Diagnostic {
                name: dg.name.clone(),
                integral: dg.integral,
                conserved: dg.conserved,
                kernel: kernel(&mut g, ns, &[n], false),
            });
        }
        if g.too_large() {
            return Err(ModelError::Compile {
                at: SourcePos {
                    file: self.file.clone(),
                    ..SourcePos::default()
                },
                context: "model".into(),
                source: LowerError::TooLarge {
                    what: "expression graph limit reached".into(),
                    pos: Pos::default(),
                },
            });
        }
        Ok(CompiledModel {
            species,
            reactions,
            initial,
            chemotaxis,
            diagnostics,
            graph_nodes: g.len(),
        })
    }
}

/// Builds a kernel over `outputs`, with derivatives in every species when `jacobian`.
fn kernel(g: &mut Graph, ns: usize, outputs: &[NodeId], jacobian: bool) -> GraphKernel {
    let mut derivs = vec![vec![None; ns]; outputs.len()];
    if jacobian {
        for s in 0..ns {
            let mut d = Differentiator::new(g, Input::Species(s as u32));
            for (row, &out) in derivs.iter_mut().zip(outputs) {
                row[s] = d.derive(out);
            }
        }
    }
    GraphKernel::new(g, ns, outputs, &derivs)
}

impl CompiledModel {
    /// The solver's view of this model: species, kernels (shared, so the problem is cheap
    /// to clone for many runs) and diagnostics.
    pub fn to_problem(&self) -> agarium_core::problem::Problem {
        use agarium_core::kernel::BatchKernel;
        use agarium_core::problem::{ChemotaxisSpec, DiagnosticSpec, Problem, SpeciesSpec};
        let arc = |k: &GraphKernel| -> Arc<dyn BatchKernel> { Arc::new(k.clone()) };
        Problem {
            species: self
                .species
                .iter()
                .map(|s| SpeciesSpec {
                    name: s.name.clone(),
                    kind: s.kind,
                })
                .collect(),
            reactions: arc(&self.reactions),
            initial: arc(&self.initial),
            chemotaxis: self
                .chemotaxis
                .iter()
                .map(|c| ChemotaxisSpec {
                    cells: c.cells,
                    signal: c.signal,
                    form: c.form,
                    sensitivity: arc(&c.sensitivity),
                    factor: c.factor.as_ref().map(arc),
                })
                .collect(),
            diagnostics: self
                .diagnostics
                .iter()
                .map(|d| DiagnosticSpec {
                    name: d.name.clone(),
                    integral: d.integral,
                    conserved: d.conserved,
                    kernel: arc(&d.kernel),
                })
                .collect(),
        }
    }
}
