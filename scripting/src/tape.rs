//! The chunked evaluator: the nodes a kernel needs become a flat instruction tape over registers,
//! each register one chunk of [`CHUNK`] node values. Every instruction runs one tight loop over
//! a chunk (the operation is chosen once per chunk, not per node), registers are reused after
//! their last use so the working set stays in the first-level cache, and constants are
//! broadcast once per call. Species and coordinates are read straight from the caller's slices
//! and outputs written straight into the caller's buffers; only a final partial chunk goes
//! through padded copies.

use ::multiversion::multiversion;

/// The runtime-dispatch crate the evaluator uses, so benchmarks can build their native baseline
/// with the same dispatch.
#[doc(hidden)]
pub use ::multiversion;

use agarium_core::kernel::{check_shapes, BatchKernel, KernelError, KernelInput, Scratch};

use crate::graph::ops;
use crate::graph::{Bin, Graph, Input, Node, NodeId, Un};

/// Nodes per chunk.
pub const CHUNK: usize = 128;

/// Where an operand is read from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Src {
    /// A register (temporaries, constants, time).
    Reg(u32),
    /// An input slice (species, x, y), indexed into [`Tape::ext`].
    Ext(u32),
    /// A constant, by its bits: only arithmetic (`Bin` of [`Ar`] and `Fuse`) operands, so the
    /// loop multiplies by a value held in a vector register instead of loading a broadcast one.
    Imm(u64),
}

/// Where a result goes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Dst {
    /// A register.
    Reg(u32),
    /// Output `k`, written in place.
    Out(u32),
}

/// The four arithmetic operations, which fused instructions combine.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Ar {
    Add,
    Sub,
    Mul,
    Div,
}

impl Ar {
    fn of(op: Bin) -> Option<Ar> {
        match op {
            Bin::Add => Some(Ar::Add),
            Bin::Sub => Some(Ar::Sub),
            Bin::Mul => Some(Ar::Mul),
            Bin::Div => Some(Ar::Div),
            _ => None,
        }
    }
}

#[derive(Clone, Copy, Debug)]
enum Instr {
    Un(Un, Dst, Src),
    Bin(Bin, Dst, Src, Src),
    Sel(Dst, Src, Src, Src),
    /// `Fuse(p, q, false, d, x, y, z)` is `d = (x p y) q z`; with `true`, `d = z q (x p y)`.
    /// Each operation rounds separately, exactly as two instructions would.
    Fuse(Ar, Ar, bool, Dst, Src, Src, Src),
}

impl Instr {
    fn dst(&self) -> Dst {
        match *self {
            Instr::Un(_, d, _)
            | Instr::Bin(_, d, _, _)
            | Instr::Sel(d, ..)
            | Instr::Fuse(_, _, _, d, ..) => d,
        }
    }
}

/// A compiled instruction tape.
#[derive(Clone, Debug)]
pub struct Tape {
    n_regs: usize,
    consts: Vec<(u32, f64)>,
    /// Register holding the time, if any node reads it.
    time: Option<u32>,
    /// Input slices read directly, in [`Src::Ext`] order.
    ext: Vec<Input>,
    instrs: Vec<Instr>,
    /// Outputs not written in place by an instruction: copied from a source per chunk.
    copies: Vec<(u32, Src)>,
    n_outputs: usize,
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
        let mut uses = vec![0usize; g.len()];
        for &n in &order {
            for o in g.operands(n) {
                uses[o as usize] += 1;
            }
        }
        let mut is_output = vec![false; g.len()];
        for &o in outputs {
            is_output[o as usize] = true;
        }
        // An arithmetic node read once, by another arithmetic node, is computed inside its user
        // (one fused instruction, still two roundings), unless it already fused one itself.
        let mut absorbed = vec![false; g.len()];
        let mut fused = vec![None; g.len()];
        for &n in &order {
            let Node::Bin(op, a, b) = g.node(n) else {
                continue;
            };
            if Ar::of(op).is_none() {
                continue;
            }
            let candidate = |o: NodeId| {
                let o = o as usize;
                uses[o] == 1
                    && !is_output[o]
                    && fused[o].is_none()
                    && matches!(g.node(o as NodeId), Node::Bin(p, ..) if Ar::of(p).is_some())
            };
            if candidate(a) {
                absorbed[a as usize] = true;
                fused[n as usize] = Some(false);
            } else if candidate(b) {
                absorbed[b as usize] = true;
                fused[n as usize] = Some(true);
            }
        }
        // Operands as the emitted instructions read them.
        let effective = |n: NodeId| -> Vec<NodeId> {
            g.operands(n)
                .flat_map(|o| {
                    if absorbed[o as usize] {
                        g.operands(o).collect::<Vec<_>>()
                    } else {
                        vec![o]
                    }
                })
                .collect()
        };
        let mut last_use = vec![0usize; g.len()];
        for (k, &n) in order.iter().enumerate() {
            if !absorbed[n as usize] {
                for o in effective(n) {
                    last_use[o as usize] = k;
                }
            }
        }
        // An output computed by an instruction that nothing else reads is written in place.
        let mut in_place = vec![u32::MAX; g.len()];
        for (k, &o) in outputs.iter().enumerate() {
            let o = o as usize;
            let computed = !matches!(g.node(o as NodeId), Node::Const(_) | Node::Input(_));
            if in_place[o] == u32::MAX && uses[o] == 0 && computed {
                in_place[o] = k as u32;
            } else {
                in_place[o] = u32::MAX - 1;
            }
            last_use[o] = usize::MAX;
        }
        let mut src = vec![Src::Reg(u32::MAX); g.len()];
        let mut free: Vec<u32> = Vec::new();
        let mut n_regs = 0u32;
        let mut tape = Tape {
            n_regs: 0,
            consts: vec![],
            time: None,
            ext: vec![],
            instrs: vec![],
            copies: vec![],
            n_outputs: outputs.len(),
        };
        fn fresh(n_regs: &mut u32) -> u32 {
            *n_regs += 1;
            *n_regs - 1
        }
        for (k, &n) in order.iter().enumerate() {
            if absorbed[n as usize] {
                continue;
            }
            let node = g.node(n);
            let s = |o: NodeId| src[o as usize];
            let place = in_place[n as usize];
            let mut dst = || match place {
                k if k < u32::MAX - 1 => Dst::Out(k),
                _ => Dst::Reg(free.pop().unwrap_or_else(|| fresh(&mut n_regs))),
            };
            // Arithmetic reads constants as immediates.
            let si = |o: NodeId| match g.node(o) {
                Node::Const(bits) => Src::Imm(bits),
                _ => src[o as usize],
            };
            let inner = |o: NodeId| match g.node(o) {
                Node::Bin(p, x, y) => Ar::of(p).map(|p| (p, si(x), si(y))),
                _ => None,
            };
            let (ins, d) = match node {
                Node::Const(bits) => {
                    let r = fresh(&mut n_regs);
                    tape.consts.push((r, f64::from_bits(bits)));
                    (None, Src::Reg(r))
                }
                Node::Input(Input::T) => {
                    let r = fresh(&mut n_regs);
                    tape.time = Some(r);
                    (None, Src::Reg(r))
                }
                Node::Input(i) => {
                    tape.ext.push(i);
                    (None, Src::Ext(tape.ext.len() as u32 - 1))
                }
                Node::Un(op, a) => {
                    let a = s(a);
                    let d = dst();
                    (Some(Instr::Un(op, d, a)), as_src(d))
                }
                Node::Bin(op, a, b) => {
                    let fuse = match (fused[n as usize], Ar::of(op)) {
                        (Some(false), Some(q)) => inner(a).map(|(p, x, y)| (p, q, x, y, si(b))),
                        (Some(true), Some(q)) => inner(b).map(|(p, x, y)| (p, q, x, y, si(a))),
                        _ => None,
                    };
                    let ins = match fuse {
                        Some((p, q, x, y, z)) => {
                            let right = fused[n as usize] == Some(true);
                            Instr::Fuse(p, q, right, dst(), x, y, z)
                        }
                        None if Ar::of(op).is_some() => {
                            let (a, b) = (si(a), si(b));
                            Instr::Bin(op, dst(), a, b)
                        }
                        None => {
                            let (a, b) = (s(a), s(b));
                            Instr::Bin(op, dst(), a, b)
                        }
                    };
                    (Some(ins), as_src(ins.dst()))
                }
                Node::Select(c, a, b) => {
                    let (c, a, b) = (s(c), s(a), s(b));
                    let d = dst();
                    (Some(Instr::Sel(d, c, a, b)), as_src(d))
                }
            };
            tape.instrs.extend(ins);
            src[n as usize] = d;
            // Operands whose last use is here go back to the pool only now, so a destination
            // never aliases its own operands.
            for o in effective(n) {
                let o = o as usize;
                if last_use[o] == k
                    && !matches!(g.node(o as NodeId), Node::Const(_) | Node::Input(_))
                {
                    last_use[o] = usize::MAX - 1;
                    if let Src::Reg(r) = src[o] {
                        free.push(r);
                    }
                }
            }
        }
        for (k, &o) in outputs.iter().enumerate() {
            if in_place[o as usize] != k as u32 {
                tape.copies.push((k as u32, src[o as usize]));
            }
        }
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

    /// Evaluates the tape over all nodes of `input`; `sinks[k]` (`n` values) receives output `k`.
    pub fn run(&self, input: &KernelInput<'_>, sinks: &mut [&mut [f64]], scratch: &mut Scratch) {
        let n = input.len();
        let full = n - n % CHUNK;
        let tail = n - full;
        let n_ext = self.ext.len();
        let buf = scratch.buffer((self.n_regs + n_ext + self.n_outputs) * CHUNK);
        let (regs, rest) = buf.split_at_mut(self.n_regs * CHUNK);
        let (tail_in, tail_out) = rest.split_at_mut(n_ext * CHUNK);
        for &(r, v) in &self.consts {
            reg_mut(regs, r).fill(v);
        }
        if let Some(r) = self.time {
            reg_mut(regs, r).fill(input.t);
        }
        let ext: Vec<&[f64]> = self
            .ext
            .iter()
            .map(|&i| match i {
                Input::Species(s) => input.species[s as usize],
                Input::X => input.x,
                _ => input.y,
            })
            .collect();
        for at in (0..full).step_by(CHUNK) {
            self.chunk(regs, &ext, sinks, at);
        }
        if tail > 0 {
            // The last partial chunk runs on padded copies (padding lanes are computed and
            // dropped).
            tail_in.fill(0.0);
            for (dst, src) in tail_in.chunks_exact_mut(CHUNK).zip(&ext) {
                dst[..tail].copy_from_slice(&src[full..]);
            }
            let ext: Vec<&[f64]> = tail_in.chunks_exact(CHUNK).collect();
            let mut outs: Vec<&mut [f64]> = tail_out.chunks_exact_mut(CHUNK).collect();
            self.chunk(regs, &ext, &mut outs, 0);
            for (sink, o) in sinks.iter_mut().zip(&outs) {
                sink[full..].copy_from_slice(&o[..tail]);
            }
        }
    }

    /// One full chunk of nodes starting at `at`.
    fn chunk(&self, regs: &mut [f64], ext: &[&[f64]], outs: &mut [&mut [f64]], at: usize) {
        for ins in &self.instrs {
            exec(regs, ext, outs, at, ins);
        }
        for &(k, s) in &self.copies {
            let dst = &mut outs[k as usize][at..at + CHUNK];
            dst.copy_from_slice(source(regs, &[], usize::MAX, ext, at, s));
        }
    }
}

fn as_src(d: Dst) -> Src {
    match d {
        Dst::Reg(r) => Src::Reg(r),
        // Never read: in-place outputs have no users.
        Dst::Out(_) => Src::Reg(u32::MAX),
    }
}

fn reg_mut(regs: &mut [f64], r: u32) -> &mut [f64] {
    let r = r as usize;
    &mut regs[r * CHUNK..(r + 1) * CHUNK]
}

/// Registers below the destination `d` are in `lo`, those above in `hi`.
#[inline(always)]
fn source<'a>(
    lo: &'a [f64],
    hi: &'a [f64],
    d: usize,
    ext: &[&'a [f64]],
    at: usize,
    s: Src,
) -> &'a [f64; CHUNK] {
    let s = match s {
        Src::Reg(r) => {
            let r = r as usize;
            if r < d {
                &lo[r * CHUNK..(r + 1) * CHUNK]
            } else {
                &hi[(r - d - 1) * CHUNK..(r - d) * CHUNK]
            }
        }
        Src::Ext(e) => &ext[e as usize][at..at + CHUNK],
        Src::Imm(_) => unreachable!("immediates are only arithmetic operands"),
    };
    lane(s)
}

/// An arithmetic operand: a chunk or an immediate.
#[derive(Clone, Copy)]
enum Opnd<'a> {
    V(&'a [f64; CHUNK]),
    S(f64),
}

/// Value `i` of an operand; monomorphised so an immediate stays in a register.
trait Lanes: Copy {
    fn at(self, i: usize) -> f64;
}

impl Lanes for &[f64; CHUNK] {
    #[inline(always)]
    fn at(self, i: usize) -> f64 {
        self[i]
    }
}

impl Lanes for f64 {
    #[inline(always)]
    fn at(self, _: usize) -> f64 {
        self
    }
}

/// A chunk-long slice as an array, so the loops below have a constant trip count.
#[inline(always)]
fn lane(s: &[f64]) -> &[f64; CHUNK] {
    match s.first_chunk() {
        Some(a) => a,
        None => unreachable!("operand shorter than a chunk"),
    }
}

#[inline(always)]
fn lane_mut(s: &mut [f64]) -> &mut [f64; CHUNK] {
    match s.first_chunk_mut() {
        Some(a) => a,
        None => unreachable!("destination shorter than a chunk"),
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

/// One instruction over one chunk. Cloned per instruction set and chosen at run time, so the
/// loops use wider vectors where the CPU has them; no clone enables contraction into fused
/// multiply-adds (Rust never contracts), so every clone gives the same bits.
#[multiversion(targets("x86_64+avx512f+avx512vl+avx2+fma", "x86_64+avx2+fma", "x86_64+avx"))]
#[inline(never)]
fn exec(regs: &mut [f64], ext: &[&[f64]], outs: &mut [&mut [f64]], at: usize, ins: &Instr) {
    let d = ins.dst();
    // The destination is split off the register file (or is an output), so it never aliases a
    // source.
    let (dst, lo, hi, dr): (&mut [f64], &[f64], &[f64], usize) = match d {
        Dst::Reg(r) => {
            let r = r as usize;
            let (lo, rest) = regs.split_at_mut(r * CHUNK);
            let (dst, hi) = rest.split_at_mut(CHUNK);
            (dst, lo, hi, r)
        }
        Dst::Out(k) => (&mut outs[k as usize][at..at + CHUNK], regs, &[], usize::MAX),
    };
    let dst = lane_mut(dst);
    let src = |s| source(lo, hi, dr, ext, at, s);
    let opnd = |s| match s {
        Src::Imm(bits) => Opnd::S(f64::from_bits(bits)),
        s => Opnd::V(src(s)),
    };
    match *ins {
        Instr::Un(op, _, a) => {
            let a = src(a);
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
        Instr::Bin(op, _, a, b) if Ar::of(op).is_some() => {
            let (a, b) = (opnd(a), opnd(b));
            match op {
                Bin::Add => arith::<0>(dst, a, b),
                Bin::Sub => arith::<1>(dst, a, b),
                Bin::Mul => arith::<2>(dst, a, b),
                _ => arith::<3>(dst, a, b),
            }
        }
        Instr::Bin(op, _, a, b) => {
            let (a, b) = (src(a), src(b));
            match op {
                Bin::Pow => lanes2!(dst, a, b, |x, y| x.powf(y)),
                Bin::Min => lanes2!(dst, a, b, |x, y| ops::bin(Bin::Min, x, y)),
                Bin::Max => lanes2!(dst, a, b, |x, y| ops::bin(Bin::Max, x, y)),
                Bin::Lt => lanes2!(dst, a, b, |x, y| ops::bin(Bin::Lt, x, y)),
                Bin::Gt => lanes2!(dst, a, b, |x, y| ops::bin(Bin::Gt, x, y)),
                _ => lanes2!(dst, a, b, |x, y| ops::bin(op, x, y)),
            }
        }
        Instr::Sel(_, c, a, b) => {
            let (c, a, b) = (src(c), src(a), src(b));
            for (((o, &c), &x), &y) in dst.iter_mut().zip(c).zip(a).zip(b) {
                *o = ops::select(c, x, y);
            }
        }
        Instr::Fuse(p, q, right, _, x, y, z) => {
            use Opnd::{S, V};
            match (opnd(x), opnd(y), opnd(z)) {
                (V(x), V(y), V(z)) => fused(dst, p, q, right, x, y, z),
                (S(x), V(y), V(z)) => fused(dst, p, q, right, x, y, z),
                (V(x), S(y), V(z)) => fused(dst, p, q, right, x, y, z),
                (V(x), V(y), S(z)) => fused(dst, p, q, right, x, y, z),
                (S(x), S(y), V(z)) => fused(dst, p, q, right, x, y, z),
                (S(x), V(y), S(z)) => fused(dst, p, q, right, x, y, z),
                (V(x), S(y), S(z)) => fused(dst, p, q, right, x, y, z),
                (S(x), S(y), S(z)) => fused(dst, p, q, right, x, y, z),
            }
        }
    }
}

#[inline(always)]
fn ar<const P: u8>(x: f64, y: f64) -> f64 {
    match P {
        0 => x + y,
        1 => x - y,
        2 => x * y,
        _ => x / y,
    }
}

/// `d = a p b` for chunk or immediate operands.
#[inline(always)]
fn arith<const P: u8>(d: &mut [f64; CHUNK], a: Opnd, b: Opnd) {
    #[inline(always)]
    fn go<const P: u8, A: Lanes, B: Lanes>(d: &mut [f64; CHUNK], a: A, b: B) {
        for (i, o) in d.iter_mut().enumerate() {
            *o = ar::<P>(a.at(i), b.at(i));
        }
    }
    match (a, b) {
        (Opnd::V(a), Opnd::V(b)) => go::<P, _, _>(d, a, b),
        (Opnd::S(a), Opnd::V(b)) => go::<P, _, _>(d, a, b),
        (Opnd::V(a), Opnd::S(b)) => go::<P, _, _>(d, a, b),
        (Opnd::S(a), Opnd::S(b)) => go::<P, _, _>(d, a, b),
    }
}

/// `d = (x p y) q z`, or `d = z q (x p y)` when `R`; one loop per combination.
#[inline(always)]
fn fused_loop<const P: u8, const Q: u8, const R: bool, X: Lanes, Y: Lanes, Z: Lanes>(
    d: &mut [f64; CHUNK],
    x: X,
    y: Y,
    z: Z,
) {
    for (i, o) in d.iter_mut().enumerate() {
        let t = ar::<P>(x.at(i), y.at(i));
        let z = z.at(i);
        *o = if R { ar::<Q>(z, t) } else { ar::<Q>(t, z) };
    }
}

#[inline(always)]
fn fused<X: Lanes, Y: Lanes, Z: Lanes>(
    d: &mut [f64; CHUNK],
    p: Ar,
    q: Ar,
    right: bool,
    x: X,
    y: Y,
    z: Z,
) {
    macro_rules! by_q {
        ($p:literal) => {
            match (q, right) {
                (Ar::Add, false) => fused_loop::<$p, 0, false, X, Y, Z>(d, x, y, z),
                (Ar::Sub, false) => fused_loop::<$p, 1, false, X, Y, Z>(d, x, y, z),
                (Ar::Mul, false) => fused_loop::<$p, 2, false, X, Y, Z>(d, x, y, z),
                (Ar::Div, false) => fused_loop::<$p, 3, false, X, Y, Z>(d, x, y, z),
                (Ar::Add, true) => fused_loop::<$p, 0, true, X, Y, Z>(d, x, y, z),
                (Ar::Sub, true) => fused_loop::<$p, 1, true, X, Y, Z>(d, x, y, z),
                (Ar::Mul, true) => fused_loop::<$p, 2, true, X, Y, Z>(d, x, y, z),
                (Ar::Div, true) => fused_loop::<$p, 3, true, X, Y, Z>(d, x, y, z),
            }
        };
    }
    match p {
        Ar::Add => by_q!(0),
        Ar::Sub => by_q!(1),
        Ar::Mul => by_q!(2),
        Ar::Div => by_q!(3),
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
        // Only the structural zeros need clearing; the tape writes every other row in full.
        for row in jac_rows.into_iter().flatten() {
            row.fill(0.0);
        }
        self.full.run(input, &mut sinks, scratch);
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A pseudo-random graph mixing every operation, constants and inputs; outputs include
    /// repeated nodes, inputs, constants and nodes that other nodes also read.
    fn random_graph(seed: u64) -> (Graph, Vec<NodeId>) {
        let mut state = seed;
        let mut next = move |m: usize| {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state % m as u64) as usize
        };
        let uns = [
            Un::Neg,
            Un::Not,
            Un::Exp,
            Un::Ln,
            Un::Log10,
            Un::Sqrt,
            Un::Abs,
            Un::Tanh,
            Un::Floor,
            Un::Ceil,
            Un::Sin,
            Un::Cos,
            Un::Signum,
            Un::Trunc,
        ];
        let bins = [
            Bin::Add,
            Bin::Sub,
            Bin::Mul,
            Bin::Div,
            Bin::Rem,
            Bin::Pow,
            Bin::LogBase,
            Bin::Min,
            Bin::Max,
            Bin::Lt,
            Bin::Le,
            Bin::Gt,
            Bin::Ge,
            Bin::Eq,
            Bin::Ne,
            Bin::And,
            Bin::Or,
            Bin::RawLe,
            Bin::RawGe,
        ];
        let mut g = Graph::new();
        let mut pool = vec![
            g.input(Input::Species(0)),
            g.input(Input::Species(1)),
            g.input(Input::Species(2)),
            g.input(Input::X),
            g.input(Input::Y),
            g.input(Input::T),
            g.konst(0.5),
            g.konst(-2.0),
            g.konst(3.0),
        ];
        for _ in 0..120 {
            let pick = |r: usize, pool: &Vec<NodeId>| pool[pool.len() - 1 - r % pool.len().min(12)];
            let (a, b, c) = (
                pick(next(64), &pool),
                pick(next(64), &pool),
                pick(next(64), &pool),
            );
            let n = match next(10) {
                0..=1 => g.un(uns[next(uns.len())], a),
                2..=4 => g.bin(bins[next(4)], a, b),
                5..=7 => g.bin(bins[next(bins.len())], a, b),
                8 => {
                    let k = g.konst(next(7) as f64 - 3.0);
                    g.bin(bins[next(4)], a, k)
                }
                _ => g.select(c, a, b),
            };
            pool.push(n);
        }
        let mut outs: Vec<NodeId> = (0..10).map(|_| pool[next(pool.len())]).collect();
        outs.push(pool[pool.len() - 1]);
        outs.push(outs[0]);
        outs.push(pool[0]);
        outs.push(pool[6]);
        outs.push(pool[5]);
        (g, outs)
    }

    fn same(a: f64, b: f64) -> bool {
        a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan())
    }

    #[test]
    fn tape_matches_point_evaluation_bit_for_bit() {
        for seed in 1..40u64 {
            let (g, outs) = random_graph(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15));
            let tape = Tape::build(&g, &outs);
            // Lengths below, at and above a chunk, with and without a partial last chunk.
            for n in [1, CHUNK - 1, CHUNK, 2 * CHUNK + 5] {
                let sp: Vec<Vec<f64>> = (0..3)
                    .map(|s| {
                        (0..n)
                            .map(|i| ((i * 7 + s * 3) % 11) as f64 * 0.37 - 1.5)
                            .collect()
                    })
                    .collect();
                let x: Vec<f64> = (0..n).map(|i| (i % 5) as f64 - 2.0).collect();
                let y: Vec<f64> = (0..n).map(|i| (i % 3) as f64 * 0.25).collect();
                let refs: Vec<&[f64]> = sp.iter().map(Vec::as_slice).collect();
                let input = KernelInput {
                    species: &refs,
                    x: &x,
                    y: &y,
                    t: 0.75,
                };
                let mut out = vec![f64::NAN; outs.len() * n];
                let mut sinks: Vec<&mut [f64]> = out.chunks_mut(n).collect();
                tape.run(&input, &mut sinks, &mut Scratch::new());
                for (k, &o) in outs.iter().enumerate() {
                    for i in 0..n {
                        let u = [sp[0][i], sp[1][i], sp[2][i]];
                        let want = g.eval_point(o, &u, x[i], y[i], 0.75);
                        let got = out[k * n + i];
                        assert!(
                            same(got, want),
                            "seed {seed} n {n} output {k} node {i}: {got:e} vs {want:e}"
                        );
                    }
                }
            }
        }
    }
}
