//! Proved round-off bounds of generated code: for each output of a [`Program`] and a float
//! type, a bound on |computed − exact| over a box of inputs, where "computed" is the
//! program run in that type (each operation rounded once, the `libm` functions within their
//! error) and "exact" the same operations in real arithmetic on the same inputs, with every
//! constant the rational the spec wrote.
//!
//! **Method.** A forward analysis of the straight-line program: each value carries an
//! enclosure `X` of its exact value and a bound `E` on its error, so the computed value lies
//! in `X ± E`. The standard model of IEEE 754 arithmetic (Higham, *Accuracy and Stability of
//! Numerical Algorithms*, §2.2): a correctly rounded result `r` in round-to-nearest is
//! within half an ulp of `r`, at most `2^e·u` for `|r| < 2^(e+1)` (`u` the unit round-off,
//! 2⁻⁵³ or 2⁻²⁴), plus, for a product or quotient that underflows, half the smallest
//! subnormal; a sum that underflows is exact. The error an operation propagates from its
//! operands is bounded by the mean-value theorem over the hull of exact and computed
//! operands: `|ã·b̃ − a·b| ≤ max|b̃|·Ea + max|a|·Eb`, `|f(ã) − f(a)| ≤ max|f'|·Ea`, and so
//! on, each maximum an interval enclosure; `min`, `max`, `abs` and clamps are 1-Lipschitz. A
//! library function adds [`LIB_ULPS`] ulps of its result (the `libm` crate ports musl's,
//! below 1 ulp for the functions used; glibc's manual lists at most 1 ulp for them on x86-64
//! — both from memory — doubled for margin); `sqrt` is correctly rounded. A branch whose
//! test may differ between exact and computed values counts the distance between its arms.
//! Every bound is computed with upward rounding, so it is sound, and first order in nothing:
//! no term is dropped.
//!
//! **Tightness.** Interval enclosures forget correlations (`h − h_r` over the box of `h` and
//! of `h_r` is much wider than the error box), so the input box is split by branch and bound:
//! the bound over the box is the largest over the leaves, each split halving the widest input
//! of the leaf with the largest bound.

use crate::interval::Interval;
use lawsmith_codegen::{Controller, Float, Op, Program};
use lawsmith_expr::{Arith, Func};
use std::collections::BinaryHeap;

/// Ulps of its result a library function (`sin`, `exp`, `asin`, …) may be off by.
pub const LIB_ULPS: f64 = 2.0;

/// The constants of IEEE 754 binary64 or binary32 the analysis needs.
#[derive(Clone, Copy, Debug)]
struct Format {
    /// Unit round-off: half the distance from 1 to the next number.
    u: f64,
    /// Exponent of the smallest normal number.
    min_exp: i32,
    /// Half the smallest subnormal: the largest error of an underflowing product.
    eta: f64,
    /// The largest finite number.
    max: f64,
}

impl Format {
    fn of(float: Float) -> Format {
        match float {
            Float::F64 => Format {
                u: 2f64.powi(-53),
                min_exp: -1022,
                eta: 2f64.powi(-1075),
                max: f64::MAX,
            },
            Float::F32 => Format {
                u: 2f64.powi(-24),
                min_exp: -126,
                eta: 2f64.powi(-150),
                max: f64::from(f32::MAX),
            },
        }
    }

    /// The largest rounding error of a result of magnitude at most `m`: half an ulp of the
    /// binade of `m` (infinite when `m` may overflow).
    fn half_ulp(&self, m: f64) -> f64 {
        if m.is_nan() || m > self.max {
            return f64::INFINITY;
        }
        if m == 0.0 {
            return 0.0;
        }
        // floor(log2 m), exactly, from the bits of the double m
        let bits = m.to_bits();
        let biased = ((bits >> 52) & 0x7ff) as i32;
        let e = if biased == 0 { -1023 } else { biased - 1023 };
        if e < self.min_exp {
            self.eta
        } else {
            // 2^e·u is a power of two: exact
            2f64.powi(e) * self.u
        }
    }
}

/// `a + b` rounded up (for non-negative bounds).
fn add_up(a: f64, b: f64) -> f64 {
    if a == 0.0 || b == 0.0 {
        return a + b;
    }
    let s = a + b;
    if s.is_finite() {
        s.next_up()
    } else {
        s
    }
}

/// `a · b` rounded up (for non-negative bounds).
fn mul_up(a: f64, b: f64) -> f64 {
    if a == 0.0 || b == 0.0 {
        return 0.0;
    }
    let p = a * b;
    if p.is_finite() {
        p.next_up()
    } else {
        f64::INFINITY
    }
}

/// `[-e, e]`.
fn spread(e: f64) -> Interval {
    Interval::new(-e, e)
}

/// The magnitude of an interval (infinite when it is empty or unbounded: no bound).
fn mag(x: &Interval) -> f64 {
    if x.is_empty() {
        f64::INFINITY
    } else {
        x.mag()
    }
}

/// The smallest magnitude of an interval (0 when it holds zero).
fn mig(x: &Interval) -> f64 {
    if x.is_empty() || (x.lo() <= 0.0 && x.hi() >= 0.0) {
        0.0
    } else {
        x.lo().abs().min(x.hi().abs())
    }
}

/// How the program's inputs depend on the coordinates of the analysis box: input `i` is
/// `offset + Σ coords[j]` over its listed `j` (a state is its reference plus its error, so
/// that `h − h_r` is seen to lie within the error box).
#[derive(Clone, Debug)]
pub struct InputMap(pub Vec<(f64, Vec<usize>)>);

impl InputMap {
    /// Each input its own coordinate.
    pub fn identity(n: usize) -> InputMap {
        InputMap((0..n).map(|i| (0.0, vec![i])).collect())
    }

    fn input(&self, i: usize, coords: &[Interval]) -> Interval {
        let (offset, js) = &self.0[i];
        js.iter()
            .fold(Interval::point(*offset), |x, &j| x.add(&coords[j]))
    }
}

/// Enclosures of the exact value of every instruction over the box `coords`: the natural
/// interval extension intersected with the mean-value form `f(m) + Σ ∂f/∂c_j·(c_j − m_j)`
/// around the box's midpoint `m`, the gradient enclosed by forward differentiation in the
/// coordinates (kinks and branches by the hull of their one-sided slopes; a branch whose
/// test may change sign gives no mean-value form).
fn enclose(p: &Program, map: &InputMap, coords: &[Interval]) -> Vec<Interval> {
    let mid: Vec<Interval> = coords.iter().map(|c| Interval::point(c.mid())).collect();
    let at_mid = natural(p, map, &mid, None);
    natural(p, map, coords, Some((&mid, &at_mid)))
}

/// One pass of interval evaluation; with `centre` (the midpoint and the values there), each
/// value also carries its gradient and is cut by its mean-value form.
fn natural(
    p: &Program,
    map: &InputMap,
    coords: &[Interval],
    centre: Option<(&[Interval], &[Interval])>,
) -> Vec<Interval> {
    let n = coords.len();
    let zero = || vec![Interval::point(0.0); n];
    let entire = || vec![Interval::entire(); n];
    let mut x: Vec<Interval> = Vec::with_capacity(p.ops.len());
    let mut g: Vec<Vec<Interval>> =
        Vec::with_capacity(if centre.is_some() { p.ops.len() } else { 0 });
    let scale =
        |gs: &[Interval], k: &Interval| -> Vec<Interval> { gs.iter().map(|d| d.mul(k)).collect() };
    let sum = |a: &[Interval], b: &[Interval]| -> Vec<Interval> {
        a.iter().zip(b).map(|(u, v)| u.add(v)).collect()
    };
    let hull = |a: &[Interval], b: &[Interval]| -> Vec<Interval> {
        a.iter().zip(b).map(|(u, v)| u.hull(v)).collect()
    };
    let f64_fmt = Format::of(Float::F64);
    let mut rounded = p.rounded.iter().peekable();
    for (k, op) in p.ops.iter().enumerate() {
        let xa = |s: &u32| x[*s as usize];
        let ga = |s: &u32| -> &[Interval] { &g[*s as usize] };
        let want_g = centre.is_some();
        let (value, grad) = match op {
            Op::Const(c) => {
                let is_rounded = rounded.next_if(|(s, _)| *s as usize == k).is_some();
                let half = if is_rounded {
                    f64_fmt.half_ulp(c.abs())
                } else {
                    0.0
                };
                (Interval::point(*c).add(&spread(half)), want_g.then(zero))
            }
            Op::Input(i) => {
                let grad = want_g.then(|| {
                    let mut d = zero();
                    for &j in &map.0[*i].1 {
                        d[j] = d[j].add(&Interval::point(1.0));
                    }
                    d
                });
                (map.input(*i, coords), grad)
            }
            Op::Neg(a) => (
                xa(a).neg(),
                want_g.then(|| scale(ga(a), &Interval::point(-1.0))),
            ),
            Op::Add(a, b) => (xa(a).add(&xa(b)), want_g.then(|| sum(ga(a), ga(b)))),
            Op::Sub(a, b) => (
                xa(a).add(&xa(b).neg()),
                want_g.then(|| sum(ga(a), &scale(ga(b), &Interval::point(-1.0)))),
            ),
            Op::Mul(a, b) => (
                xa(a).mul(&xa(b)),
                want_g.then(|| sum(&scale(ga(a), &xa(b)), &scale(ga(b), &xa(a)))),
            ),
            Op::Div(a, b) => {
                let q = xa(a).div(&xa(b));
                // (a/b)' = (a' − q·b')/b
                let grad = want_g.then(|| {
                    let num = sum(ga(a), &scale(ga(b), &q.neg()));
                    num.iter().map(|d| d.div(&xa(b))).collect()
                });
                (q, grad)
            }
            Op::Call1(f, a) => {
                let v = Interval::call(*f, &[xa(a)]);
                let grad = want_g.then(|| match f {
                    Func::Abs => {
                        let s = if xa(a).lo() >= 0.0 {
                            Interval::point(1.0)
                        } else if xa(a).hi() <= 0.0 {
                            Interval::point(-1.0)
                        } else {
                            Interval::new(-1.0, 1.0)
                        };
                        scale(ga(a), &s)
                    }
                    _ => scale(ga(a), &slope(*f, &xa(a))),
                });
                (v, grad)
            }
            Op::Call2(f, a, b) => {
                let v = Interval::call(*f, &[xa(a), xa(b)]);
                let grad = want_g.then(|| match f {
                    Func::Min | Func::Max => {
                        let (l, r) = (xa(a), xa(b));
                        let a_wins = if *f == Func::Min {
                            l.hi() < r.lo()
                        } else {
                            l.lo() > r.hi()
                        };
                        let b_wins = if *f == Func::Min {
                            r.hi() < l.lo()
                        } else {
                            r.lo() > l.hi()
                        };
                        if a_wins {
                            ga(a).to_vec()
                        } else if b_wins {
                            ga(b).to_vec()
                        } else {
                            hull(ga(a), ga(b))
                        }
                    }
                    _ => {
                        let (da, db) = slope2(*f, &xa(a), &xa(b));
                        sum(&scale(ga(a), &da), &scale(ga(b), &db))
                    }
                });
                (v, grad)
            }
            Op::Pow(a, b) => {
                let v = xa(a).pow(&xa(b));
                let grad = want_g.then(|| {
                    let da = xa(b).mul(&xa(a).pow(&xa(b).add(&Interval::point(-1.0))));
                    let db = v.mul(&Interval::call(Func::Ln, &[xa(a)]));
                    sum(&scale(ga(a), &da), &scale(ga(b), &db))
                });
                (v, grad)
            }
            Op::Clamp(a, lo, hi) => {
                let v = xa(a);
                let clipped = if v.is_empty() {
                    v
                } else {
                    Interval::new(v.lo().clamp(*lo, *hi), v.hi().clamp(*lo, *hi))
                };
                let grad = want_g.then(|| {
                    if v.lo() >= *lo && v.hi() <= *hi {
                        ga(a).to_vec()
                    } else if v.hi() < *lo || v.lo() > *hi {
                        zero()
                    } else {
                        scale(ga(a), &Interval::new(0.0, 1.0))
                    }
                });
                (clipped, grad)
            }
            Op::Select(c, a, b) => {
                let t = xa(c);
                if t.lo() >= 0.0 {
                    (xa(a), want_g.then(|| ga(a).to_vec()))
                } else if t.hi() < 0.0 {
                    (xa(b), want_g.then(|| ga(b).to_vec()))
                } else {
                    (xa(a).hull(&xa(b)), want_g.then(entire))
                }
            }
        };
        let mut value = value;
        if let (Some((m, at_mid)), Some(d)) = (centre, &grad) {
            if d.iter().all(|d| d.is_finite()) {
                let form = d
                    .iter()
                    .zip(coords.iter().zip(m))
                    .fold(at_mid[k], |acc, (d, (c, m))| {
                        acc.add(&d.mul(&c.add(&m.neg())))
                    });
                let cut = value.intersect(&form);
                if !cut.is_empty() {
                    value = cut;
                }
            }
        }
        x.push(value);
        if let Some(d) = grad {
            g.push(d);
        }
    }
    x
}

/// One value of the analysis: an enclosure of the exact value and a bound on the error.
#[derive(Clone, Copy, Debug)]
struct Value {
    exact: Interval,
    error: f64,
}

impl Value {
    /// Where the computed value lies.
    fn computed(&self) -> Interval {
        self.exact.add(&spread(self.error))
    }
}

/// The error of each output of `p` run in `float` over the box `coords` (the inputs by
/// `map`). An error is infinite where the analysis can bound nothing (a divisor that may be
/// zero, a possible overflow).
fn analyse(p: &Program, map: &InputMap, coords: &[Interval], float: Float) -> Vec<f64> {
    let fmt = Format::of(float);
    let exact = enclose(p, map, coords);
    let mut v: Vec<Value> = Vec::with_capacity(p.ops.len());
    let mut rounded = p.rounded.iter().peekable();
    for (k, op) in p.ops.iter().enumerate() {
        let at = |s: &u32| v[*s as usize];
        let x = exact[k];
        // the computed value before this operation's own rounding lies within `x ± e`
        let near = |e: f64| mag(&x.add(&spread(e)));
        let error = match op {
            Op::Const(c) => {
                let is_rounded = rounded.next_if(|(s, _)| *s as usize == k).is_some();
                // the rational written lies within half an ulp (binary64) of the double
                let half = if is_rounded {
                    Format::of(Float::F64).half_ulp(c.abs())
                } else {
                    0.0
                };
                let diff = (float.literal(*c) - c).abs();
                let diff = if diff == 0.0 { 0.0 } else { diff.next_up() };
                add_up(diff, half)
            }
            Op::Input(_) => 0.0,
            Op::Neg(a) => at(a).error,
            Op::Add(a, b) | Op::Sub(a, b) => {
                let propagated = add_up(at(a).error, at(b).error);
                // a sum that underflows is exact: no absolute term
                let half = fmt.half_ulp(near(propagated));
                add_up(propagated, if half == fmt.eta { 0.0 } else { half })
            }
            Op::Mul(ia, ib) => {
                let (a, b) = (at(ia), at(ib));
                // ã·b̃ − a·b = b̃·(ã − a) + a·(b̃ − b)
                let propagated = add_up(
                    mul_up(mag(&b.computed()), a.error),
                    mul_up(mag(&a.exact), b.error),
                );
                // a product by a power of two is exact (unless it underflows)
                let scale = [ia, ib].iter().any(|s| {
                    matches!(p.ops[**s as usize], Op::Const(c) if c != 0.0
                        && float.literal(c) == c && !p.rounded.iter().any(|(r, _)| r == *s)
                        && (c.abs().to_bits() & ((1u64 << 52) - 1)) == 0)
                });
                let computed = x.add(&spread(propagated));
                // (neither underflowing nor overflowing)
                let own = if scale
                    && mig(&computed) >= 2f64.powi(fmt.min_exp)
                    && mag(&computed) <= fmt.max
                {
                    0.0
                } else {
                    rounding(&fmt, &computed)
                };
                add_up(propagated, own)
            }
            Op::Div(a, b) => {
                let (a, b) = (at(a), at(b));
                // ã/b̃ − a/b = (ã − a)/b̃ − a·(b̃ − b)/(b·b̃)
                let (mb, mbc) = (mig(&b.exact), mig(&b.computed()));
                let propagated = if mbc == 0.0 || mb == 0.0 {
                    f64::INFINITY
                } else {
                    let q1 = Interval::point(a.error).div(&Interval::point(mbc)).hi();
                    let q2 = Interval::point(mul_up(mag(&a.exact), b.error))
                        .div(&Interval::point(mb).mul(&Interval::point(mbc)))
                        .hi();
                    add_up(q1, q2)
                };
                add_up(propagated, rounding(&fmt, &x.add(&spread(propagated))))
            }
            Op::Call1(f, a) => {
                let a = at(a);
                let mut hull = a.computed();
                if matches!(f, Func::Asin | Func::Acos) {
                    // outside [-1, 1] both would be NaN: there the code clamps first
                    hull = hull.intersect(&Interval::new(-1.0, 1.0));
                }
                let propagated = if a.error == 0.0 {
                    0.0
                } else {
                    let lipschitz = mul_up(mag(&slope(*f, &hull)), a.error);
                    if matches!(f, Func::Asin | Func::Acos) {
                        // near ±1 no slope bounds them, but both are 1/2-Hölder on [-1, 1]:
                        // |asin x − asin y| ≤ (π/√2)·√|x − y| (the gap is largest at an end,
                        // where acos(1 − d)/√d grows from √2 to π/√2 at d = 2)
                        let root = Interval::call(Func::Sqrt, &[Interval::point(a.error)]).hi();
                        lipschitz.min(mul_up(2.2214415, root))
                    } else {
                        lipschitz
                    }
                };
                let image = near(propagated);
                let own = match f {
                    Func::Abs => 0.0,
                    Func::Sqrt => fmt.half_ulp(image),
                    _ => mul_up(2.0 * LIB_ULPS, fmt.half_ulp(image)),
                };
                add_up(propagated, own)
            }
            Op::Call2(f, a, b) => {
                let (a, b) = (at(a), at(b));
                match f {
                    // 1-Lipschitz in the largest of the two errors, and exact
                    Func::Min | Func::Max => a.error.max(b.error),
                    _ => {
                        let (ha, hb) = (a.computed(), b.computed());
                        let (da, db) = slope2(*f, &ha, &hb);
                        let propagated =
                            add_up(mul_up(mag(&da), a.error), mul_up(mag(&db), b.error));
                        add_up(
                            propagated,
                            mul_up(2.0 * LIB_ULPS, fmt.half_ulp(near(propagated))),
                        )
                    }
                }
            }
            Op::Pow(a, b) => {
                let (a, b) = (at(a), at(b));
                let (ha, hb) = (a.computed(), b.computed());
                let image = ha.pow(&hb);
                // ∂/∂a = b·a^(b−1), ∂/∂b = a^b·ln a
                let da = hb.mul(&ha.pow(&hb.add(&Interval::point(-1.0))));
                let db = image.mul(&Interval::call(Func::Ln, &[ha]));
                let propagated = add_up(
                    if a.error == 0.0 {
                        0.0
                    } else {
                        mul_up(mag(&da), a.error)
                    },
                    if b.error == 0.0 {
                        0.0
                    } else {
                        mul_up(mag(&db), b.error)
                    },
                );
                add_up(
                    propagated,
                    mul_up(2.0 * LIB_ULPS, fmt.half_ulp(near(propagated))),
                )
            }
            Op::Clamp(a, lo, hi) => {
                let a = at(a);
                // the code clamps to its type's ends, rounded inward; the double ends may
                // themselves be a decimal rounded (half an ulp)
                let (tl, th) = float.inward((*lo, *hi));
                let f64_half = Format::of(Float::F64);
                let end = |t: f64, e: f64| {
                    let d = (t - e).abs();
                    add_up(
                        if d == 0.0 { 0.0 } else { d.next_up() },
                        f64_half.half_ulp(e.abs()),
                    )
                };
                let ends = end(tl, *lo).max(end(th, *hi));
                let computed = a.computed();
                // where exact and computed values both lie beyond an end, both are clamped
                // to it and only the ends differ
                if computed.lo() > *hi || computed.hi() < *lo {
                    ends
                } else {
                    add_up(a.error, ends)
                }
            }
            Op::Select(c, a, b) => {
                let (c, a, b) = (at(c), at(a), at(b));
                let cc = c.computed();
                if cc.lo() >= 0.0 {
                    a.error
                } else if cc.hi() < 0.0 {
                    b.error
                } else {
                    // exact and computed may take different arms
                    let all = a.computed().hull(&b.computed());
                    let apart = mag(&all.add(&x.neg()));
                    apart.max(a.error).max(b.error)
                }
            }
        };
        let value = if error.is_nan() || x.is_empty() {
            Value {
                exact: Interval::entire(),
                error: f64::INFINITY,
            }
        } else {
            Value { exact: x, error }
        };
        v.push(value);
    }
    p.outputs
        .iter()
        .map(|(_, s)| v[*s as usize].error)
        .collect()
}

/// The rounding error of a product or quotient whose computed value lies in `x`: half an ulp
/// and, if it may underflow, half the smallest subnormal.
fn rounding(fmt: &Format, x: &Interval) -> f64 {
    let half = fmt.half_ulp(mag(x));
    if half != fmt.eta && mig(x) < 2f64.powi(fmt.min_exp) {
        add_up(half, fmt.eta)
    } else {
        half
    }
}

/// An enclosure of `f'` over `x`.
fn slope(f: Func, x: &Interval) -> Interval {
    let one = Interval::point(1.0);
    let sq = x.powi(2);
    match f {
        Func::Sin => Interval::call(Func::Cos, &[*x]),
        Func::Cos => Interval::call(Func::Sin, &[*x]),
        Func::Tan => one.add(&Interval::call(Func::Tan, &[*x]).powi(2)),
        Func::Asin | Func::Acos => {
            if x.lo() <= -1.0 || x.hi() >= 1.0 {
                Interval::entire()
            } else {
                one.div(&Interval::call(Func::Sqrt, &[one.add(&sq.neg())]))
            }
        }
        Func::Atan => one.div(&one.add(&sq)),
        Func::Sqrt => {
            if x.lo() <= 0.0 {
                Interval::entire()
            } else {
                Interval::point(0.5).div(&Interval::call(Func::Sqrt, &[*x]))
            }
        }
        Func::Exp => Interval::call(Func::Exp, &[*x]),
        Func::Ln => {
            if x.lo() <= 0.0 {
                Interval::entire()
            } else {
                one.div(x)
            }
        }
        Func::Abs => one,
        _ => Interval::entire(),
    }
}

/// Enclosures of `∂f/∂a` and `∂f/∂b` over `a × b` (`atan2(a, b)`).
fn slope2(f: Func, a: &Interval, b: &Interval) -> (Interval, Interval) {
    match f {
        Func::Atan2 => {
            let r2 = a.powi(2).add(&b.powi(2));
            if r2.lo() <= 0.0 {
                return (Interval::entire(), Interval::entire());
            }
            (b.div(&r2), a.neg().div(&r2))
        }
        _ => (Interval::entire(), Interval::entire()),
    }
}

/// A proved round-off bound of one output.
#[derive(Clone, Debug, PartialEq)]
pub struct RoundoffBound {
    /// The output's name.
    pub output: String,
    /// The float type of the code.
    pub float: Float,
    /// The bound on |computed − exact| over the whole input box (infinite: none proved): the
    /// largest leaf's, a millionth (2⁻²⁰) above it.
    pub bound: f64,
    /// Leaves of the split.
    pub boxes: usize,
    /// The split tree in preorder: a coordinate index for a box halved at its midpoint
    /// (`0.5·lo + 0.5·hi`), lower half first; −1 for a leaf.
    pub tree: Vec<i32>,
}

/// A box of the branch and bound, ordered by its bound.
struct Leaf {
    bound: f64,
    inputs: Vec<Interval>,
    node: usize,
}

impl PartialEq for Leaf {
    fn eq(&self, o: &Leaf) -> bool {
        self.bound.total_cmp(&o.bound).is_eq()
    }
}
impl Eq for Leaf {}
impl PartialOrd for Leaf {
    fn partial_cmp(&self, o: &Leaf) -> Option<std::cmp::Ordering> {
        Some(self.cmp(o))
    }
}
impl Ord for Leaf {
    fn cmp(&self, o: &Leaf) -> std::cmp::Ordering {
        self.bound.total_cmp(&o.bound)
    }
}

/// The leaves of a split tree (preorder, as [`RoundoffBound::tree`]) over `coords`, or `None`
/// when the tree is malformed.
pub fn leaves_of(tree: &[i32], coords: &[Interval]) -> Option<Vec<Vec<Interval>>> {
    let mut out = Vec::new();
    let mut stack = vec![coords.to_vec()];
    let mut it = tree.iter();
    while let Some(b) = stack.pop() {
        let &d = it.next()?;
        if d < 0 {
            out.push(b);
            continue;
        }
        let i = d as usize;
        let x = *b.get(i)?;
        let mid = x.mid();
        if !(mid > x.lo() && mid < x.hi()) {
            return None;
        }
        let (mut lo, mut hi) = (b.clone(), b);
        lo[i] = Interval::new(x.lo(), mid);
        hi[i] = Interval::new(mid, x.hi());
        stack.push(hi);
        stack.push(lo);
    }
    it.next().is_none().then_some(out)
}

/// Output `o`'s round-off bound over one box (what each leaf of a tree claims).
pub fn leaf_bound(p: &Program, map: &InputMap, bx: &[Interval], float: Float, o: usize) -> f64 {
    analyse(p, map, bx, float)[o]
}

/// The round-off bound of each output of `p` in `float` over the box `coords` (the program's
/// inputs by `map`), each output's box split into `max_boxes` leaves or more (up to
/// [`GROWTH`] times as many while the bound keeps halving): the leaf with the largest bound
/// halved along its widest coordinate relative to the whole box, until the budget is spent
/// or no split is left.
pub fn roundoff(
    p: &Program,
    map: &InputMap,
    coords: &[Interval],
    float: Float,
    max_boxes: usize,
) -> Vec<RoundoffBound> {
    let widths: Vec<f64> = coords.iter().map(|x| x.width()).collect();
    (0..p.outputs.len())
        .map(|o| {
            let bound_of = |b: &[Interval]| analyse(p, map, b, float)[o];
            // each node's split: (coordinate, lower child, upper child)
            let mut splits: Vec<Option<(usize, usize, usize)>> = vec![None];
            let mut heap = BinaryHeap::new();
            heap.push(Leaf {
                bound: bound_of(coords),
                inputs: coords.to_vec(),
                node: 0,
            });
            let mut leaves = 1;
            // the budget doubles, up to GROWTH times, while the last doubling at least halved
            // the bound (a loose leaf, e.g. asin near ±1 in a wide box, still being cut down)
            let mut budget = max_boxes.max(1);
            let mut before = f64::INFINITY;
            loop {
                if leaves >= budget {
                    let now = heap.peek().map_or(0.0, |l: &Leaf| l.bound);
                    if budget < max_boxes.max(1) * GROWTH && now <= 0.5 * before {
                        before = now;
                        budget *= 2;
                    } else {
                        break;
                    }
                }
                let Some(top) = heap.peek() else { break };
                if top.bound == 0.0 {
                    break;
                }
                // the widest coordinate, relative to the whole box
                let split = (0..coords.len())
                    .filter(|&i| widths[i] > 0.0 && top.inputs[i].width() > 0.0)
                    .max_by(|&i, &j| {
                        (top.inputs[i].width() / widths[i])
                            .total_cmp(&(top.inputs[j].width() / widths[j]))
                    });
                let Some(i) = split else { break };
                let x = top.inputs[i];
                let mid = x.mid();
                if !(mid > x.lo() && mid < x.hi()) {
                    break;
                }
                let top = heap.pop().expect("peeked");
                let children = (splits.len(), splits.len() + 1);
                splits[top.node] = Some((i, children.0, children.1));
                for (half, node) in [
                    (Interval::new(x.lo(), mid), children.0),
                    (Interval::new(mid, x.hi()), children.1),
                ] {
                    splits.push(None);
                    let mut b = top.inputs.clone();
                    b[i] = half;
                    heap.push(Leaf {
                        bound: bound_of(&b),
                        inputs: b,
                        node,
                    });
                }
                leaves += 1;
            }
            let mut tree = Vec::with_capacity(splits.len());
            let mut stack = vec![0usize];
            while let Some(n) = stack.pop() {
                match splits[n] {
                    Some((i, lo, hi)) => {
                        tree.push(i as i32);
                        stack.push(hi);
                        stack.push(lo);
                    }
                    None => tree.push(-1),
                }
            }
            // stated with a relative margin of 2^-20 (a millionth), so that a checker with
            // arithmetic a few ulps wider than this one still confirms every leaf
            let worst = heap.iter().map(|l| l.bound).fold(0.0, f64::max);
            let stated = if worst > 0.0 && worst.is_finite() {
                (worst * (1.0 + 2f64.powi(-20))).next_up()
            } else {
                worst
            };
            RoundoffBound {
                output: p.outputs[o].0.clone(),
                float,
                bound: stated,
                boxes: leaves,
                tree,
            }
        })
        .collect()
}

/// The round-off bound of each output of a controller's law (each command as sent, held
/// within its limits, then each controller state's update law) in `float`, over every input
/// the code accepts without raising its domain flag: references, rates and signals within
/// their ranges, each state its reference (or equilibrium) plus an error within its error box
/// (the code's error, itself rounded, within the ends, so the exact one within them widened
/// by a rounding), each controller state within its limits, each gain within its range (a
/// box holding the gain set). Ends as the code of that type compares against them (rounded
/// inward). The coordinates of the box are the references, rates, signals, then each state's
/// error, the controller states and the gains.
pub fn law_roundoff(c: &Controller, float: Float, max_boxes: usize) -> Vec<RoundoffBound> {
    let (law, map, coords, _) = law_domain(c, float);
    roundoff(&law, &map, &coords, float, max_boxes)
}

/// What [`law_roundoff`] analyses: the law with each command held within its limits, how
/// its inputs follow from the coordinates, the coordinates' box and their names.
pub fn law_domain(c: &Controller, float: Float) -> (Program, InputMap, Vec<Interval>, Vec<String>) {
    let fmt = Format::of(float);
    let range = |r: (f64, f64)| {
        let (lo, hi) = float.inward(r);
        Interval::new(lo, hi)
    };
    let ns = c.states.len();
    let ranged: Vec<&lawsmith_codegen::Ranged> = c
        .references
        .iter()
        .chain(&c.rates)
        .chain(&c.signals)
        .collect();
    let nr = ranged.len();
    let mut names: Vec<String> = ranged.iter().map(|r| r.name.clone()).collect();
    let mut coords: Vec<Interval> = ranged.iter().map(|r| range(r.range)).collect();
    // each state's exact error: the rounded error within the ends, so the exact one within
    // them widened by the rounding of a difference of that size
    for s in &c.states {
        let e = range(s.error);
        coords.push(e.add(&spread(fmt.half_ulp(mag(&e)))));
        names.push(format!("Δ{}", s.name));
    }
    let mut map: Vec<(f64, Vec<usize>)> = c
        .states
        .iter()
        .enumerate()
        .map(|(i, s)| match s.reference {
            Some(r) => (0.0, vec![r, nr + i]),
            None => (float.literal(s.equilibrium), vec![nr + i]),
        })
        .collect();
    map.extend((0..nr).map(|j| (0.0, vec![j])));
    let rest = c
        .memory
        .iter()
        .map(|m| (&m.name, m.limits))
        .chain(c.gains.iter().map(|g| (&g.name, g.range)));
    for (name, r) in rest {
        map.push((0.0, vec![coords.len()]));
        coords.push(range(r));
        names.push(name.clone());
    }
    debug_assert_eq!(map.len(), ns + nr + c.memory.len() + c.gains.len());
    // each command as the code sends it: held within its limits
    let mut law = c.law.clone();
    for (k, a) in c.actuators.iter().enumerate() {
        let s = law.outputs[k].1;
        law.ops.push(Op::Clamp(s, a.limits.0, a.limits.1));
        law.names.push(format!("{}_sent", a.name));
        law.outputs[k].1 = (law.ops.len() - 1) as u32;
    }
    (law, InputMap(map), coords, names)
}

/// The proved round-off bounds of a controller's law in both precisions: what `check
/// --roundoff`, `emit` and `build` report and the certificate records.
#[derive(Clone, Debug)]
pub struct RoundoffReport {
    /// The program analysed (the law, each command held within its limits).
    pub program: Program,
    /// The names of the box's coordinates.
    pub coordinates: Vec<String>,
    /// Leaves per output at most.
    pub leaves: usize,
    /// Per float type: the input map, the box, each output's bound.
    pub precisions: Vec<(Float, InputMap, Vec<Interval>, Vec<RoundoffBound>)>,
}

/// Leaves per output of the round-off analysis `check --roundoff`, `emit` and `build` run, at
/// least (see [`GROWTH`]).
pub const ROUNDOFF_LEAVES: usize = 2_000;

/// How far [`roundoff`] may grow its leaf budget: it doubles the budget, up to this factor,
/// as long as the last doubling halved the bound.
pub const GROWTH: usize = 16;

/// The operation of a law's program whose round-off the independent checker does not
/// analyse (rule R13 covers arithmetic, clamps, `min`/`max` and the functions of one argument
/// but `tan`), if there is one.
fn unchecked_operation(p: &Program) -> Option<&'static str> {
    p.ops.iter().find_map(|op| match op {
        Op::Pow(..) => Some("pow"),
        Op::Select(..) => Some("a branch"),
        Op::Call1(Func::Tan, _) => Some("tan"),
        Op::Call2(f, ..) if !matches!(f, Func::Min | Func::Max) => Some(f.name()),
        _ => None,
    })
}

/// The round-off bounds of a controller's law in f64 and f32; none (and why) for a law with
/// an operation the independent checker does not analyse, rather than a bound only one
/// checker can redo.
pub fn roundoff_report(c: &Controller, leaves: usize) -> Result<RoundoffReport, String> {
    if let Some(op) = unchecked_operation(&c.law) {
        return Err(format!(
            "the law computes {op}, whose round-off the independent checker does not analyse yet"
        ));
    }
    let mut precisions = Vec::new();
    let mut first = None;
    for float in [Float::F64, Float::F32] {
        let (law, map, coords, names) = law_domain(c, float);
        let bounds = roundoff(&law, &map, &coords, float, leaves);
        precisions.push((float, map, coords, bounds));
        first.get_or_insert((law, names));
    }
    let (program, coordinates) = first.expect("two precisions");
    Ok(RoundoffReport {
        program,
        coordinates,
        leaves,
        precisions,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn program(text: &str, vars: &[&str]) -> Program {
        Program::of_formula(text, vars, "y").unwrap()
    }

    #[test]
    fn one_rounding_is_half_an_ulp_of_the_result_binade() {
        // x*y over [1, 1.5]²: the product lies in [1, 2.25], so its rounding is at most
        // half an ulp of [2, 4): 2^1·2^-53 (IEEE 754 binary64, round to nearest)
        let p = program("x*y", &["x", "y"]);
        let b = [Interval::new(1.0, 1.5), Interval::new(1.0, 1.5)];
        let map = InputMap::identity(b.len());
        assert_eq!(leaf_bound(&p, &map, &b, Float::F64, 0), 2f64.powi(-52));
        // in binary32 the same with u = 2^-24
        assert_eq!(leaf_bound(&p, &map, &b, Float::F32, 0), 2f64.powi(-23));
        // the stated bound: the leaf's and a millionth (2^-20) more, no more
        let r = roundoff(&p, &map, &b, Float::F64, 1);
        assert!(
            r[0].bound > 2f64.powi(-52) && r[0].bound <= 2f64.powi(-52) * (1.0 + 2f64.powi(-19))
        );
        // an exact operation: negation
        let p = program("-x", &["x"]);
        assert_eq!(
            roundoff(&p, &InputMap::identity(1), &b[..1], Float::F64, 1,)[0].bound,
            0.0
        );
    }

    #[test]
    fn a_rounded_constant_counts_its_distance_from_the_rational() {
        // 0.1 is not a binary fraction: its double is within 2^-57 of 1/10 (half an ulp of
        // [1/16, 1/8)), and its float 1.49e-9 from it
        let p = program("0.1*x", &["x"]);
        assert_eq!(p.rounded.len(), 1);
        let b = [Interval::new(1.0, 1.0)];
        let r64 = roundoff(&p, &InputMap::identity(b.len()), &b, Float::F64, 1)[0].bound;
        assert!(r64 > 2f64.powi(-57) && r64 < 2f64.powi(-53), "{r64:e}");
        let r32 = roundoff(&p, &InputMap::identity(b.len()), &b, Float::F32, 1)[0].bound;
        let float_error = (f64::from(0.1f32) - 0.1).abs();
        assert!(
            r32 > float_error && r32 < 2.0 * float_error + 2f64.powi(-27),
            "{r32:e}"
        );
        // 0.5 is exact: no error from the constant
        let p = program("0.5*x", &["x"]);
        assert!(p.rounded.is_empty());
        assert_eq!(
            roundoff(&p, &InputMap::identity(b.len()), &b, Float::F64, 1,)[0].bound,
            0.0
        );
    }

    #[test]
    fn splitting_recovers_what_intervals_forget() {
        // (x - y) over x, y in [100, 110] with |x - y| small only where x ≈ y: the bound is
        // at most half an ulp of 10 after splitting; sampled errors stay below it
        let p = program("(x - y)*(x - y)", &["x", "y"]);
        let b = [Interval::new(100.0, 110.0), Interval::new(100.0, 110.0)];
        let coarse = roundoff(&p, &InputMap::identity(b.len()), &b, Float::F32, 1)[0].bound;
        let fine = roundoff(&p, &InputMap::identity(b.len()), &b, Float::F32, 2000)[0].bound;
        assert!(fine <= coarse, "{fine:e} {coarse:e}");
        let mut rng = lawsmith_expr::random::Rng(3);
        let mut slots = Vec::new();
        let mut worst: f64 = 0.0;
        for _ in 0..20_000 {
            let (x, y) = (100.0 + 10.0 * rng.unit(), 100.0 + 10.0 * rng.unit());
            let (x, y) = (x as f32, y as f32);
            let got = p.run(&[x, y], &mut slots)[0];
            // the exact value of the f32 inputs, in f64: (x − y) is exact in f64 and its
            // square has 48 bits at most
            let d = f64::from(x) - f64::from(y);
            worst = worst.max((f64::from(got) - d * d).abs());
        }
        assert!(worst <= fine, "{worst:e} > {fine:e}");
    }
}
