//! The seam between model descriptions and the solver: batch kernels.
//!
//! A kernel evaluates one or more scalar terms (reaction terms, a chemotactic sensitivity, a
//! density-dependent factor, a diagnostic integrand) for a whole slice of mesh nodes at once, and,
//! when asked, every partial derivative of each output with respect to each species. The solver
//! holds the state species-major (each species' node values contiguous), so a kernel reads one
//! plain slice per species and writes plain slices back; it never sees the mesh.
//!
//! Core knows nothing of how a kernel is built: the scripting crate implements [`BatchKernel`]
//! with compiled expression graphs, and core's own tests with plain Rust closures
//! ([`ClosureKernel`]), so one solver runs both.

use thiserror::Error;

/// Species values, coordinates and time for a contiguous run of nodes.
///
/// Every slice has the same length `n` (the number of nodes evaluated).
#[derive(Clone, Copy, Debug)]
pub struct KernelInput<'a> {
    /// One slice per species, in the model's species order: `species[s][i]` is species `s` at
    /// node `i`.
    pub species: &'a [&'a [f64]],
    /// Node x coordinates.
    pub x: &'a [f64],
    /// Node y coordinates.
    pub y: &'a [f64],
    /// Time.
    pub t: f64,
}

impl KernelInput<'_> {
    /// Number of nodes (length of the coordinate slices).
    pub fn len(&self) -> usize {
        self.x.len()
    }

    /// Copies the species values at node `i` into `u` (as many as both hold).
    pub fn gather(&self, i: usize, u: &mut [f64]) {
        for (slot, s) in u.iter_mut().zip(self.species) {
            *slot = s[i];
        }
    }

    /// True when there are no nodes.
    pub fn is_empty(&self) -> bool {
        self.x.is_empty()
    }
}

/// A shape mismatch between a kernel and the buffers handed to it.
#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum KernelError {
    /// The number of species slices differs from what the kernel reads.
    #[error("kernel reads {expected} species but was given {got}")]
    SpeciesCount {
        /// Species the kernel expects.
        expected: usize,
        /// Species slices given.
        got: usize,
    },
    /// An input or output slice has the wrong length.
    #[error("buffer `{what}` has length {got}, expected {expected}")]
    Length {
        /// Which buffer.
        what: &'static str,
        /// Expected length.
        expected: usize,
        /// Actual length.
        got: usize,
    },
}

/// Reusable working memory for kernel evaluation, owned by the caller (one per thread), so
/// kernels stay `Sync` and evaluation allocates nothing after warm-up.
#[derive(Debug, Default, Clone)]
pub struct Scratch {
    buf: Vec<f64>,
}

impl Scratch {
    /// An empty scratch area.
    pub fn new() -> Self {
        Self::default()
    }

    /// A buffer of at least `len` values (contents unspecified).
    pub fn buffer(&mut self, len: usize) -> &mut [f64] {
        if self.buf.len() < len {
            self.buf.resize(len, 0.0);
        }
        &mut self.buf[..len]
    }
}

/// A batch of scalar terms evaluated over many nodes.
///
/// Output layout: `out[o * n + i]` is output `o` at node `i`. Jacobian layout:
/// `jac[(o * n_inputs + s) * n + i]` is ∂(output `o`)/∂(species `s`) at node `i`; entries that
/// are structurally zero (see [`BatchKernel::depends_on`]) are written as `0.0`.
pub trait BatchKernel: Send + Sync {
    /// Number of species slices read (the model's species count).
    fn n_inputs(&self) -> usize;

    /// Number of outputs.
    fn n_outputs(&self) -> usize;

    /// Whether output `o` can depend on species `s` (false means the derivative is exactly zero),
    /// so a solver can skip Jacobian entries.
    fn depends_on(&self, output: usize, species: usize) -> bool;

    /// Evaluates all outputs.
    fn eval(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        scratch: &mut Scratch,
    ) -> Result<(), KernelError>;

    /// Evaluates all outputs and their partial derivatives with respect to every species.
    fn eval_with_jacobian(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        jac: &mut [f64],
        scratch: &mut Scratch,
    ) -> Result<(), KernelError>;
}

/// Checks the shapes of a call; for implementors of [`BatchKernel`].
pub fn check_shapes(
    kernel: &dyn BatchKernel,
    input: &KernelInput<'_>,
    out: &[f64],
    jac: Option<&[f64]>,
) -> Result<(), KernelError> {
    let n = input.len();
    if input.species.len() != kernel.n_inputs() {
        return Err(KernelError::SpeciesCount {
            expected: kernel.n_inputs(),
            got: input.species.len(),
        });
    }
    let same = |what, got: usize, expected: usize| {
        if got == expected {
            Ok(())
        } else {
            Err(KernelError::Length {
                what,
                expected,
                got,
            })
        }
    };
    same("y", input.y.len(), n)?;
    for s in input.species {
        same("species", s.len(), n)?;
    }
    same("out", out.len(), kernel.n_outputs() * n)?;
    if let Some(jac) = jac {
        same("jac", jac.len(), kernel.n_outputs() * kernel.n_inputs() * n)?;
    }
    Ok(())
}

/// How a chemotaxis term gives its sensitivity.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SensitivityForm {
    /// The kernel is the potential χ(c): flux −f(u)∇χ(c). Edge schemes use χ differences.
    Potential,
    /// The kernel is χ'(c): flux −f(u)χ'(c)∇c.
    Derivative,
}

/// How a species evolves.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum SpeciesKind {
    /// u_t = D Δu + transport + reaction.
    Mobile {
        /// Diffusion coefficient.
        diffusion: f64,
    },
    /// u_t = reaction (an ODE at every node).
    Immobile,
    /// 0 = D Δc + reaction (an elliptic equation at every time).
    QuasiSteady {
        /// Diffusion coefficient.
        diffusion: f64,
    },
}

impl SpeciesKind {
    /// The diffusion coefficient, zero for immobile species.
    pub fn diffusion(&self) -> f64 {
        match *self {
            SpeciesKind::Mobile { diffusion } | SpeciesKind::QuasiSteady { diffusion } => diffusion,
            SpeciesKind::Immobile => 0.0,
        }
    }
}

/// Largest species count a [`ClosureKernel`] gathers per node.
pub const CLOSURE_MAX_SPECIES: usize = 16;

/// A kernel made of two plain Rust closures called once per node.
///
/// `value(u, x, y, t, out)` gets the species values at one node and writes `n_outputs` values;
/// `jacobian(u, x, y, t, out, jac)` also writes `jac[o * n_inputs + s]`. Generic, so the
/// closures inline: this is the native baseline the compiled kernels are measured against.
pub struct ClosureKernel<F, J> {
    n_inputs: usize,
    n_outputs: usize,
    pattern: Vec<bool>,
    value: F,
    jacobian: J,
}

impl<F, J> ClosureKernel<F, J>
where
    F: Fn(&[f64], f64, f64, f64, &mut [f64]) + Send + Sync,
    J: Fn(&[f64], f64, f64, f64, &mut [f64], &mut [f64]) + Send + Sync,
{
    /// A kernel reading `n_inputs` species (at most [`CLOSURE_MAX_SPECIES`]) and writing
    /// `n_outputs` values; every derivative is assumed structurally nonzero.
    pub fn new(n_inputs: usize, n_outputs: usize, value: F, jacobian: J) -> Self {
        let n_inputs = n_inputs.min(CLOSURE_MAX_SPECIES);
        Self {
            n_inputs,
            n_outputs,
            pattern: vec![true; n_inputs * n_outputs],
            value,
            jacobian,
        }
    }
}

impl<F, J> BatchKernel for ClosureKernel<F, J>
where
    F: Fn(&[f64], f64, f64, f64, &mut [f64]) + Send + Sync,
    J: Fn(&[f64], f64, f64, f64, &mut [f64], &mut [f64]) + Send + Sync,
{
    fn n_inputs(&self) -> usize {
        self.n_inputs
    }

    fn n_outputs(&self) -> usize {
        self.n_outputs
    }

    fn depends_on(&self, output: usize, species: usize) -> bool {
        self.pattern
            .get(output * self.n_inputs + species)
            .copied()
            .unwrap_or(false)
    }

    fn eval(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        _scratch: &mut Scratch,
    ) -> Result<(), KernelError> {
        check_shapes(self, input, out, None)?;
        let n = input.len();
        let mut u = [0.0; CLOSURE_MAX_SPECIES];
        let mut o = [0.0; CLOSURE_MAX_SPECIES];
        let n_out = self.n_outputs.min(CLOSURE_MAX_SPECIES);
        for i in 0..n {
            input.gather(i, &mut u);
            (self.value)(
                &u[..self.n_inputs],
                input.x[i],
                input.y[i],
                input.t,
                &mut o[..n_out],
            );
            for (k, v) in o[..n_out].iter().enumerate() {
                out[k * n + i] = *v;
            }
        }
        Ok(())
    }

    fn eval_with_jacobian(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        jac: &mut [f64],
        _scratch: &mut Scratch,
    ) -> Result<(), KernelError> {
        check_shapes(self, input, out, Some(jac))?;
        let n = input.len();
        let (ni, no) = (self.n_inputs, self.n_outputs.min(CLOSURE_MAX_SPECIES));
        let mut u = [0.0; CLOSURE_MAX_SPECIES];
        let mut o = [0.0; CLOSURE_MAX_SPECIES];
        let mut j = vec![0.0; ni * no];
        for i in 0..n {
            input.gather(i, &mut u);
            (self.jacobian)(
                &u[..ni],
                input.x[i],
                input.y[i],
                input.t,
                &mut o[..no],
                &mut j,
            );
            for k in 0..no {
                out[k * n + i] = o[k];
                for s in 0..ni {
                    jac[(k * ni + s) * n + i] = j[k * ni + s];
                }
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn logistic() -> impl BatchKernel {
        // f0 = u (1 - u) - u v, f1 = u v: a two-species toy with a known Jacobian.
        ClosureKernel::new(
            2,
            2,
            |u: &[f64], _x, _y, _t, out: &mut [f64]| {
                out[0] = u[0] * (1.0 - u[0]) - u[0] * u[1];
                out[1] = u[0] * u[1];
            },
            |u: &[f64], _x, _y, _t, out: &mut [f64], jac: &mut [f64]| {
                out[0] = u[0] * (1.0 - u[0]) - u[0] * u[1];
                out[1] = u[0] * u[1];
                jac[0] = 1.0 - 2.0 * u[0] - u[1];
                jac[1] = -u[0];
                jac[2] = u[1];
                jac[3] = u[0];
            },
        )
    }

    #[test]
    fn closure_kernel_layout_is_output_major() {
        let k = logistic();
        let u = [0.5, 0.25, 0.0];
        let v = [1.0, 2.0, 3.0];
        let xy = [0.0; 3];
        let input = KernelInput {
            species: &[&u, &v],
            x: &xy,
            y: &xy,
            t: 0.0,
        };
        let mut out = vec![0.0; 6];
        let mut jac = vec![0.0; 12];
        let mut s = Scratch::new();
        k.eval_with_jacobian(&input, &mut out, &mut jac, &mut s)
            .unwrap();
        assert_eq!(out[0], 0.5 * 0.5 - 0.5);
        assert_eq!(out[3 + 1], 0.25 * 2.0);
        // ∂f0/∂v at node 1 = -u.
        assert_eq!(jac[3 + 1], -0.25);
        // ∂f1/∂u at node 2 = v.
        assert_eq!(jac[2 * 3 + 2], 3.0);
        let mut out2 = vec![0.0; 6];
        k.eval(&input, &mut out2, &mut s).unwrap();
        assert_eq!(out, out2);
    }

    #[test]
    fn shape_errors_are_reported_not_panicked() {
        let k = logistic();
        let u = [0.5, 0.25];
        let xy = [0.0; 2];
        let input = KernelInput {
            species: &[&u],
            x: &xy,
            y: &xy,
            t: 0.0,
        };
        let mut out = vec![0.0; 4];
        let err = k.eval(&input, &mut out, &mut Scratch::new()).unwrap_err();
        assert_eq!(
            err,
            KernelError::SpeciesCount {
                expected: 2,
                got: 1
            }
        );
        let input = KernelInput {
            species: &[&u, &u],
            x: &xy,
            y: &xy,
            t: 0.0,
        };
        let mut short = vec![0.0; 3];
        assert!(matches!(
            k.eval(&input, &mut short, &mut Scratch::new()),
            Err(KernelError::Length { what: "out", .. })
        ));
    }

    #[test]
    fn diffusion_of_kinds() {
        assert_eq!(SpeciesKind::Immobile.diffusion(), 0.0);
        assert_eq!(SpeciesKind::QuasiSteady { diffusion: 2.0 }.diffusion(), 2.0);
    }
}
