//! Evaluation in f64: a direct recursive evaluator and a flat tape for repeated evaluation.

use crate::dag::{Dag, ExprId, Func, Node};
use crate::number::to_f64;
use num_rational::BigRational;
use num_traits::ToPrimitive;
use std::collections::HashMap;

/// Applies a formula function to f64 arguments (the same semantics everywhere in lawsmith).
pub fn apply(f: Func, a: &[f64]) -> f64 {
    match f {
        Func::Sin => a[0].sin(),
        Func::Cos => a[0].cos(),
        Func::Tan => a[0].tan(),
        Func::Asin => a[0].asin(),
        Func::Acos => a[0].acos(),
        Func::Atan => a[0].atan(),
        Func::Atan2 => a[0].atan2(a[1]),
        Func::Sqrt => a[0].sqrt(),
        Func::Exp => a[0].exp(),
        Func::Ln => a[0].ln(),
        Func::Abs => a[0].abs(),
        Func::Min => a[0].min(a[1]),
        Func::Max => a[0].max(a[1]),
        Func::Clamp => a[0].max(a[1]).min(a[2]),
    }
}

/// `a^b` with an exact small-integer fast path (so `x^2` is `x*x` bit for bit).
pub fn pow(a: f64, b: f64) -> f64 {
    if b == b.trunc() && b.abs() <= 64.0 {
        powi(a, b as i32)
    } else {
        a.powf(b)
    }
}

/// `x^n` by repeated squaring, one fixed sequence of multiplications for each `n` (the one
/// compiler runtimes use for `powi`), written out so every evaluator of lawsmith — scalar,
/// batched, and the generated code — computes the same bits on every platform: `x^2` is
/// `x*x`, `x^3` is `x*(x*x)`, `x^4` is `(x*x)*(x*x)`; a negative `n` is `1/x^|n|`.
pub fn powi(x: f64, n: i32) -> f64 {
    let mut base = x;
    let mut e = n.unsigned_abs();
    let mut acc = 1.0;
    loop {
        if e & 1 != 0 {
            acc *= base;
        }
        e >>= 1;
        if e == 0 {
            break;
        }
        base *= base;
    }
    if n < 0 {
        1.0 / acc
    } else {
        acc
    }
}

/// Evaluates `root` with symbol values from `env`. Errors name the first unbound symbol.
pub fn eval(dag: &Dag, root: ExprId, env: &HashMap<String, f64>) -> Result<f64, String> {
    let mut memo: HashMap<ExprId, f64> = HashMap::new();
    eval_rec(dag, root, env, &mut memo)
}

fn eval_rec(
    dag: &Dag,
    id: ExprId,
    env: &HashMap<String, f64>,
    memo: &mut HashMap<ExprId, f64>,
) -> Result<f64, String> {
    if let Some(&v) = memo.get(&id) {
        return Ok(v);
    }
    let v = match dag.node(id) {
        Node::Num(v) => to_f64(v),
        Node::Sym(s) => *env
            .get(&**s)
            .ok_or_else(|| format!("no value for symbol `{s}`"))?,
        Node::Neg(a) => -eval_rec(dag, *a, env, memo)?,
        Node::Add(xs) => {
            let mut acc = 0.0;
            for (i, &x) in xs.iter().enumerate() {
                let v = eval_rec(dag, x, env, memo)?;
                acc = if i == 0 { v } else { acc + v };
            }
            acc
        }
        Node::Mul(xs) => {
            let mut acc = 1.0;
            for (i, &x) in xs.iter().enumerate() {
                let v = eval_rec(dag, x, env, memo)?;
                acc = if i == 0 { v } else { acc * v };
            }
            acc
        }
        Node::Div(a, b) => eval_rec(dag, *a, env, memo)? / eval_rec(dag, *b, env, memo)?,
        Node::Pow(a, b) => pow(eval_rec(dag, *a, env, memo)?, eval_rec(dag, *b, env, memo)?),
        Node::Call(f, xs) => {
            let mut args = [0.0; 3];
            for (slot, &x) in args.iter_mut().zip(xs.iter()) {
                *slot = eval_rec(dag, x, env, memo)?;
            }
            apply(*f, &args[..xs.len()])
        }
    };
    memo.insert(id, v);
    Ok(v)
}

/// Arithmetic a [`Tape`] can run on: `f64` here, intervals in the verifier.
pub trait Arith: Clone {
    /// The constant `value`; `exact` says whether `value` equals the rational constant it
    /// stands for (an interval widens an inexact one by an ulp on each side).
    fn constant(value: f64, exact: bool) -> Self;
    /// `-a`.
    fn neg(&self) -> Self;
    /// `a + b`.
    fn add(&self, b: &Self) -> Self;
    /// `a * b`.
    fn mul(&self, b: &Self) -> Self;
    /// `a / b`.
    fn div(&self, b: &Self) -> Self;
    /// `a ^ b`.
    fn pow(&self, b: &Self) -> Self;
    /// `a ^ n` for a small integer `n`.
    fn powi(&self, n: i32) -> Self;
    /// A formula function.
    fn call(f: Func, args: &[Self]) -> Self;
}

impl Arith for f64 {
    fn constant(value: f64, _exact: bool) -> f64 {
        value
    }
    fn neg(&self) -> f64 {
        -self
    }
    fn add(&self, b: &f64) -> f64 {
        self + b
    }
    fn mul(&self, b: &f64) -> f64 {
        self * b
    }
    fn div(&self, b: &f64) -> f64 {
        self / b
    }
    fn pow(&self, b: &f64) -> f64 {
        pow(*self, *b)
    }
    fn powi(&self, n: i32) -> f64 {
        powi(*self, n)
    }
    fn call(f: Func, args: &[f64]) -> f64 {
        apply(f, args)
    }
}

#[derive(Clone, Debug)]
enum Op {
    Const(f64, bool),
    Powi(u32, i32),
    Var(usize),
    Neg(u32),
    Add(u32, u32),
    Mul(u32, u32),
    Div(u32, u32),
    Pow(u32, u32),
    Call(Func, [u32; 3]),
}

/// A compiled, flat form of one or more expressions: each instruction writes one slot, in an
/// order where operands come first. Evaluating it does no hashing and no allocation.
#[derive(Clone, Debug)]
pub struct Tape {
    ops: Vec<Op>,
    outputs: Vec<u32>,
    vars: Vec<String>,
    /// Per slot: a constant some instruction reads as a column (batched evaluation passes
    /// constants to `+ * /` as scalars and fills only these).
    const_column: Vec<bool>,
}

impl Tape {
    /// Compiles `roots` over the given variable order. Errors name a symbol missing from `vars`.
    pub fn compile(dag: &Dag, roots: &[ExprId], vars: &[&str]) -> Result<Tape, String> {
        let var_index: HashMap<&str, usize> =
            vars.iter().enumerate().map(|(i, v)| (*v, i)).collect();
        let mut slot: HashMap<ExprId, u32> = HashMap::new();
        let mut ops = Vec::new();
        let mut outputs = Vec::new();
        for &root in roots {
            // iterative post-order so deep DAGs do not recurse
            let mut stack = vec![(root, false)];
            while let Some((id, expanded)) = stack.pop() {
                if slot.contains_key(&id) {
                    continue;
                }
                let node = dag.node(id);
                if !expanded {
                    stack.push((id, true));
                    for c in node.children_vec().into_iter().rev() {
                        if !slot.contains_key(&c) {
                            stack.push((c, false));
                        }
                    }
                    continue;
                }
                let s = |c: &ExprId| slot[c];
                let emit_chain = |ops: &mut Vec<Op>, xs: &[ExprId], mul: bool| -> u32 {
                    let mut acc = s(&xs[0]);
                    for x in &xs[1..] {
                        ops.push(if mul {
                            Op::Mul(acc, s(x))
                        } else {
                            Op::Add(acc, s(x))
                        });
                        acc = (ops.len() - 1) as u32;
                    }
                    acc
                };
                let out = match node {
                    Node::Num(v) => {
                        let f = to_f64(v);
                        let exact = BigRational::from_float(f).is_some_and(|r| r == *v);
                        ops.push(Op::Const(f, exact));
                        (ops.len() - 1) as u32
                    }
                    Node::Sym(name) => {
                        let i = *var_index
                            .get(&**name)
                            .ok_or_else(|| format!("no variable slot for symbol `{name}`"))?;
                        ops.push(Op::Var(i));
                        (ops.len() - 1) as u32
                    }
                    Node::Neg(a) => {
                        ops.push(Op::Neg(s(a)));
                        (ops.len() - 1) as u32
                    }
                    Node::Add(xs) => emit_chain(&mut ops, xs, false),
                    Node::Mul(xs) => emit_chain(&mut ops, xs, true),
                    Node::Div(a, b) => {
                        ops.push(Op::Div(s(a), s(b)));
                        (ops.len() - 1) as u32
                    }
                    Node::Pow(a, b) => {
                        let small_int = dag
                            .as_num(*b)
                            .filter(|v| v.is_integer())
                            .and_then(|v| v.to_integer().to_i32())
                            .filter(|n| n.unsigned_abs() <= 64);
                        ops.push(match small_int {
                            Some(n) => Op::Powi(s(a), n),
                            None => Op::Pow(s(a), s(b)),
                        });
                        (ops.len() - 1) as u32
                    }
                    Node::Call(f, xs) => {
                        let mut args = [0u32; 3];
                        for (k, x) in xs.iter().enumerate() {
                            args[k] = s(x);
                        }
                        ops.push(Op::Call(*f, args));
                        (ops.len() - 1) as u32
                    }
                };
                slot.insert(id, out);
            }
            outputs.push(slot[&root]);
        }
        let mut const_column = vec![false; ops.len()];
        for op in &ops {
            let read: &[u32] = match op {
                Op::Neg(a) | Op::Powi(a, _) => std::slice::from_ref(a),
                Op::Pow(a, b) => &[*a, *b][..],
                Op::Call(_, args) => &args[..],
                _ => &[],
            };
            for &i in read {
                const_column[i as usize] = true;
            }
        }
        for &o in &outputs {
            const_column[o as usize] = true;
        }
        Ok(Tape {
            ops,
            outputs,
            vars: vars.iter().map(|s| s.to_string()).collect(),
            const_column,
        })
    }

    /// The variable order the tape expects.
    pub fn vars(&self) -> &[String] {
        &self.vars
    }

    /// Number of instructions.
    pub fn len(&self) -> usize {
        self.ops.len()
    }

    /// True when the tape has no instruction.
    pub fn is_empty(&self) -> bool {
        self.ops.is_empty()
    }

    /// Evaluates every root; `scratch` is reused between calls; results go to `out`.
    pub fn eval_into(&self, vars: &[f64], scratch: &mut Vec<f64>, out: &mut [f64]) {
        self.run(vars, scratch, out);
    }

    /// Runs the tape in any [`Arith`]: f64, intervals, …
    pub fn run<T: Arith>(&self, vars: &[T], scratch: &mut Vec<T>, out: &mut [T]) {
        scratch.clear();
        scratch.reserve(self.ops.len());
        for op in &self.ops {
            let r = |i: &u32| &scratch[*i as usize];
            let v = match op {
                Op::Const(c, exact) => T::constant(*c, *exact),
                Op::Var(i) => vars[*i].clone(),
                Op::Neg(a) => r(a).neg(),
                Op::Add(a, b) => r(a).add(r(b)),
                Op::Mul(a, b) => r(a).mul(r(b)),
                Op::Div(a, b) => r(a).div(r(b)),
                Op::Pow(a, b) => r(a).pow(r(b)),
                Op::Powi(a, n) => r(a).powi(*n),
                Op::Call(f, args) => {
                    // unused argument slots point at slot 0, which always exists
                    let a = [
                        r(&args[0]).clone(),
                        r(&args[1]).clone(),
                        r(&args[2]).clone(),
                    ];
                    T::call(*f, &a[..f.arity()])
                }
            };
            scratch.push(v);
        }
        for (o, &i) in out.iter_mut().zip(&self.outputs) {
            *o = scratch[i as usize].clone();
        }
    }

    /// Evaluates every root at `lanes` points at once: `vars` holds one column of `lanes`
    /// values per variable (variable-major, `vars[v * lanes + i]`), `out` receives one
    /// column per root. Each instruction runs over all lanes in a tight loop the compiler
    /// vectorises, so the interpretation cost is paid once per instruction, not per point.
    /// Results equal [`Tape::eval_into`] bit for bit.
    ///
    /// # Panics
    /// If `vars` or `out` is shorter than the tape's variables (roots) times `lanes`.
    pub fn eval_batch(&self, vars: &[f64], lanes: usize, scratch: &mut Vec<f64>, out: &mut [f64]) {
        assert!(vars.len() >= self.vars.len() * lanes && out.len() >= self.outputs.len() * lanes);
        // every slot is written before it is read: grow without clearing
        if scratch.len() < self.ops.len() * lanes {
            scratch.resize(self.ops.len() * lanes, 0.0);
        }
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the CPU supports AVX2 (checked just above); the function only changes how
            // the same IEEE operations are vectorised, so the results are the same bits
            unsafe { self.batch_avx2(vars, lanes, scratch, out) };
            return;
        }
        self.batch_body(vars, lanes, scratch, out);
    }

    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    unsafe fn batch_avx2(&self, vars: &[f64], lanes: usize, scratch: &mut [f64], out: &mut [f64]) {
        self.batch_body(vars, lanes, scratch, out);
    }

    #[inline(always)]
    fn batch_body(&self, vars: &[f64], lanes: usize, scratch: &mut [f64], out: &mut [f64]) {
        for (k, op) in self.ops.iter().enumerate() {
            let (done, rest) = scratch.split_at_mut(k * lanes);
            let dst = &mut rest[..lanes];
            let col = |i: u32| &done[i as usize * lanes..(i as usize + 1) * lanes];
            match op {
                Op::Const(c, _) => {
                    if self.const_column[k] {
                        dst.fill(*c)
                    }
                }
                Op::Var(v) => dst.copy_from_slice(&vars[v * lanes..(v + 1) * lanes]),
                Op::Neg(a) => dst.iter_mut().zip(col(*a)).for_each(|(d, x)| *d = -x),
                Op::Add(a, b) => match (self.constant(*a), self.constant(*b)) {
                    (Some(x), Some(y)) => dst.fill(x + y),
                    (None, Some(y)) => dst.iter_mut().zip(col(*a)).for_each(|(d, x)| *d = x + y),
                    (Some(x), None) => dst.iter_mut().zip(col(*b)).for_each(|(d, y)| *d = x + y),
                    (None, None) => binary(dst, col(*a), col(*b), |x, y| x + y),
                },
                Op::Mul(a, b) => match (self.constant(*a), self.constant(*b)) {
                    (Some(x), Some(y)) => dst.fill(x * y),
                    (None, Some(y)) => dst.iter_mut().zip(col(*a)).for_each(|(d, x)| *d = x * y),
                    (Some(x), None) => dst.iter_mut().zip(col(*b)).for_each(|(d, y)| *d = x * y),
                    (None, None) => binary(dst, col(*a), col(*b), |x, y| x * y),
                },
                Op::Div(a, b) => match (self.constant(*a), self.constant(*b)) {
                    (Some(x), Some(y)) => dst.fill(x / y),
                    (None, Some(y)) => dst.iter_mut().zip(col(*a)).for_each(|(d, x)| *d = x / y),
                    (Some(x), None) => dst.iter_mut().zip(col(*b)).for_each(|(d, y)| *d = x / y),
                    (None, None) => binary(dst, col(*a), col(*b), |x, y| x / y),
                },
                Op::Pow(a, b) => binary(dst, col(*a), col(*b), pow),
                Op::Powi(a, n) => match *n {
                    // the sequences of `powi`, spelled out so the loops vectorise
                    2 => dst.iter_mut().zip(col(*a)).for_each(|(d, x)| *d = x * x),
                    3 => dst
                        .iter_mut()
                        .zip(col(*a))
                        .for_each(|(d, x)| *d = x * (x * x)),
                    4 => dst.iter_mut().zip(col(*a)).for_each(|(d, x)| {
                        let s = x * x;
                        *d = s * s
                    }),
                    n => dst
                        .iter_mut()
                        .zip(col(*a))
                        .for_each(|(d, x)| *d = powi(*x, n)),
                },
                Op::Call(f, args) => {
                    for i in 0..lanes {
                        let a = [
                            done[args[0] as usize * lanes + i],
                            done[args[1] as usize * lanes + i],
                            done[args[2] as usize * lanes + i],
                        ];
                        dst[i] = apply(*f, &a[..f.arity()]);
                    }
                }
            }
        }
        for (r, &slot) in self.outputs.iter().enumerate() {
            let s = slot as usize * lanes;
            out[r * lanes..(r + 1) * lanes].copy_from_slice(&scratch[s..s + lanes]);
        }
    }

    /// The value of slot `i` when it is a constant.
    #[inline(always)]
    fn constant(&self, i: u32) -> Option<f64> {
        match self.ops[i as usize] {
            Op::Const(c, _) => Some(c),
            _ => None,
        }
    }

    /// Evaluates the first root.
    pub fn eval(&self, vars: &[f64]) -> f64 {
        let mut scratch = Vec::new();
        let mut out = [0.0];
        self.eval_into(vars, &mut scratch, &mut out);
        out[0]
    }
}

#[inline(always)]
fn binary(dst: &mut [f64], a: &[f64], b: &[f64], f: impl Fn(f64, f64) -> f64) {
    for ((d, x), y) in dst.iter_mut().zip(a).zip(b) {
        *d = f(*x, *y);
    }
}
