//! The expression graph: a hash-consed arena of nodes in topological order (operands always
//! precede their users), with constant folding and bit-exact identities applied as nodes are
//! built, so equal subexpressions anywhere in a model become one node.

pub mod ops;

use std::collections::HashMap;

pub use ops::{Bin, Un};

/// Index of a node in a [`Graph`].
pub type NodeId = u32;

/// What a graph input slot is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Input {
    /// Species value at the node.
    Species(u32),
    /// Node x coordinate.
    X,
    /// Node y coordinate.
    Y,
    /// Time.
    T,
}

/// A graph node.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Node {
    /// A constant, stored as its bits so nodes hash exactly.
    Const(u64),
    /// An input value.
    Input(Input),
    /// A one-operand operation.
    Un(Un, NodeId),
    /// A two-operand operation.
    Bin(Bin, NodeId, NodeId),
    /// `if c { a } else { b }`.
    Select(NodeId, NodeId, NodeId),
}

/// Largest number of nodes a model may build (guards against exponential scripts).
pub const MAX_NODES: usize = 1 << 20;

/// The arena.
#[derive(Debug, Default, Clone)]
pub struct Graph {
    nodes: Vec<Node>,
    index: HashMap<Node, NodeId>,
}

impl Graph {
    /// An empty graph.
    pub fn new() -> Self {
        Self::default()
    }

    /// Number of nodes.
    pub fn len(&self) -> usize {
        self.nodes.len()
    }

    /// Whether the graph has no nodes.
    pub fn is_empty(&self) -> bool {
        self.nodes.is_empty()
    }

    /// The node with id `id`.
    pub fn node(&self, id: NodeId) -> Node {
        self.nodes[id as usize]
    }

    /// Whether the graph has grown past [`MAX_NODES`].
    pub fn too_large(&self) -> bool {
        self.nodes.len() > MAX_NODES
    }

    fn intern(&mut self, n: Node) -> NodeId {
        if let Some(&id) = self.index.get(&n) {
            return id;
        }
        let id = self.nodes.len() as NodeId;
        self.nodes.push(n);
        self.index.insert(n, id);
        id
    }

    /// The constant of `id`, if it is one.
    pub fn constant(&self, id: NodeId) -> Option<f64> {
        match self.node(id) {
            Node::Const(bits) => Some(f64::from_bits(bits)),
            _ => None,
        }
    }

    /// A constant node.
    pub fn konst(&mut self, v: f64) -> NodeId {
        self.intern(Node::Const(v.to_bits()))
    }

    /// An input node.
    pub fn input(&mut self, i: Input) -> NodeId {
        self.intern(Node::Input(i))
    }

    /// `op(a)`, folded when `a` is constant.
    pub fn un(&mut self, op: Un, a: NodeId) -> NodeId {
        if let Some(v) = self.constant(a) {
            return self.konst(ops::un(op, v));
        }
        self.intern(Node::Un(op, a))
    }

    /// `op(a, b)`, folded when both are constant; identities used are exact in IEEE arithmetic.
    pub fn bin(&mut self, op: Bin, a: NodeId, b: NodeId) -> NodeId {
        let (ca, cb) = (self.constant(a), self.constant(b));
        if let (Some(x), Some(y)) = (ca, cb) {
            return self.konst(ops::bin(op, x, y));
        }
        let is = |c: Option<f64>, v: f64| c.is_some_and(|c| c.to_bits() == v.to_bits());
        match op {
            Bin::Mul if is(cb, 1.0) => return a,
            Bin::Mul if is(ca, 1.0) => return b,
            Bin::Div if is(cb, 1.0) => return a,
            // x - (+0) and x + (-0) are x for every x, including -0 and NaN.
            Bin::Sub if is(cb, 0.0) => return a,
            Bin::Add if is(cb, -0.0) => return a,
            Bin::Add if is(ca, -0.0) => return b,
            _ => {}
        }
        let (a, b) = if op.commutes() && b < a {
            (b, a)
        } else {
            (a, b)
        };
        self.intern(Node::Bin(op, a, b))
    }

    /// `if c { a } else { b }`, folded when `c` is constant or both branches are one node.
    pub fn select(&mut self, c: NodeId, a: NodeId, b: NodeId) -> NodeId {
        if let Some(v) = self.constant(c) {
            return if v != 0.0 { a } else { b };
        }
        if a == b {
            return a;
        }
        self.intern(Node::Select(c, a, b))
    }

    /// Operands of a node.
    pub fn operands(&self, id: NodeId) -> impl Iterator<Item = NodeId> {
        let (a, b, c) = match self.node(id) {
            Node::Const(_) | Node::Input(_) => (None, None, None),
            Node::Un(_, a) => (Some(a), None, None),
            Node::Bin(_, a, b) => (Some(a), Some(b), None),
            Node::Select(c, a, b) => (Some(c), Some(a), Some(b)),
        };
        a.into_iter().chain(b).chain(c)
    }

    /// Evaluates node `id` at one point by direct recursion over the graph (slow; for tests and
    /// one-off values such as diffusion coefficients).
    pub fn eval_point(&self, id: NodeId, species: &[f64], x: f64, y: f64, t: f64) -> f64 {
        let mut memo: HashMap<NodeId, f64> = HashMap::new();
        self.eval_memo(id, species, x, y, t, &mut memo)
    }

    fn eval_memo(
        &self,
        id: NodeId,
        u: &[f64],
        x: f64,
        y: f64,
        t: f64,
        memo: &mut HashMap<NodeId, f64>,
    ) -> f64 {
        if let Some(v) = memo.get(&id) {
            return *v;
        }
        let v = match self.node(id) {
            Node::Const(bits) => f64::from_bits(bits),
            Node::Input(Input::Species(s)) => u.get(s as usize).copied().unwrap_or(f64::NAN),
            Node::Input(Input::X) => x,
            Node::Input(Input::Y) => y,
            Node::Input(Input::T) => t,
            Node::Un(op, a) => ops::un(op, self.eval_memo(a, u, x, y, t, memo)),
            Node::Bin(op, a, b) => {
                let va = self.eval_memo(a, u, x, y, t, memo);
                ops::bin(op, va, self.eval_memo(b, u, x, y, t, memo))
            }
            Node::Select(c, a, b) => {
                let vc = self.eval_memo(c, u, x, y, t, memo);
                let va = self.eval_memo(a, u, x, y, t, memo);
                ops::select(vc, va, self.eval_memo(b, u, x, y, t, memo))
            }
        };
        memo.insert(id, v);
        v
    }

    /// Whether node `id` depends on input `which`.
    pub fn depends_on(&self, id: NodeId, which: Input) -> bool {
        let mut seen = vec![false; self.nodes.len()];
        let mut stack = vec![id];
        while let Some(n) = stack.pop() {
            if std::mem::replace(&mut seen[n as usize], true) {
                continue;
            }
            if self.node(n) == Node::Input(which) {
                return true;
            }
            stack.extend(self.operands(n));
        }
        false
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hash_consing_merges_equal_subexpressions() {
        let mut g = Graph::new();
        let u = g.input(Input::Species(0));
        let v = g.input(Input::Species(1));
        let a = g.bin(Bin::Mul, u, v);
        let b = g.bin(Bin::Mul, v, u);
        assert_eq!(a, b);
        let e1 = g.un(Un::Exp, a);
        let e2 = g.un(Un::Exp, b);
        assert_eq!(e1, e2);
    }

    #[test]
    fn folding_and_exact_identities() {
        let mut g = Graph::new();
        let two = g.konst(2.0);
        let three = g.konst(3.0);
        let p = g.bin(Bin::Pow, two, three);
        assert_eq!(g.constant(p), Some(8.0));
        let u = g.input(Input::Species(0));
        let one = g.konst(1.0);
        assert_eq!(g.bin(Bin::Mul, u, one), u);
        // u + 0.0 is not u when u = -0.0, so it must stay.
        let zero = g.konst(0.0);
        assert_ne!(g.bin(Bin::Add, u, zero), u);
        let t = g.konst(1.0);
        assert_eq!(g.select(t, u, zero), u);
    }

    #[test]
    fn epsilon_comparisons_match_engine_rule() {
        // Within one ulp-scale relative difference counts as equal.
        let x = 1.0;
        let y = 1.0 + f64::EPSILON / 2.0;
        assert_eq!(ops::bin(Bin::Eq, x, y), 1.0);
        assert_eq!(ops::bin(Bin::Lt, x, y), 0.0);
        assert_eq!(ops::bin(Bin::Le, x, y), 1.0);
        assert_eq!(ops::bin(Bin::Gt, 2.0, 1.0), 1.0);
        // Against zero the scale is 1, so tiny values compare equal to zero.
        assert_eq!(ops::bin(Bin::Lt, 0.0, 1e-300), 0.0);
        assert_eq!(ops::bin(Bin::Lt, 0.0, 1e-3), 1.0);
        assert_eq!(ops::bin(Bin::Min, f64::NAN, 1.0), 1.0);
        assert!(ops::bin(Bin::Min, 1.0, f64::NAN).is_nan());
    }
}
