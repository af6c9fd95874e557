//! Symbolic differentiation of every operator and function.
//!
//! The rules are the textbook ones; results are not simplified (call [`crate::simplify`]), but
//! zeros and ones are dropped on the way so derivatives of large expressions stay small.

use crate::dag::{Dag, ExprId, Func, Node};
use std::collections::HashMap;

/// ∂e/∂`var`, where `var` is a symbol name.
pub fn derivative(dag: &mut Dag, e: ExprId, var: &str) -> ExprId {
    let mut memo = HashMap::new();
    d(dag, e, var, &mut memo)
}

fn s_add(dag: &mut Dag, terms: Vec<ExprId>) -> ExprId {
    let terms: Vec<ExprId> = terms.into_iter().filter(|&t| !dag.is_zero(t)).collect();
    dag.add(terms)
}

fn s_mul(dag: &mut Dag, factors: Vec<ExprId>) -> ExprId {
    if factors.iter().any(|&f| dag.is_zero(f)) {
        return dag.int(0);
    }
    let factors: Vec<ExprId> = factors.into_iter().filter(|&f| !dag.is_one(f)).collect();
    dag.mul(factors)
}

fn s_div(dag: &mut Dag, a: ExprId, b: ExprId) -> ExprId {
    if dag.is_zero(a) {
        return a;
    }
    dag.div(a, b)
}

fn s_neg(dag: &mut Dag, a: ExprId) -> ExprId {
    if dag.is_zero(a) {
        return a;
    }
    dag.neg(a)
}

fn half(dag: &mut Dag) -> ExprId {
    let one = dag.int(1);
    let two = dag.int(2);
    dag.div(one, two)
}

/// `(a - b)/|a - b|`: the sign of `a - b`, used by `abs`, `min` and `max`.
fn sign_of_difference(dag: &mut Dag, a: ExprId, b: ExprId) -> ExprId {
    let diff = dag.sub(a, b);
    let abs = dag.call(Func::Abs, vec![diff]);
    dag.div(diff, abs)
}

fn d(dag: &mut Dag, e: ExprId, var: &str, memo: &mut HashMap<ExprId, ExprId>) -> ExprId {
    if let Some(&r) = memo.get(&e) {
        return r;
    }
    let node = dag.node(e).clone();
    let r = match node {
        Node::Num(_) => dag.int(0),
        Node::Sym(s) => dag.int(i64::from(&*s == var)),
        Node::Neg(a) => {
            let da = d(dag, a, var, memo);
            s_neg(dag, da)
        }
        Node::Add(xs) => {
            let ds = xs.iter().map(|&x| d(dag, x, var, memo)).collect();
            s_add(dag, ds)
        }
        Node::Mul(xs) => {
            let mut terms = Vec::new();
            for i in 0..xs.len() {
                let di = d(dag, xs[i], var, memo);
                if dag.is_zero(di) {
                    continue;
                }
                let mut factors: Vec<ExprId> = xs.to_vec();
                factors[i] = di;
                terms.push(s_mul(dag, factors));
            }
            s_add(dag, terms)
        }
        Node::Div(a, b) => {
            let da = d(dag, a, var, memo);
            let db = d(dag, b, var, memo);
            let first = s_div(dag, da, b);
            let num = s_mul(dag, vec![a, db]);
            let b2 = dag.powi(b, 2);
            let second = s_div(dag, num, b2);
            let second = s_neg(dag, second);
            s_add(dag, vec![first, second])
        }
        Node::Pow(a, b) => {
            let da = d(dag, a, var, memo);
            let db = d(dag, b, var, memo);
            if dag.is_zero(db) {
                // b·a^(b−1)·a'
                if dag.is_zero(da) {
                    dag.int(0)
                } else {
                    let one = dag.int(1);
                    let bm1 = match dag.as_num(b) {
                        Some(v) => {
                            let v = v - num_rational::BigRational::from_integer(1.into());
                            dag.num(v)
                        }
                        None => dag.sub(b, one),
                    };
                    let p = if dag.is_one(bm1) { a } else { dag.pow(a, bm1) };
                    s_mul(dag, vec![b, p, da])
                }
            } else {
                // a^b·(b'·ln a + b·a'/a)
                let ln = dag.call(Func::Ln, vec![a]);
                let t1 = s_mul(dag, vec![db, ln]);
                let ba = s_mul(dag, vec![b, da]);
                let t2 = s_div(dag, ba, a);
                let inner = s_add(dag, vec![t1, t2]);
                s_mul(dag, vec![e, inner])
            }
        }
        Node::Call(f, xs) => {
            let dx: Vec<ExprId> = xs.iter().map(|&x| d(dag, x, var, memo)).collect();
            if dx.iter().all(|&x| dag.is_zero(x)) {
                dag.int(0)
            } else {
                call_rule(dag, f, &xs, &dx, var, memo)
            }
        }
    };
    memo.insert(e, r);
    r
}

fn call_rule(
    dag: &mut Dag,
    f: Func,
    xs: &[ExprId],
    dx: &[ExprId],
    var: &str,
    memo: &mut HashMap<ExprId, ExprId>,
) -> ExprId {
    let u = xs[0];
    let du = dx[0];
    let one = dag.int(1);
    match f {
        Func::Sin => {
            let c = dag.call(Func::Cos, vec![u]);
            s_mul(dag, vec![c, du])
        }
        Func::Cos => {
            let s = dag.call(Func::Sin, vec![u]);
            let p = s_mul(dag, vec![s, du]);
            dag.neg(p)
        }
        Func::Tan => {
            let c = dag.call(Func::Cos, vec![u]);
            let c2 = dag.powi(c, 2);
            s_div(dag, du, c2)
        }
        Func::Asin | Func::Acos => {
            let u2 = dag.powi(u, 2);
            let r = dag.sub(one, u2);
            let s = dag.call(Func::Sqrt, vec![r]);
            let q = s_div(dag, du, s);
            if f == Func::Acos {
                dag.neg(q)
            } else {
                q
            }
        }
        Func::Atan => {
            let u2 = dag.powi(u, 2);
            let den = dag.add(vec![one, u2]);
            s_div(dag, du, den)
        }
        Func::Atan2 => {
            // atan2(y, x)' = (x·y' − y·x')/(x² + y²)
            let (y, x) = (xs[0], xs[1]);
            let (dy, dxx) = (dx[0], dx[1]);
            let a = s_mul(dag, vec![x, dy]);
            let b = s_mul(dag, vec![y, dxx]);
            let nb = s_neg(dag, b);
            let num = s_add(dag, vec![a, nb]);
            let x2 = dag.powi(x, 2);
            let y2 = dag.powi(y, 2);
            let den = dag.add(vec![x2, y2]);
            s_div(dag, num, den)
        }
        Func::Sqrt => {
            let s = dag.call(Func::Sqrt, vec![u]);
            let two = dag.int(2);
            let den = dag.mul(vec![two, s]);
            s_div(dag, du, den)
        }
        Func::Exp => {
            let ex = dag.call(Func::Exp, vec![u]);
            s_mul(dag, vec![ex, du])
        }
        Func::Ln => s_div(dag, du, u),
        Func::Abs => {
            let abs = dag.call(Func::Abs, vec![u]);
            let sign = dag.div(u, abs);
            s_mul(dag, vec![sign, du])
        }
        Func::Min | Func::Max => {
            // min/max(a, b) = (a + b ∓ |a − b|)/2, differentiable wherever a ≠ b
            let (a, b) = (xs[0], xs[1]);
            let (da, db) = (dx[0], dx[1]);
            let h = half(dag);
            let sum = s_add(dag, vec![da, db]);
            let mean = s_mul(dag, vec![h, sum]);
            let sign = sign_of_difference(dag, a, b);
            let ndb = s_neg(dag, db);
            let diff = s_add(dag, vec![da, ndb]);
            let corr = s_mul(dag, vec![h, sign, diff]);
            let corr = if f == Func::Min {
                s_neg(dag, corr)
            } else {
                corr
            };
            s_add(dag, vec![mean, corr])
        }
        Func::Clamp => {
            let inner = dag.call(Func::Max, vec![xs[0], xs[1]]);
            let outer = dag.call(Func::Min, vec![inner, xs[2]]);
            d(dag, outer, var, memo)
        }
    }
}
