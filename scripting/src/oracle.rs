//! The script engine's own evaluation of model terms, one call per node. This is the reference
//! the compiled kernels are tested against (bit for bit) and the baseline the benchmark measures;
//! the solver never uses it.

use std::sync::Arc;

use agarium_core::kernel::{check_shapes, BatchKernel, KernelError, KernelInput, Scratch};
use rhai::{CallFnOptions, Dynamic, Engine, Scope, AST};

use crate::declare::TermSrc;
use crate::model::Model;

enum Term {
    Number(f64),
    /// Expression compiled with the file's functions merged in.
    Expr(AST),
    /// A function and the names bound to its parameters.
    Func(String, Vec<String>),
}

/// Terms evaluated by the script engine at each node.
pub struct Interpreted {
    engine: Arc<Engine>,
    ast: Arc<AST>,
    terms: Vec<Term>,
    species: Vec<String>,
    params: Vec<(String, f64)>,
}

impl Model {
    /// The reaction terms of every species, interpreted.
    pub fn interpreted_reactions(&self) -> Result<Interpreted, String> {
        let srcs: Vec<TermSrc> = self
            .decl
            .species
            .iter()
            .map(|s| s.reaction.clone())
            .collect();
        self.interpreted(&srcs)
    }

    /// The sensitivity of chemotaxis term `i`, interpreted.
    pub fn interpreted_sensitivity(&self, i: usize) -> Result<Interpreted, String> {
        let c = self
            .decl
            .chemotaxis
            .get(i)
            .ok_or("no such chemotaxis term")?;
        self.interpreted(std::slice::from_ref(&c.sensitivity))
    }

    /// Arbitrary terms, interpreted.
    pub fn interpreted(&self, srcs: &[TermSrc]) -> Result<Interpreted, String> {
        let mut terms = Vec::new();
        for s in srcs {
            terms.push(match s {
                TermSrc::Number(v) => Term::Number(*v),
                TermSrc::Expr(text) => {
                    let e = self
                        .engine
                        .compile_expression(text)
                        .map_err(|e| e.to_string())?;
                    Term::Expr(self.ast.clone_functions_only().merge(&e))
                }
                TermSrc::Function(name) => {
                    let params = self
                        .function_params(name)
                        .ok_or("unknown function")?
                        .to_vec();
                    Term::Func(name.clone(), params)
                }
            });
        }
        Ok(Interpreted {
            engine: self.engine.clone(),
            ast: self.ast.clone(),
            terms,
            species: self.decl.species.iter().map(|s| s.name.clone()).collect(),
            params: self
                .decl
                .params
                .iter()
                .map(|p| (p.name.clone(), p.value))
                .collect(),
        })
    }
}

impl Interpreted {
    fn lookup(&self, name: &str, u: &[f64], x: f64, y: f64, t: f64) -> f64 {
        match name {
            "x" => x,
            "y" => y,
            "t" => t,
            _ => {
                if let Some(i) = self.species.iter().position(|s| s == name) {
                    return u[i];
                }
                self.params
                    .iter()
                    .find(|(n, _)| n == name)
                    .map_or(f64::NAN, |(_, v)| *v)
            }
        }
    }

    /// Evaluates term `k` at one point; engine errors give NaN.
    pub fn eval_point(&self, k: usize, u: &[f64], x: f64, y: f64, t: f64) -> f64 {
        let result: Result<Dynamic, _> = match &self.terms[k] {
            Term::Number(v) => return *v,
            Term::Func(name, params) => {
                let args: Vec<Dynamic> = params
                    .iter()
                    .map(|p| Dynamic::from_float(self.lookup(p, u, x, y, t)))
                    .collect();
                let opts = CallFnOptions::new().eval_ast(false).rewind_scope(true);
                self.engine
                    .call_fn_with_options(opts, &mut Scope::new(), &self.ast, name, args)
            }
            Term::Expr(ast) => {
                let mut scope = Scope::new();
                for (i, s) in self.species.iter().enumerate() {
                    scope.push(s.clone(), u[i]);
                }
                for (n, v) in &self.params {
                    scope.push(n.clone(), *v);
                }
                scope.push("x", x).push("y", y).push("t", t);
                self.engine.eval_ast_with_scope(&mut scope, ast)
            }
        };
        match result {
            Ok(d) => d
                .as_float()
                .or_else(|_| d.as_int().map(|i| i as f64))
                .unwrap_or(f64::NAN),
            Err(_) => f64::NAN,
        }
    }
}

impl BatchKernel for Interpreted {
    fn n_inputs(&self) -> usize {
        self.species.len()
    }

    fn n_outputs(&self) -> usize {
        self.terms.len()
    }

    fn depends_on(&self, _output: usize, _species: usize) -> bool {
        true
    }

    fn eval(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        _scratch: &mut Scratch,
    ) -> Result<(), KernelError> {
        check_shapes(self, input, out, None)?;
        let n = input.len();
        let mut u = vec![0.0; self.species.len()];
        for i in 0..n {
            input.gather(i, &mut u);
            for k in 0..self.terms.len() {
                out[k * n + i] = self.eval_point(k, &u, input.x[i], input.y[i], input.t);
            }
        }
        Ok(())
    }

    /// Forward differences (one extra call per species): the engine has no derivatives; this
    /// exists only so the benchmark can compare like with like.
    fn eval_with_jacobian(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        jac: &mut [f64],
        scratch: &mut Scratch,
    ) -> Result<(), KernelError> {
        check_shapes(self, input, out, Some(jac))?;
        self.eval(input, out, scratch)?;
        let n = input.len();
        let ns = self.species.len();
        let mut u = vec![0.0; ns];
        for i in 0..n {
            for s in 0..ns {
                input.gather(i, &mut u);
                let h = 1e-7 * u[s].abs().max(1.0);
                u[s] += h;
                for k in 0..self.terms.len() {
                    let f = self.eval_point(k, &u, input.x[i], input.y[i], input.t);
                    jac[(k * ns + s) * n + i] = (f - out[k * n + i]) / h;
                }
            }
        }
        Ok(())
    }
}
