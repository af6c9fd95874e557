//! The intermediate representation: straight-line SSA over f64, and its reference
//! interpreter.
//!
//! Built from expression DAGs: constants are folded exactly (in rationals) before they become
//! f64, integer powers are spelled out as the multiplications of `lawsmith_expr::powi`, a
//! division by a constant becomes a multiplication only when the reciprocal is exact (a power
//! of two), and common subexpressions are shared by value numbering (with the operands of
//! `+` and `*` in a fixed order, so `a*b` and `b*a` are one value). Every emitter prints the
//! same operations in the same order, so emitted code and [`Program::run`] agree bit for bit
//! (up to the platform's transcendental functions in C).

use crate::real::{ends, Real};
use lawsmith_expr::{BigRational, Dag, ExprId, Func, Node};
use num_traits::{One, Signed, ToPrimitive, Zero};
use std::collections::HashMap;

/// A value of the program: the index of the instruction that computes it.
pub type Slot = u32;

/// One instruction.
#[derive(Clone, Debug, PartialEq)]
pub enum Op {
    /// A constant.
    Const(f64),
    /// Input `i` of the program.
    Input(usize),
    /// `-a`.
    Neg(Slot),
    /// `a + b`.
    Add(Slot, Slot),
    /// `a - b`.
    Sub(Slot, Slot),
    /// `a * b`.
    Mul(Slot, Slot),
    /// `a / b`.
    Div(Slot, Slot),
    /// A function of one argument (sin … abs).
    Call1(Func, Slot),
    /// `atan2`, `min`, `max`.
    Call2(Func, Slot, Slot),
    /// `pow(a, b)` for a non-integer exponent.
    Pow(Slot, Slot),
    /// `a < lo ? lo : (a > hi ? hi : a)` with constant ends (NaN passes through).
    Clamp(Slot, f64, f64),
    /// `c >= 0 ? a : b`.
    Select(Slot, Slot, Slot),
}

impl Op {
    /// Arithmetic operations this instruction costs (inputs and constants cost none; a clamp
    /// is two comparisons, a select one).
    pub fn cost(&self) -> usize {
        match self {
            Op::Const(_) | Op::Input(_) => 0,
            Op::Clamp(..) => 2,
            _ => 1,
        }
    }
}

/// A straight-line program with named outputs.
#[derive(Clone, Debug, PartialEq)]
pub struct Program {
    /// Names of the inputs, in order.
    pub inputs: Vec<String>,
    /// The instructions; operands always come first.
    pub ops: Vec<Op>,
    /// Named outputs.
    pub outputs: Vec<(String, Slot)>,
    /// The name each emitter gives each instruction's value (an input's is its input name):
    /// `NAME_value` for the value of law `NAME`, `NAME_k` for the `k`-th other value first
    /// computed for the law or output `NAME`. A change inside one law renames nothing in
    /// another.
    pub names: Vec<String>,
    /// The constants that are a rational of the spec rounded to the nearest double, with
    /// that rational (the others are their rational exactly), in slot order.
    pub rounded: Vec<(Slot, BigRational)>,
}

/// Why a program cannot be built.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct IrError(pub String);

impl std::fmt::Display for IrError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for IrError {}

#[derive(Clone, PartialEq, Eq, Hash)]
enum Key {
    Const(u64),
    Input(usize),
    Neg(Slot),
    Add(Slot, Slot),
    Sub(Slot, Slot),
    Mul(Slot, Slot),
    Div(Slot, Slot),
    Call1(Func, Slot),
    Call2(Func, Slot, Slot),
    Pow(Slot, Slot),
    Clamp(Slot, u64, u64),
    Select(Slot, Slot, Slot),
}

/// A term of a sum: negated, its factors sorted (the key), its factors in order.
type Member = (bool, Vec<ExprId>, Vec<ExprId>);

/// Builds a [`Program`] from expressions, sharing every repeated computation.
pub struct Builder {
    inputs: Vec<String>,
    ops: Vec<Op>,
    numbering: HashMap<Key, Slot>,
    outputs: Vec<(String, Slot)>,
    /// Symbol name → slot (inputs, and values defined by earlier outputs).
    env: HashMap<String, Slot>,
    memo: HashMap<ExprId, Slot>,
    /// Each definition or output, with the number of instructions before it: the values
    /// first computed since the previous one belong to it.
    marks: Vec<(usize, String, Slot, bool)>,
    /// The bits of every constant that is a rational rounded to a double, and the rational.
    rounded: HashMap<u64, BigRational>,
}

fn exact(c: &BigRational) -> f64 {
    lawsmith_expr::to_f64(c)
}

/// True when `c` is ±2^k, so that `x / c` and `x * (1/c)` are the same f64 for every `x`.
fn reciprocal_is_exact(c: &BigRational) -> bool {
    let (n, d) = (c.numer().abs(), c.denom().clone());
    let pow2 = |x: &num_bigint::BigInt| x.is_positive() && (x & (x - 1u32)).is_zero();
    let f = exact(c);
    (n.is_one() && pow2(&d) || d.is_one() && pow2(&n)) && f.is_finite() && (1.0 / f).is_finite()
}

impl Builder {
    /// A builder whose programs take these inputs, in order.
    pub fn new(inputs: &[String]) -> Builder {
        let mut b = Builder {
            inputs: inputs.to_vec(),
            ops: Vec::new(),
            numbering: HashMap::new(),
            outputs: Vec::new(),
            env: HashMap::new(),
            memo: HashMap::new(),
            marks: Vec::new(),
            rounded: Default::default(),
        };
        for (i, name) in inputs.iter().enumerate() {
            let s = b.push(Op::Input(i), Key::Input(i));
            b.env.insert(name.clone(), s);
        }
        b
    }

    fn push(&mut self, op: Op, key: Key) -> Slot {
        if let Some(&s) = self.numbering.get(&key) {
            return s;
        }
        let s = self.ops.len() as Slot;
        self.ops.push(op);
        self.numbering.insert(key, s);
        s
    }

    /// The slot of a constant, a double meant as it is.
    pub fn constant(&mut self, v: f64) -> Slot {
        self.push(Op::Const(v), Key::Const(v.to_bits()))
    }

    /// The slot of the double nearest to the rational `c`, recorded as rounded unless it is
    /// `c` itself (the round-off analysis counts the difference).
    fn rational(&mut self, c: &BigRational) -> Slot {
        let v = exact(c);
        if BigRational::from_float(v).as_ref() != Some(c) {
            self.rounded.entry(v.to_bits()).or_insert_with(|| c.clone());
        }
        self.constant(v)
    }

    /// The slot of an input or of a defined name.
    pub fn name(&self, n: &str) -> Option<Slot> {
        self.env.get(n).copied()
    }

    /// Gives a name to a slot, so later expressions that use the symbol read it.
    pub fn define(&mut self, n: &str, s: Slot) {
        self.marks.push((self.ops.len(), n.to_string(), s, true));
        self.env.insert(n.to_string(), s);
        // the DAG memo keys on node ids; a new meaning of a symbol invalidates it
        self.memo.clear();
    }

    /// Adds a named output.
    pub fn output(&mut self, n: &str, s: Slot) {
        self.marks.push((self.ops.len(), n.to_string(), s, false));
        self.outputs.push((n.to_string(), s));
    }

    /// `-a`.
    pub fn neg(&mut self, a: Slot) -> Slot {
        if let Op::Const(c) = self.ops[a as usize] {
            if let Some(q) = self.rounded.get(&c.to_bits()) {
                let q = -q.clone();
                self.rounded.entry((-c).to_bits()).or_insert(q);
            }
            return self.constant(-c);
        }
        if let Op::Neg(x) = self.ops[a as usize] {
            return x;
        }
        self.push(Op::Neg(a), Key::Neg(a))
    }

    /// `a + b` (operands ordered: `+` is commutative in IEEE arithmetic).
    pub fn add(&mut self, a: Slot, b: Slot) -> Slot {
        let (a, b) = (a.min(b), a.max(b));
        self.push(Op::Add(a, b), Key::Add(a, b))
    }

    /// `a - b`.
    pub fn sub(&mut self, a: Slot, b: Slot) -> Slot {
        self.push(Op::Sub(a, b), Key::Sub(a, b))
    }

    /// `a * b` (operands ordered).
    pub fn mul(&mut self, a: Slot, b: Slot) -> Slot {
        let (a, b) = (a.min(b), a.max(b));
        self.push(Op::Mul(a, b), Key::Mul(a, b))
    }

    /// `a / b`.
    pub fn div(&mut self, a: Slot, b: Slot) -> Slot {
        self.push(Op::Div(a, b), Key::Div(a, b))
    }

    /// A function of one argument.
    pub fn call1(&mut self, f: Func, a: Slot) -> Slot {
        self.push(Op::Call1(f, a), Key::Call1(f, a))
    }

    /// `atan2`, `min` or `max`.
    pub fn call2(&mut self, f: Func, a: Slot, b: Slot) -> Slot {
        self.push(Op::Call2(f, a, b), Key::Call2(f, a, b))
    }

    /// Clamp to constant ends.
    pub fn clamp(&mut self, a: Slot, lo: f64, hi: f64) -> Slot {
        self.push(
            Op::Clamp(a, lo, hi),
            Key::Clamp(a, lo.to_bits(), hi.to_bits()),
        )
    }

    /// `c >= 0 ? a : b`.
    pub fn select(&mut self, c: Slot, a: Slot, b: Slot) -> Slot {
        self.push(Op::Select(c, a, b), Key::Select(c, a, b))
    }

    /// `a ^ n` as the multiplications of `powi` (x², x·x², (x²)², …).
    pub fn powi(&mut self, a: Slot, n: i64) -> Slot {
        let one = self.constant(1.0);
        if n == 0 {
            return one;
        }
        let mut base = a;
        let mut e = n.unsigned_abs();
        let mut acc: Option<Slot> = None;
        loop {
            if e & 1 != 0 {
                // powi starts from 1.0; 1.0 * x is x exactly, so the first factor is taken as is
                acc = Some(match acc {
                    None => base,
                    Some(p) => self.mul(p, base),
                });
            }
            e >>= 1;
            if e == 0 {
                break;
            }
            base = self.mul(base, base);
        }
        let p = acc.unwrap_or(one);
        if n < 0 {
            self.div(one, p)
        } else {
            p
        }
    }

    /// Builds an expression of `dag` whose symbols are inputs or defined names. Parameters
    /// must have been substituted by their values beforehand.
    pub fn expr(&mut self, dag: &Dag, e: ExprId) -> Result<Slot, IrError> {
        if let Some(&s) = self.memo.get(&e) {
            return Ok(s);
        }
        let s = match dag.node(e) {
            Node::Num(c) => self.rational(c),
            Node::Sym(n) => self
                .name(n)
                .ok_or_else(|| IrError(format!("`{n}` has no value in the generated code")))?,
            Node::Neg(a) => {
                let a = self.expr(dag, *a)?;
                self.neg(a)
            }
            Node::Add(xs) => self.sum(dag, xs)?,
            Node::Mul(xs) => self.product(dag, xs)?,
            Node::Div(a, b) => {
                let a2 = self.expr(dag, *a)?;
                match dag.as_num(*b) {
                    Some(c) if !c.is_zero() && reciprocal_is_exact(c) => {
                        let r = self.rational(&(BigRational::one() / c));
                        self.mul(a2, r)
                    }
                    _ => {
                        let b = self.expr(dag, *b)?;
                        self.div(a2, b)
                    }
                }
            }
            Node::Pow(a, b) => {
                let base = self.expr(dag, *a)?;
                match dag.as_num(*b) {
                    Some(k)
                        if k.is_integer()
                            && k.to_integer().to_i64().is_some_and(|n| n.abs() <= 64) =>
                    {
                        let n = k.to_integer().to_i64().expect("small");
                        self.powi(base, n)
                    }
                    Some(k) if *k == BigRational::new(1.into(), 2.into()) => {
                        self.call1(Func::Sqrt, base)
                    }
                    _ => {
                        let ex = self.expr(dag, *b)?;
                        self.push(Op::Pow(base, ex), Key::Pow(base, ex))
                    }
                }
            }
            Node::Call(f, xs) => {
                let args: Vec<Slot> = xs
                    .iter()
                    .map(|&x| self.expr(dag, x))
                    .collect::<Result<_, _>>()?;
                match f {
                    // the argument is proved inside [-1, 1] over the envelope; the clamp only
                    // keeps rounding at the very edge from producing NaN
                    Func::Asin | Func::Acos => {
                        let g = self.clamp(args[0], -1.0, 1.0);
                        self.call1(*f, g)
                    }
                    Func::Atan2 | Func::Min | Func::Max => self.call2(*f, args[0], args[1]),
                    Func::Clamp => {
                        let lo = self.call2(Func::Max, args[0], args[1]);
                        self.call2(Func::Min, lo, args[2])
                    }
                    _ => self.call1(*f, args[0]),
                }
            }
        };
        self.memo.insert(e, s);
        Ok(s)
    }

    /// A sum: the constant terms folded exactly into one, then added left to right; a
    /// negated term is subtracted.
    fn sum(&mut self, dag: &Dag, xs: &[ExprId]) -> Result<Slot, IrError> {
        let mut constant = BigRational::zero();
        let mut terms: Vec<(bool, ExprId)> = Vec::new();
        // nested sums are flattened so all their constants fold into one
        fn collect(
            dag: &Dag,
            x: ExprId,
            neg: bool,
            c: &mut BigRational,
            out: &mut Vec<(bool, ExprId)>,
        ) {
            match dag.node(x) {
                Node::Num(v) => {
                    if neg {
                        *c -= v
                    } else {
                        *c += v
                    }
                }
                Node::Neg(a) => collect(dag, *a, !neg, c, out),
                Node::Add(ys) => ys.iter().for_each(|&y| collect(dag, y, neg, c, out)),
                _ => out.push((neg, x)),
            }
        }
        for &x in xs {
            collect(dag, x, false, &mut constant, &mut terms);
        }
        // like terms collected: a term is a coefficient times a product of factors; terms
        // with the same factors (in any order) add their coefficients exactly, and terms
        // that cancel disappear (7.5·v·a − 7.5·v·a)
        let mut groups: Vec<(Vec<ExprId>, Vec<ExprId>, BigRational)> = Vec::new();
        for (neg, t) in terms {
            let mut coef = if neg {
                -BigRational::one()
            } else {
                BigRational::one()
            };
            let mut factors = Vec::new();
            collect_factors(dag, t, &mut coef, &mut factors);
            let mut key = factors.clone();
            key.sort();
            match groups.iter_mut().find(|g| g.0 == key) {
                Some(g) => g.2 += coef,
                None => groups.push((key, factors, coef)),
            }
        }
        // terms whose coefficients have the same magnitude share one multiplication:
        // c·x − c·y + … is c·(x − y + …), led by its first term with a plus sign (energy
        // errors written the same way then give the same factored values)
        let mut blocks: Vec<(BigRational, Vec<Member>)> = Vec::new();
        for (key, factors, coef) in groups {
            if coef.is_zero() {
                continue;
            }
            let mag = coef.abs();
            let member = (coef.is_negative(), key, factors);
            match blocks.iter_mut().find(|b| b.0 == mag && !mag.is_one()) {
                Some(b) if !member.2.is_empty() => b.1.push(member),
                _ => blocks.push((mag, vec![member])),
            }
        }
        let mut parts: Vec<(bool, Slot)> = Vec::new();
        for (mag, mut members) in blocks {
            if members.len() == 1 {
                let (neg, _, factors) = members.pop().expect("one");
                let coef = if neg { -mag } else { mag };
                let v = self.scaled_product(dag, &factors, coef)?;
                // a term that came out negated (a negative coefficient) is subtracted
                // rather than negated and added
                parts.push(match self.ops[v as usize] {
                    Op::Neg(x) => (true, x),
                    _ => (false, v),
                });
                continue;
            }
            if members.len() == 2 && members[0].0 != members[1].0 {
                // x − y when y − x was already computed elsewhere: reuse it, negated
                let (p, n) = if members[0].0 { (1, 0) } else { (0, 1) };
                let vp = self.scaled_product(dag, &members[p].2, BigRational::one())?;
                let vn = self.scaled_product(dag, &members[n].2, BigRational::one())?;
                let c = self.rational(&mag);
                if self.numbering.contains_key(&Key::Sub(vn, vp))
                    && !self.numbering.contains_key(&Key::Sub(vp, vn))
                {
                    let inner = self.sub(vn, vp);
                    parts.push((true, self.mul(inner, c)));
                } else {
                    let inner = self.sub(vp, vn);
                    parts.push((false, self.mul(inner, c)));
                }
                continue;
            }
            let lead = members.iter().position(|m| !m.0).unwrap_or(0);
            let flip = members[lead].0;
            members.swap(0, lead);
            let mut inner: Option<Slot> = None;
            for (neg, _, factors) in &members {
                let v = self.scaled_product(dag, factors, BigRational::one())?;
                inner = Some(match inner {
                    None => v,
                    Some(a) if *neg != flip => self.sub(a, v),
                    Some(a) => self.add(a, v),
                });
            }
            let c = self.rational(&mag);
            let inner = inner.expect("members");
            parts.push((flip, self.mul(inner, c)));
        }
        // a part added first saves the negation a subtracted first part would need
        if let Some(i) = parts.iter().position(|p| !p.0) {
            let first = parts.remove(i);
            parts.insert(0, first);
        }
        let mut acc: Option<Slot> = None;
        for (negated, v) in parts {
            acc = Some(match (acc, negated) {
                (None, false) => v,
                (None, true) => self.neg(v),
                (Some(a), false) => self.add(a, v),
                (Some(a), true) => self.sub(a, v),
            });
        }
        Ok(match acc {
            None => self.rational(&constant),
            Some(a) if constant.is_zero() => a,
            Some(a) => {
                let c = self.rational(&constant);
                self.add(a, c)
            }
        })
    }

    /// A product: the constant factors folded exactly into one coefficient (put last), then
    /// multiplied left to right; a coefficient −1 becomes a negation.
    fn product(&mut self, dag: &Dag, xs: &[ExprId]) -> Result<Slot, IrError> {
        let mut coef = BigRational::one();
        let mut factors = Vec::new();
        for &x in xs {
            collect_factors(dag, x, &mut coef, &mut factors);
        }
        self.scaled_product(dag, &factors, coef)
    }

    /// `coef · Π factors`, the factors multiplied left to right.
    fn scaled_product(
        &mut self,
        dag: &Dag,
        factors: &[ExprId],
        coef: BigRational,
    ) -> Result<Slot, IrError> {
        if coef.is_zero() {
            return Ok(self.constant(0.0));
        }
        let mut acc: Option<Slot> = None;
        for &f in factors {
            let v = self.expr(dag, f)?;
            acc = Some(match acc {
                None => v,
                Some(a) => self.mul(a, v),
            });
        }
        Ok(match acc {
            None => self.rational(&coef),
            Some(a) if coef.is_one() => a,
            Some(a) if (-coef.clone()).is_one() => self.neg(a),
            // a negative coefficient as the negation of the positive product: a sum
            // subtracts it, and `a*c` is shared with the terms that add it
            Some(a) if coef.is_negative() => {
                let c = self.rational(&-coef);
                let p = self.mul(a, c);
                self.neg(p)
            }
            Some(a) => {
                let c = self.rational(&coef);
                self.mul(a, c)
            }
        })
    }

    /// The name of every instruction's value (see [`Program::names`]), counting only live
    /// ones, so a value no output needs shifts no name.
    fn names(&self, live: &[bool]) -> Vec<String> {
        let mut owner = vec![None; self.ops.len()];
        let mut start = 0;
        for (k, (end, ..)) in self.marks.iter().enumerate() {
            for o in owner.iter_mut().take(*end).skip(start) {
                *o = Some(k);
            }
            start = start.max(*end);
        }
        let mut count = vec![0usize; self.marks.len()];
        let mut names = Vec::with_capacity(self.ops.len());
        for (i, op) in self.ops.iter().enumerate() {
            names.push(match (op, owner[i]) {
                (Op::Input(j), _) => self.inputs[*j].clone(),
                (_, Some(k)) => {
                    let (_, n, slot, law) = &self.marks[k];
                    if *law && *slot as usize == i {
                        format!("{n}_value")
                    } else {
                        let index = count[k];
                        count[k] += usize::from(live[i]);
                        format!("{n}_{index}")
                    }
                }
                (_, None) => format!("t{i}"),
            });
        }
        names
    }

    /// The finished program, without instructions no output needs.
    pub fn finish(self) -> Program {
        let mut live = vec![false; self.ops.len()];
        let mut stack: Vec<Slot> = self.outputs.iter().map(|(_, s)| *s).collect();
        while let Some(s) = stack.pop() {
            if std::mem::replace(&mut live[s as usize], true) {
                continue;
            }
            stack.extend(operands(&self.ops[s as usize]));
        }
        // inputs are kept (their slots are the input order)
        for (i, op) in self.ops.iter().enumerate() {
            if matches!(op, Op::Input(_)) {
                live[i] = true;
            }
        }
        let names = self.names(&live);
        let mut renumber = vec![0 as Slot; self.ops.len()];
        let mut ops = Vec::new();
        let mut rounded = Vec::new();
        for (i, op) in self.ops.into_iter().enumerate() {
            if live[i] {
                renumber[i] = ops.len() as Slot;
                if let Op::Const(c) = op {
                    if let Some(q) = self.rounded.get(&c.to_bits()) {
                        rounded.push((renumber[i], q.clone()));
                    }
                }
                ops.push(remap(op, &renumber));
            }
        }
        Program {
            rounded,
            names: names
                .into_iter()
                .zip(&live)
                .filter_map(|(n, &l)| l.then_some(n))
                .collect(),
            inputs: self.inputs,
            ops,
            outputs: self
                .outputs
                .into_iter()
                .map(|(n, s)| (n, renumber[s as usize]))
                .collect(),
        }
    }
}

/// Flattens a product: numeric factors into `coef`, negations into its sign, nested products
/// into their factors; the other factors go to `out` in order.
fn collect_factors(dag: &Dag, x: ExprId, coef: &mut BigRational, out: &mut Vec<ExprId>) {
    match dag.node(x) {
        Node::Num(c) => *coef *= c,
        Node::Neg(a) => {
            *coef = -coef.clone();
            collect_factors(dag, *a, coef, out);
        }
        Node::Mul(ys) => ys.iter().for_each(|&y| collect_factors(dag, y, coef, out)),
        _ => out.push(x),
    }
}

/// The operands of an instruction.
pub fn operands(op: &Op) -> Vec<Slot> {
    match *op {
        Op::Const(_) | Op::Input(_) => vec![],
        Op::Neg(a) | Op::Call1(_, a) | Op::Clamp(a, ..) => vec![a],
        Op::Add(a, b) | Op::Sub(a, b) | Op::Mul(a, b) | Op::Div(a, b) | Op::Pow(a, b) => {
            vec![a, b]
        }
        Op::Call2(_, a, b) => vec![a, b],
        Op::Select(c, a, b) => vec![c, a, b],
    }
}

fn remap(op: Op, r: &[Slot]) -> Op {
    let m = |s: Slot| r[s as usize];
    match op {
        Op::Const(_) | Op::Input(_) => op,
        Op::Neg(a) => Op::Neg(m(a)),
        Op::Add(a, b) => Op::Add(m(a), m(b)),
        Op::Sub(a, b) => Op::Sub(m(a), m(b)),
        Op::Mul(a, b) => Op::Mul(m(a), m(b)),
        Op::Div(a, b) => Op::Div(m(a), m(b)),
        Op::Call1(f, a) => Op::Call1(f, m(a)),
        Op::Call2(f, a, b) => Op::Call2(f, m(a), m(b)),
        Op::Pow(a, b) => Op::Pow(m(a), m(b)),
        Op::Clamp(a, lo, hi) => Op::Clamp(m(a), lo, hi),
        Op::Select(c, a, b) => Op::Select(m(c), m(a), m(b)),
    }
}

/// `a < lo ? lo : (a > hi ? hi : a)`.
pub fn clamp<R: Real>(a: R, lo: R, hi: R) -> R {
    if a < lo {
        lo
    } else if a > hi {
        hi
    } else {
        a
    }
}

impl Program {
    /// The program of one formula (the formula language) of the inputs `vars`, its one
    /// output named `output`: what the generated code computes for it.
    pub fn of_formula(text: &str, vars: &[&str], output: &str) -> Result<Program, IrError> {
        let mut dag = Dag::new();
        let e = lawsmith_expr::parse_expr(&mut dag, text)
            .map_err(|e| IrError(format!("`{text}` does not parse: {e:?}")))?;
        let names: Vec<String> = vars.iter().map(|s| s.to_string()).collect();
        let mut b = Builder::new(&names);
        let s = b.expr(&dag, e)?;
        b.output(output, s);
        Ok(b.finish())
    }

    /// Arithmetic operations of the program (see [`Op::cost`]).
    pub fn op_count(&self) -> usize {
        self.ops.iter().map(Op::cost).sum()
    }

    /// Runs the program in the float type `R` (`f64` or `f32`): the reference semantics
    /// every emitter of that type follows, each constant the literal it prints.
    pub fn run<R: Real>(&self, inputs: &[R], slots: &mut Vec<R>) -> Vec<R> {
        let mut out = vec![R::default(); self.outputs.len()];
        self.run_into(inputs, slots, &mut out);
        out
    }

    /// [`Program::run`] into `out` (one value per output), without allocating once `slots`
    /// has grown.
    pub fn run_into<R: Real>(&self, inputs: &[R], slots: &mut Vec<R>, out: &mut [R]) {
        // every slot is written before it is read (operands come first)
        if slots.len() < self.ops.len() {
            slots.resize(self.ops.len(), R::default());
        }
        let slots = &mut slots[..self.ops.len()];
        let zero = R::lit(0.0);
        for (k, op) in self.ops.iter().enumerate() {
            let v = |s: &Slot| slots[*s as usize];
            let x = match op {
                Op::Const(c) => R::lit(*c),
                Op::Input(i) => inputs[*i],
                Op::Neg(a) => -v(a),
                Op::Add(a, b) => v(a) + v(b),
                Op::Sub(a, b) => v(a) - v(b),
                Op::Mul(a, b) => v(a) * v(b),
                Op::Div(a, b) => v(a) / v(b),
                Op::Call1(f, a) => R::call(*f, v(a), zero),
                Op::Call2(f, a, b) => R::call(*f, v(a), v(b)),
                Op::Pow(a, b) => R::pow(v(a), v(b)),
                Op::Clamp(a, lo, hi) => {
                    // ends rounded inward, as the emitters print them
                    let (lo, hi) = ends::<R>((*lo, *hi));
                    clamp(v(a), lo, hi)
                }
                Op::Select(c, a, b) => {
                    if v(c) >= zero {
                        v(a)
                    } else {
                        v(b)
                    }
                }
            };
            slots[k] = x;
        }
        for (o, (_, s)) in out.iter_mut().zip(&self.outputs) {
            *o = slots[*s as usize];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn build(text: &str, vars: &[&str]) -> Program {
        Program::of_formula(text, vars, "y").unwrap()
    }

    #[test]
    fn common_subexpressions_are_computed_once() {
        // (x*y + 1) appears twice, once as y*x: one multiplication, one addition for it
        let p = build("(x*y + 1)^2 + sin(y*x + 1)", &["x", "y"]);
        let muls = p.ops.iter().filter(|o| matches!(o, Op::Mul(..))).count();
        assert_eq!(muls, 2, "{p:?}"); // x*y and the square
        assert_eq!(p.run(&[2.0, 3.0], &mut Vec::new())[0], 49.0 + 7f64.sin());
    }

    #[test]
    fn constants_fold_exactly_and_only_exact_divisions_become_products() {
        // 0.1*3*x folds to 0.3 (exact rational 3/10), not 0.1*3 = 0.30000000000000004
        let p = build("0.1*3*x", &["x"]);
        assert!(p.ops.contains(&Op::Const(0.3)));
        let p = build("x/4 + y/3", &["x", "y"]);
        assert!(p.ops.contains(&Op::Const(0.25)));
        assert_eq!(p.ops.iter().filter(|o| matches!(o, Op::Div(..))).count(), 1);
        assert_eq!(p.run(&[1.0, 1.0], &mut Vec::new())[0], 0.25 + 1.0 / 3.0);
    }

    #[test]
    fn powers_follow_powi_bit_for_bit() {
        let p = build("x^2 + x^3 + x^4 + x^-2 + x^7", &["x"]);
        for x in [1.1f64, -2.3, 0.7, 13.0] {
            let want = lawsmith_expr::powi(x, 2)
                + lawsmith_expr::powi(x, 3)
                + lawsmith_expr::powi(x, 4)
                + lawsmith_expr::powi(x, -2)
                + lawsmith_expr::powi(x, 7);
            assert_eq!(p.run(&[x], &mut Vec::new())[0].to_bits(), want.to_bits());
        }
    }
}
