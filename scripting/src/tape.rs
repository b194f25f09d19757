//! The chunked evaluator: the nodes a kernel needs become a flat instruction tape over registers,
//! each register one chunk of [`CHUNK`] node values. Every instruction runs one tight loop over
//! a chunk (the operation is chosen once per chunk, not per node), registers are reused after
//! their last use so the working set stays in the first-level cache, constants are broadcast
//! once per call and species values are copied in once per chunk.

use agarium_core::kernel::{check_shapes, BatchKernel, KernelError, KernelInput, Scratch};

use crate::graph::ops;
use crate::graph::{Bin, Graph, Input, Node, NodeId, Un};

/// Nodes per chunk.
pub const CHUNK: usize = 64;

#[derive(Clone, Copy, Debug)]
enum Instr {
    Un(Un, u32, u32),
    Bin(Bin, u32, u32, u32),
    Sel(u32, u32, u32, u32),
}

/// A compiled instruction tape.
#[derive(Clone, Debug)]
pub struct Tape {
    n_regs: usize,
    consts: Vec<(u32, f64)>,
    species: Vec<(u32, usize)>,
    coords: Vec<(u32, Input)>,
    instrs: Vec<Instr>,
    outputs: Vec<u32>,
}

impl Tape {
    /// Compiles the nodes needed for `outputs`.
    pub fn build(g: &Graph, outputs: &[NodeId]) -> Tape {
        // Reachable nodes in id order, which is topological.
        let mut needed = vec![false; g.len()];
        let mut stack: Vec<NodeId> = outputs.to_vec();
        while let Some(n) = stack.pop() {
            if !std::mem::replace(&mut needed[n as usize], true) {
                stack.extend(g.operands(n));
            }
        }
        let order: Vec<NodeId> = (0..g.len() as NodeId)
            .filter(|&n| needed[n as usize])
            .collect();
        let mut last_use = vec![0usize; g.len()];
        for (k, &n) in order.iter().enumerate() {
            for o in g.operands(n) {
                last_use[o as usize] = k;
            }
        }
        for &o in outputs {
            last_use[o as usize] = usize::MAX;
        }
        let mut reg = vec![u32::MAX; g.len()];
        let mut free: Vec<u32> = Vec::new();
        let mut n_regs = 0u32;
        let mut tape = Tape {
            n_regs: 0,
            consts: vec![],
            species: vec![],
            coords: vec![],
            instrs: vec![],
            outputs: vec![],
        };
        for (k, &n) in order.iter().enumerate() {
            let node = g.node(n);
            let permanent = matches!(node, Node::Const(_) | Node::Input(_));
            let r = if permanent {
                n_regs += 1;
                n_regs - 1
            } else {
                free.pop().unwrap_or_else(|| {
                    n_regs += 1;
                    n_regs - 1
                })
            };
            reg[n as usize] = r;
            match node {
                Node::Const(bits) => tape.consts.push((r, f64::from_bits(bits))),
                Node::Input(Input::Species(s)) => tape.species.push((r, s as usize)),
                Node::Input(i) => tape.coords.push((r, i)),
                Node::Un(op, a) => tape.instrs.push(Instr::Un(op, r, reg[a as usize])),
                Node::Bin(op, a, b) => {
                    tape.instrs
                        .push(Instr::Bin(op, r, reg[a as usize], reg[b as usize]))
                }
                Node::Select(c, a, b) => tape.instrs.push(Instr::Sel(
                    r,
                    reg[c as usize],
                    reg[a as usize],
                    reg[b as usize],
                )),
            }
            // Operands whose last use is here go back to the pool only now, so a destination
            // never aliases its own operands.
            for o in g.operands(n) {
                let o = o as usize;
                if last_use[o] == k
                    && !matches!(g.node(o as NodeId), Node::Const(_) | Node::Input(_))
                {
                    last_use[o] = usize::MAX - 1;
                    free.push(reg[o]);
                }
            }
        }
        tape.outputs = outputs.iter().map(|&o| reg[o as usize]).collect();
        tape.n_regs = n_regs as usize;
        tape
    }

    /// Number of instructions.
    pub fn len(&self) -> usize {
        self.instrs.len()
    }

    /// Whether the tape has no instructions.
    pub fn is_empty(&self) -> bool {
        self.instrs.is_empty()
    }

    /// Registers used.
    pub fn registers(&self) -> usize {
        self.n_regs
    }

    /// Evaluates the tape; output `k` goes to `out[k]` at `offsets[k] ..` for each node.
    /// `sinks` receives, per output, the slice of `n` values to fill.
    pub fn run(&self, input: &KernelInput<'_>, sinks: &mut [&mut [f64]], scratch: &mut Scratch) {
        let n = input.len();
        let regs = scratch.buffer(self.n_regs * CHUNK);
        for &(r, v) in &self.consts {
            reg_mut(regs, r).fill(v);
        }
        for &(r, i) in &self.coords {
            if i == Input::T {
                reg_mut(regs, r).fill(input.t);
            }
        }
        let mut start = 0;
        while start < n {
            let len = CHUNK.min(n - start);
            for &(r, s) in &self.species {
                reg_mut(regs, r)[..len].copy_from_slice(&input.species[s][start..start + len]);
            }
            for &(r, i) in &self.coords {
                let src = match i {
                    Input::X => input.x,
                    Input::Y => input.y,
                    _ => continue,
                };
                reg_mut(regs, r)[..len].copy_from_slice(&src[start..start + len]);
            }
            for ins in &self.instrs {
                exec(regs, *ins);
            }
            for (sink, &r) in sinks.iter_mut().zip(&self.outputs) {
                sink[start..start + len].copy_from_slice(&reg(regs, r)[..len]);
            }
            start += len;
        }
    }
}

fn reg(regs: &[f64], r: u32) -> &[f64] {
    let r = r as usize;
    &regs[r * CHUNK..(r + 1) * CHUNK]
}

fn reg_mut(regs: &mut [f64], r: u32) -> &mut [f64] {
    let r = r as usize;
    &mut regs[r * CHUNK..(r + 1) * CHUNK]
}

/// Splits the register file into the destination and the rest (destination never aliases).
fn split(regs: &mut [f64], d: u32) -> (&mut [f64], &[f64], &[f64]) {
    let d = d as usize;
    let (lo, rest) = regs.split_at_mut(d * CHUNK);
    let (dst, hi) = rest.split_at_mut(CHUNK);
    (dst, lo, hi)
}

fn pick<'a>(lo: &'a [f64], hi: &'a [f64], d: u32, r: u32) -> &'a [f64] {
    let (d, r) = (d as usize, r as usize);
    if r < d {
        &lo[r * CHUNK..(r + 1) * CHUNK]
    } else {
        &hi[(r - d - 1) * CHUNK..(r - d) * CHUNK]
    }
}

macro_rules! lanes1 {
    ($dst:expr, $a:expr, |$x:ident| $body:expr) => {
        for (o, &$x) in $dst.iter_mut().zip($a) {
            *o = $body;
        }
    };
}

macro_rules! lanes2 {
    ($dst:expr, $a:expr, $b:expr, |$x:ident, $y:ident| $body:expr) => {
        for ((o, &$x), &$y) in $dst.iter_mut().zip($a).zip($b) {
            *o = $body;
        }
    };
}

#[inline(never)]
fn exec(regs: &mut [f64], ins: Instr) {
    match ins {
        Instr::Un(op, d, a) => {
            let (dst, lo, hi) = split(regs, d);
            let a = pick(lo, hi, d, a);
            // The common cases get their own loop so they vectorise; the rest share one.
            match op {
                Un::Neg => lanes1!(dst, a, |x| -x),
                Un::Exp => lanes1!(dst, a, |x| x.exp()),
                Un::Ln => lanes1!(dst, a, |x| x.ln()),
                Un::Sqrt => lanes1!(dst, a, |x| x.sqrt()),
                Un::Abs => lanes1!(dst, a, |x| x.abs()),
                _ => lanes1!(dst, a, |x| ops::un(op, x)),
            }
        }
        Instr::Bin(op, d, a, b) => {
            let (dst, lo, hi) = split(regs, d);
            let (a, b) = (pick(lo, hi, d, a), pick(lo, hi, d, b));
            match op {
                Bin::Add => lanes2!(dst, a, b, |x, y| x + y),
                Bin::Sub => lanes2!(dst, a, b, |x, y| x - y),
                Bin::Mul => lanes2!(dst, a, b, |x, y| x * y),
                Bin::Div => lanes2!(dst, a, b, |x, y| x / y),
                Bin::Pow => lanes2!(dst, a, b, |x, y| x.powf(y)),
                Bin::Min => lanes2!(dst, a, b, |x, y| ops::bin(Bin::Min, x, y)),
                Bin::Max => lanes2!(dst, a, b, |x, y| ops::bin(Bin::Max, x, y)),
                Bin::Lt => lanes2!(dst, a, b, |x, y| ops::bin(Bin::Lt, x, y)),
                Bin::Gt => lanes2!(dst, a, b, |x, y| ops::bin(Bin::Gt, x, y)),
                _ => lanes2!(dst, a, b, |x, y| ops::bin(op, x, y)),
            }
        }
        Instr::Sel(d, c, a, b) => {
            let (dst, lo, hi) = split(regs, d);
            let (c, a, b) = (pick(lo, hi, d, c), pick(lo, hi, d, a), pick(lo, hi, d, b));
            for (((o, &c), &x), &y) in dst.iter_mut().zip(c).zip(a).zip(b) {
                *o = ops::select(c, x, y);
            }
        }
    }
}

/// A compiled kernel: values tape and values-plus-Jacobian tape over one graph.
#[derive(Clone, Debug)]
pub struct GraphKernel {
    n_inputs: usize,
    n_outputs: usize,
    pattern: Vec<bool>,
    /// Jacobian slot for each (output, species) that is not structurally zero.
    jac_slots: Vec<(usize, usize)>,
    values: Tape,
    full: Tape,
}

impl GraphKernel {
    /// Builds a kernel from output nodes and their derivative nodes: `derivs[o][s]` is
    /// ∂output o/∂species s, `None` when structurally zero.
    pub fn new(
        g: &Graph,
        n_inputs: usize,
        outputs: &[NodeId],
        derivs: &[Vec<Option<NodeId>>],
    ) -> GraphKernel {
        let mut pattern = vec![false; outputs.len() * n_inputs];
        let mut all = outputs.to_vec();
        let mut jac_slots = Vec::new();
        for (o, row) in derivs.iter().enumerate() {
            for (s, d) in row.iter().enumerate() {
                if let Some(d) = d {
                    if g.constant(*d) == Some(0.0) {
                        continue;
                    }
                    pattern[o * n_inputs + s] = true;
                    jac_slots.push((o, s));
                    all.push(*d);
                }
            }
        }
        GraphKernel {
            n_inputs,
            n_outputs: outputs.len(),
            pattern,
            jac_slots,
            values: Tape::build(g, outputs),
            full: Tape::build(g, &all),
        }
    }

    /// Instruction counts of the values tape and of the values-plus-Jacobian tape.
    pub fn tape_lengths(&self) -> (usize, usize) {
        (self.values.len(), self.full.len())
    }
}

impl BatchKernel for GraphKernel {
    fn n_inputs(&self) -> usize {
        self.n_inputs
    }

    fn n_outputs(&self) -> usize {
        self.n_outputs
    }

    fn depends_on(&self, output: usize, species: usize) -> bool {
        species < self.n_inputs
            && self
                .pattern
                .get(output * self.n_inputs + species)
                .copied()
                .unwrap_or(false)
    }

    fn eval(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        scratch: &mut Scratch,
    ) -> Result<(), KernelError> {
        check_shapes(self, input, out, None)?;
        let n = input.len();
        if n == 0 {
            return Ok(());
        }
        let mut sinks: Vec<&mut [f64]> = out.chunks_mut(n).collect();
        self.values.run(input, &mut sinks, scratch);
        Ok(())
    }

    fn eval_with_jacobian(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        jac: &mut [f64],
        scratch: &mut Scratch,
    ) -> Result<(), KernelError> {
        check_shapes(self, input, out, Some(jac))?;
        let n = input.len();
        if n == 0 {
            return Ok(());
        }
        jac.fill(0.0);
        let mut jac_rows: Vec<Option<&mut [f64]>> = jac.chunks_mut(n).map(Some).collect();
        let mut sinks: Vec<&mut [f64]> = out.chunks_mut(n).collect();
        for &(o, s) in &self.jac_slots {
            if let Some(row) = jac_rows
                .get_mut(o * self.n_inputs + s)
                .and_then(Option::take)
            {
                sinks.push(row);
            }
        }
        self.full.run(input, &mut sinks, scratch);
        Ok(())
    }
}
