//! Symbolic differentiation on the expression graph. Derivatives are new nodes of the same graph
//! (so they share subexpressions with the values and with each other) and are evaluated by the
//! same chunked evaluator. `None` is a structural zero, which keeps Jacobians sparse and avoids
//! building `0 * f` terms (these would also turn `0 * inf` into NaN).

use std::collections::HashMap;

use crate::graph::{Bin, Graph, Input, Node, NodeId, Un};

/// Differentiates nodes with respect to one input, memoising per node.
pub struct Differentiator<'g> {
    g: &'g mut Graph,
    wrt: Input,
    memo: HashMap<NodeId, Option<NodeId>>,
}

impl<'g> Differentiator<'g> {
    /// Derivatives with respect to `wrt`.
    pub fn new(g: &'g mut Graph, wrt: Input) -> Self {
        Self {
            g,
            wrt,
            memo: HashMap::new(),
        }
    }

    fn k(&mut self, v: f64) -> NodeId {
        self.g.konst(v)
    }

    fn mul(&mut self, a: NodeId, b: NodeId) -> NodeId {
        self.g.bin(Bin::Mul, a, b)
    }

    fn scale(&mut self, d: Option<NodeId>, f: NodeId) -> Option<NodeId> {
        d.map(|d| self.mul(f, d))
    }

    fn add(&mut self, a: Option<NodeId>, b: Option<NodeId>) -> Option<NodeId> {
        match (a, b) {
            (None, x) | (x, None) => x,
            (Some(a), Some(b)) => Some(self.g.bin(Bin::Add, a, b)),
        }
    }

    fn sub(&mut self, a: Option<NodeId>, b: Option<NodeId>) -> Option<NodeId> {
        match (a, b) {
            (x, None) => x,
            (None, Some(b)) => Some(self.g.un(Un::Neg, b)),
            (Some(a), Some(b)) => Some(self.g.bin(Bin::Sub, a, b)),
        }
    }

    /// d(node)/d(wrt), or `None` when structurally zero.
    pub fn derive(&mut self, id: NodeId) -> Option<NodeId> {
        if let Some(d) = self.memo.get(&id) {
            return *d;
        }
        // Operands first, iteratively, so deep graphs do not exhaust the stack.
        let mut stack = vec![id];
        while let Some(&n) = stack.last() {
            let pending: Vec<NodeId> = self
                .g
                .operands(n)
                .filter(|o| !self.memo.contains_key(o))
                .collect();
            if pending.is_empty() {
                stack.pop();
                if !self.memo.contains_key(&n) {
                    let d = self.rule(n);
                    self.memo.insert(n, d);
                }
            } else {
                stack.extend(pending);
            }
        }
        self.memo.get(&id).copied().flatten()
    }

    fn d(&self, id: NodeId) -> Option<NodeId> {
        self.memo.get(&id).copied().flatten()
    }

    fn rule(&mut self, f: NodeId) -> Option<NodeId> {
        match self.g.node(f) {
            Node::Const(_) => None,
            Node::Input(i) => (i == self.wrt).then(|| self.k(1.0)),
            Node::Un(op, a) => {
                let da = self.d(a)?;
                let factor = match op {
                    Un::Neg => return Some(self.g.un(Un::Neg, da)),
                    Un::Not | Un::Floor | Un::Ceil | Un::Signum | Un::Trunc => return None,
                    Un::Exp => f,
                    Un::Ln => {
                        let one = self.k(1.0);
                        self.g.bin(Bin::Div, one, a)
                    }
                    Un::Log10 => {
                        let l = self.k(std::f64::consts::LN_10);
                        let al = self.mul(a, l);
                        let one = self.k(1.0);
                        self.g.bin(Bin::Div, one, al)
                    }
                    Un::Sqrt => {
                        let two = self.k(2.0);
                        let tf = self.mul(two, f);
                        let one = self.k(1.0);
                        self.g.bin(Bin::Div, one, tf)
                    }
                    Un::Abs => self.g.un(Un::Signum, a),
                    Un::Tanh => {
                        let one = self.k(1.0);
                        let ff = self.mul(f, f);
                        self.g.bin(Bin::Sub, one, ff)
                    }
                    Un::Sin => self.g.un(Un::Cos, a),
                    Un::Cos => {
                        let s = self.g.un(Un::Sin, a);
                        self.g.un(Un::Neg, s)
                    }
                };
                Some(self.mul(factor, da))
            }
            Node::Bin(op, a, b) => {
                let (da, db) = (self.d(a), self.d(b));
                if da.is_none() && db.is_none() {
                    return None;
                }
                match op {
                    Bin::Add => self.add(da, db),
                    Bin::Sub => self.sub(da, db),
                    Bin::Mul => {
                        let x = self.scale(da, b);
                        let y = self.scale(db, a);
                        self.add(x, y)
                    }
                    Bin::Div => {
                        // (da - (a/b) db) / b, reusing the quotient node f = a/b.
                        let fdb = self.scale(db, f);
                        let num = self.sub(da, fdb)?;
                        Some(self.g.bin(Bin::Div, num, b))
                    }
                    Bin::Rem => {
                        // a % b = a - b trunc(a/b); the truncation is locally constant.
                        let q = self.g.bin(Bin::Div, a, b);
                        let tq = self.g.un(Un::Trunc, q);
                        let x = self.scale(db, tq);
                        self.sub(da, x)
                    }
                    Bin::Pow => {
                        let x = match (da, self.g.constant(b)) {
                            (Some(da), Some(e)) => {
                                // e a^(e-1) da; powf(a, e-1) stays finite at a = 0 for e >= 1.
                                let em1 = self.k(e - 1.0);
                                let p = self.g.bin(Bin::Pow, a, em1);
                                let ek = self.k(e);
                                let ep = self.mul(ek, p);
                                Some(self.mul(ep, da))
                            }
                            (Some(da), None) => {
                                let q = self.g.bin(Bin::Div, b, a);
                                let fq = self.mul(f, q);
                                Some(self.mul(fq, da))
                            }
                            (None, _) => None,
                        };
                        let y = db.map(|db| {
                            let l = self.g.un(Un::Ln, a);
                            let fl = self.mul(f, l);
                            self.mul(fl, db)
                        });
                        self.add(x, y)
                    }
                    Bin::LogBase => {
                        // ln(a)/ln(b): d = da/(a ln b) - f db/(b ln b).
                        let lb = self.g.un(Un::Ln, b);
                        let x = da.map(|da| {
                            let alb = self.mul(a, lb);
                            self.g.bin(Bin::Div, da, alb)
                        });
                        let y = db.map(|db| {
                            let blb = self.mul(b, lb);
                            let fdb = self.mul(f, db);
                            self.g.bin(Bin::Div, fdb, blb)
                        });
                        self.sub(x, y)
                    }
                    Bin::Min | Bin::Max => {
                        let cmp = if op == Bin::Min {
                            Bin::RawLe
                        } else {
                            Bin::RawGe
                        };
                        let c = self.g.bin(cmp, a, b);
                        let zero = self.k(0.0);
                        let (x, y) = (da.unwrap_or(zero), db.unwrap_or(zero));
                        Some(self.g.select(c, x, y))
                    }
                    Bin::Lt
                    | Bin::Le
                    | Bin::Gt
                    | Bin::Ge
                    | Bin::Eq
                    | Bin::Ne
                    | Bin::And
                    | Bin::Or
                    | Bin::RawLe
                    | Bin::RawGe => None,
                }
            }
            Node::Select(c, a, b) => {
                let (da, db) = (self.d(a), self.d(b));
                if da.is_none() && db.is_none() {
                    return None;
                }
                let zero = self.k(0.0);
                let (x, y) = (da.unwrap_or(zero), db.unwrap_or(zero));
                Some(self.g.select(c, x, y))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn product_rule_and_structural_zero() {
        let mut g = Graph::new();
        let u = g.input(Input::Species(0));
        let v = g.input(Input::Species(1));
        let uv = g.bin(Bin::Mul, u, v);
        let e = g.un(Un::Exp, uv);
        let mut d = Differentiator::new(&mut g, Input::Species(0));
        let de = d.derive(e).unwrap();
        // d/du exp(uv) = exp(uv) v
        let val = g.eval_point(de, &[0.5, 2.0], 0.0, 0.0, 0.0);
        assert!((val - (1.0f64).exp() * 2.0).abs() < 1e-12);
        let w = g.input(Input::Species(2));
        let mut d = Differentiator::new(&mut g, Input::Species(2));
        assert_eq!(d.derive(e), None);
        assert!(d.derive(w).is_some());
    }
}
