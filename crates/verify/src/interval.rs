//! Sound interval arithmetic on f64.
//!
//! Every operation rounds outward: results computed in round-to-nearest are widened with
//! `next_down`/`next_up`, so the true result of the operation on any points of the operands
//! lies inside. Transcendental functions come from the `libm` crate (a port of musl's, whose
//! documented error is below 1 ulp for the functions used) and are widened by
//! [`LIBM_ULPS`] = 2 ulps on each side: one for libm's error, one for margin. `sin`/`cos` get
//! their exact extrema (±1) whenever the interval may contain a crest or trough.
//!
//! Functions are evaluated over the part of their argument inside their domain (`sqrt` of
//! [−1, 4] is [0, 2]); an argument entirely outside gives the empty interval (NaN bounds).
//! Whether an argument leaves its domain is the well-posedness check's question, not this
//! module's.

use lawsmith_expr::{Arith, Func};
use std::f64::consts::{FRAC_PI_2, PI, TAU};

/// Ulps added on each side of a `libm` result.
pub const LIBM_ULPS: u32 = 2;

/// A closed interval `[lo, hi]` of reals; NaN bounds mark the empty interval.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Interval {
    lo: f64,
    hi: f64,
}

fn down(x: f64) -> f64 {
    if x.is_nan() {
        x
    } else {
        x.next_down()
    }
}

fn up(x: f64) -> f64 {
    if x.is_nan() {
        x
    } else {
        x.next_up()
    }
}

fn down_n(mut x: f64, n: u32) -> f64 {
    for _ in 0..n {
        x = down(x);
    }
    x
}

fn up_n(mut x: f64, n: u32) -> f64 {
    for _ in 0..n {
        x = up(x);
    }
    x
}

/// Products and quotients whose magnitude is at least this are exact exactly when the fused
/// residual is zero; below it the residual itself may underflow, so exactness is not claimed.
const EXACT_RESIDUAL_MIN: f64 = 1e-290;

/// `a · b` rounded down (`upward = false`) or up, with `0 · ∞` counted as 0 (the limit that
/// matters for bounds). A product that is exact (zero factor, or a zero fused residual) is not
/// widened, so `0 · x` stays exactly 0 and a semidefinite bound like `−k·ω² ≤ 0` is not lost
/// to rounding.
fn prod(a: f64, b: f64, upward: bool) -> f64 {
    let p = a * b;
    if p.is_nan() {
        return 0.0;
    }
    if a == 0.0 || b == 0.0 || p.is_infinite() {
        // an infinite product of finite factors overflowed: ±MAX is still a valid bound on the
        // far side, and ±∞ a valid one on the near side
        return if p.is_infinite() && a.is_finite() && b.is_finite() {
            if upward {
                up(p)
            } else {
                down(p)
            }
        } else {
            p
        };
    }
    if p.abs() >= EXACT_RESIDUAL_MIN && a.mul_add(b, -p) == 0.0 {
        return p;
    }
    if upward {
        up(p)
    } else {
        down(p)
    }
}

/// `a + b` rounded down or up; an exact sum (zero TwoSum error) is not widened.
fn sum(a: f64, b: f64, upward: bool) -> f64 {
    let s = a + b;
    if s.is_finite() {
        // Knuth's TwoSum: the rounding error of a + b, exact in floating point
        let bp = s - a;
        let err = (a - (s - bp)) + (b - bp);
        if err == 0.0 {
            return s;
        }
    }
    if upward {
        up(s)
    } else {
        down(s)
    }
}

/// `a / b` (b ≠ 0) rounded down or up; an exact quotient is not widened.
fn quot(a: f64, b: f64, upward: bool) -> f64 {
    let q = a / b;
    if a == 0.0 || q.is_infinite() && a.is_infinite() {
        return q;
    }
    if q.is_finite() && q.abs() >= EXACT_RESIDUAL_MIN && (-q).mul_add(b, a) == 0.0 {
        return q;
    }
    if upward {
        up(q)
    } else {
        down(q)
    }
}

/// `√x` (x ≥ 0) rounded down or up. sqrt is correctly rounded (IEEE 754), so one ulp is
/// enough; an exact root (`√0`, `√4`: a zero fused residual) is not widened, so a square
/// root that vanishes exactly at a point stays `[0, 0]` there and `√(…) ≠ 0` can be refuted.
fn root(x: f64, upward: bool) -> f64 {
    let r = x.sqrt();
    if x == 0.0 || x.is_infinite() || x >= EXACT_RESIDUAL_MIN && r.mul_add(r, -x) == 0.0 {
        return r;
    }
    if upward {
        up(r)
    } else {
        down(r)
    }
}

impl Interval {
    /// `[lo, hi]`.
    ///
    /// # Panics
    /// If `lo > hi` or either bound is NaN.
    pub fn new(lo: f64, hi: f64) -> Interval {
        assert!(lo <= hi, "interval [{lo}, {hi}] is not ordered");
        Interval { lo, hi }
    }

    /// The degenerate interval `[x, x]`.
    pub fn point(x: f64) -> Interval {
        Interval { lo: x, hi: x }
    }

    /// The whole real line.
    pub fn entire() -> Interval {
        Interval {
            lo: f64::NEG_INFINITY,
            hi: f64::INFINITY,
        }
    }

    /// The empty interval (an argument entirely outside a function's domain).
    pub fn empty() -> Interval {
        Interval {
            lo: f64::NAN,
            hi: f64::NAN,
        }
    }

    /// Lower bound.
    pub fn lo(&self) -> f64 {
        self.lo
    }

    /// Upper bound.
    pub fn hi(&self) -> f64 {
        self.hi
    }

    /// True for the empty interval.
    pub fn is_empty(&self) -> bool {
        self.lo.is_nan() || self.hi.is_nan()
    }

    /// Midpoint (finite for finite intervals).
    pub fn mid(&self) -> f64 {
        0.5 * self.lo + 0.5 * self.hi
    }

    /// Width `hi − lo`.
    pub fn width(&self) -> f64 {
        self.hi - self.lo
    }

    /// True when `x` lies inside.
    pub fn contains(&self, x: f64) -> bool {
        self.lo <= x && x <= self.hi
    }

    /// Largest absolute value, `max(|lo|, |hi|)`.
    pub fn mag(&self) -> f64 {
        self.lo.abs().max(self.hi.abs())
    }

    /// True when both bounds are finite numbers (not empty, not unbounded).
    pub fn is_finite(&self) -> bool {
        self.lo.is_finite() && self.hi.is_finite()
    }

    /// The common part of two intervals, or empty. An empty operand leaves the other.
    pub fn intersect(&self, o: &Interval) -> Interval {
        if self.is_empty() {
            return *o;
        }
        if o.is_empty() {
            return *self;
        }
        self.clip(o.lo, o.hi)
    }

    /// Smallest interval holding both.
    pub fn hull(&self, o: &Interval) -> Interval {
        if self.is_empty() {
            return *o;
        }
        if o.is_empty() {
            return *self;
        }
        Interval {
            lo: self.lo.min(o.lo),
            hi: self.hi.max(o.hi),
        }
    }

    /// The part inside `[lo, hi]`, or empty.
    fn clip(&self, lo: f64, hi: f64) -> Interval {
        let (a, b) = (self.lo.max(lo), self.hi.min(hi));
        if self.is_empty() || a > b {
            Interval::empty()
        } else {
            Interval { lo: a, hi: b }
        }
    }

    fn widened(lo: f64, hi: f64) -> Interval {
        if lo.is_nan() || hi.is_nan() {
            return Interval::empty();
        }
        Interval {
            lo: down_n(lo, LIBM_ULPS),
            hi: up_n(hi, LIBM_ULPS),
        }
    }

    fn monotone(&self, f: fn(f64) -> f64, increasing: bool) -> Interval {
        if self.is_empty() {
            return *self;
        }
        let (a, b) = (f(self.lo), f(self.hi));
        if increasing {
            Interval::widened(a, b)
        } else {
            Interval::widened(b, a)
        }
    }

    /// `x^n` for `x ≥ 0` rounded down (`upward = false`) or up, by repeated multiplication.
    fn pow_pos(x: f64, n: u32, upward: bool) -> f64 {
        let mut acc = 1.0;
        for _ in 0..n {
            acc = prod(acc, x, upward).max(0.0);
        }
        acc
    }

    /// True when some `c + k·period` (integer k) may lie in the interval. Errs towards yes.
    fn may_contain_periodic(&self, c: f64, period: f64) -> bool {
        // (x − c)/period is computed with a relative error far below this margin for
        // |x| < 1e8; beyond that, callers give up and return the full range.
        let eps = 1e-9;
        let kmin = ((self.lo - c) / period - eps).ceil();
        let kmax = ((self.hi - c) / period + eps).floor();
        kmin <= kmax
    }

    fn sin_cos(&self, sine: bool) -> Interval {
        if self.is_empty() {
            return *self;
        }
        let full = Interval::new(-1.0, 1.0);
        if self.width() >= TAU || self.lo.abs() > 1e8 || self.hi.abs() > 1e8 {
            return full;
        }
        let f = if sine { libm::sin } else { libm::cos };
        let (a, b) = (f(self.lo), f(self.hi));
        let mut lo = down_n(a.min(b), LIBM_ULPS);
        let mut hi = up_n(a.max(b), LIBM_ULPS);
        let (crest, trough) = if sine {
            (FRAC_PI_2, -FRAC_PI_2)
        } else {
            (0.0, PI)
        };
        if self.may_contain_periodic(crest, TAU) {
            hi = 1.0;
        }
        if self.may_contain_periodic(trough, TAU) {
            lo = -1.0;
        }
        Interval {
            lo: lo.max(-1.0),
            hi: hi.min(1.0),
        }
    }
}

impl Arith for Interval {
    fn constant(value: f64, exact: bool) -> Interval {
        if exact {
            Interval::point(value)
        } else {
            Interval {
                lo: down(value),
                hi: up(value),
            }
        }
    }

    fn neg(&self) -> Interval {
        Interval {
            lo: -self.hi,
            hi: -self.lo,
        }
    }

    fn add(&self, b: &Interval) -> Interval {
        if self.is_empty() || b.is_empty() {
            return Interval::empty();
        }
        Interval {
            lo: sum(self.lo, b.lo, false),
            hi: sum(self.hi, b.hi, true),
        }
    }

    fn mul(&self, b: &Interval) -> Interval {
        if self.is_empty() || b.is_empty() {
            return Interval::empty();
        }
        if self.lo >= 0.0 && b.lo >= 0.0 {
            // both non-negative, the common case of squares and gains: two products
            return Interval {
                lo: prod(self.lo, b.lo, false).max(0.0),
                hi: prod(self.hi, b.hi, true),
            };
        }
        let pairs = [
            (self.lo, b.lo),
            (self.lo, b.hi),
            (self.hi, b.lo),
            (self.hi, b.hi),
        ];
        // round-to-nearest is monotone, so the smallest exact product is among the pairs
        // whose nearest product is smallest; every such pair is bounded (a pair whose product
        // is exact must not stand for a tied one whose exact product rounded up to it)
        let near = |&(x, y): &(f64, f64)| {
            let p = x * y;
            if p.is_nan() {
                0.0
            } else {
                p
            }
        };
        let (mut imin, mut imax) = (0, 0);
        let mut vals = [0.0; 4];
        for (k, pr) in pairs.iter().enumerate() {
            vals[k] = near(pr);
            if vals[k] < vals[imin] {
                imin = k;
            }
            if vals[k] > vals[imax] {
                imax = k;
            }
        }
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for (k, &(x, y)) in pairs.iter().enumerate() {
            if vals[k] == vals[imin] {
                lo = lo.min(prod(x, y, false));
            }
            if vals[k] == vals[imax] {
                hi = hi.max(prod(x, y, true));
            }
        }
        Interval { lo, hi }
    }

    fn div(&self, b: &Interval) -> Interval {
        if self.is_empty() || b.is_empty() {
            return Interval::empty();
        }
        if b.lo <= 0.0 && b.hi >= 0.0 {
            // a divisor that may be zero: only [0, 0] is certainly undefined; otherwise the
            // quotient is unbounded (the hull of the two half-lines)
            return if b.lo == 0.0 && b.hi == 0.0 {
                Interval::empty()
            } else {
                Interval::entire()
            };
        }
        let pairs = [
            (self.lo, b.lo),
            (self.lo, b.hi),
            (self.hi, b.lo),
            (self.hi, b.hi),
        ];
        let lo = pairs
            .iter()
            .map(|&(x, y)| quot(x, y, false))
            .fold(f64::INFINITY, f64::min);
        let hi = pairs
            .iter()
            .map(|&(x, y)| quot(x, y, true))
            .fold(f64::NEG_INFINITY, f64::max);
        Interval { lo, hi }
    }

    fn pow(&self, b: &Interval) -> Interval {
        if b.lo == b.hi && b.lo == b.lo.trunc() && b.lo.abs() <= 64.0 {
            return self.powi(b.lo as i32);
        }
        // a^b = exp(b·ln a), defined for a > 0 (a = 0 with b > 0 gives 0)
        let ln = Interval::call(Func::Ln, &[*self]);
        let e = b.mul(&ln);
        Interval::call(Func::Exp, &[e])
    }

    fn powi(&self, n: i32) -> Interval {
        if self.is_empty() {
            return *self;
        }
        if n == 0 {
            return Interval::point(1.0);
        }
        if n < 0 {
            return Interval::point(1.0).div(&self.powi(-n));
        }
        let m = n as u32;
        let (lo, hi) = (self.lo, self.hi);
        if n % 2 == 1 {
            let pl = if lo >= 0.0 {
                Interval::pow_pos(lo, m, false)
            } else {
                -Interval::pow_pos(-lo, m, true)
            };
            let ph = if hi >= 0.0 {
                Interval::pow_pos(hi, m, true)
            } else {
                -Interval::pow_pos(-hi, m, false)
            };
            return Interval { lo: pl, hi: ph };
        }
        if lo >= 0.0 {
            Interval {
                lo: Interval::pow_pos(lo, m, false),
                hi: Interval::pow_pos(hi, m, true),
            }
        } else if hi <= 0.0 {
            Interval {
                lo: Interval::pow_pos(-hi, m, false),
                hi: Interval::pow_pos(-lo, m, true),
            }
        } else {
            Interval {
                lo: 0.0,
                hi: Interval::pow_pos((-lo).max(hi), m, true),
            }
        }
    }

    fn call(f: Func, a: &[Interval]) -> Interval {
        let x = a[0];
        match f {
            Func::Sin => x.sin_cos(true),
            Func::Cos => x.sin_cos(false),
            Func::Tan => {
                if x.is_empty() {
                    return x;
                }
                if x.width() >= PI
                    || x.lo.abs() > 1e8
                    || x.hi.abs() > 1e8
                    || x.may_contain_periodic(FRAC_PI_2, PI)
                {
                    return Interval::entire();
                }
                x.monotone(libm::tan, true)
            }
            Func::Asin => {
                let r = x.clip(-1.0, 1.0).monotone(libm::asin, true);
                r.clip(-FRAC_PI_2.next_up(), FRAC_PI_2.next_up())
            }
            Func::Acos => {
                let r = x.clip(-1.0, 1.0).monotone(libm::acos, false);
                r.clip(0.0, PI.next_up())
            }
            Func::Atan => x
                .monotone(libm::atan, true)
                .clip(-FRAC_PI_2.next_up(), FRAC_PI_2.next_up()),
            Func::Atan2 => {
                let (y, x) = (a[0], a[1]);
                if y.is_empty() || x.is_empty() {
                    return Interval::empty();
                }
                if x.lo > 0.0 {
                    // monotone in each argument on this half-plane: extremes at corners
                    let c = [
                        libm::atan2(y.lo, x.lo),
                        libm::atan2(y.lo, x.hi),
                        libm::atan2(y.hi, x.lo),
                        libm::atan2(y.hi, x.hi),
                    ];
                    let lo = c.iter().copied().fold(f64::INFINITY, f64::min);
                    let hi = c.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                    Interval::widened(lo, hi)
                } else {
                    Interval::new(-PI.next_up(), PI.next_up())
                }
            }
            Func::Sqrt => {
                let c = x.clip(0.0, f64::INFINITY);
                if c.is_empty() {
                    return c;
                }
                Interval {
                    lo: root(c.lo, false).max(0.0),
                    hi: root(c.hi, true),
                }
            }
            Func::Exp => {
                let r = x.monotone(libm::exp, true);
                if r.is_empty() {
                    r
                } else {
                    Interval {
                        lo: r.lo.max(0.0),
                        hi: r.hi,
                    }
                }
            }
            Func::Ln => x.clip(0.0, f64::INFINITY).monotone(libm::log, true),
            Func::Abs => {
                if x.is_empty() || x.lo >= 0.0 {
                    x
                } else if x.hi <= 0.0 {
                    x.neg()
                } else {
                    Interval {
                        lo: 0.0,
                        hi: (-x.lo).max(x.hi),
                    }
                }
            }
            Func::Min => {
                let b = a[1];
                if x.is_empty() || b.is_empty() {
                    return Interval::empty();
                }
                Interval {
                    lo: x.lo.min(b.lo),
                    hi: x.hi.min(b.hi),
                }
            }
            Func::Max => {
                let b = a[1];
                if x.is_empty() || b.is_empty() {
                    return Interval::empty();
                }
                Interval {
                    lo: x.lo.max(b.lo),
                    hi: x.hi.max(b.hi),
                }
            }
            Func::Clamp => {
                let m = Interval::call(Func::Max, &[a[0], a[1]]);
                Interval::call(Func::Min, &[m, a[2]])
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn iv(lo: f64, hi: f64) -> Interval {
        Interval::new(lo, hi)
    }

    #[test]
    fn sine_and_cosine_reach_their_extrema() {
        // common practice: sin has its crest at π/2, cos at 0 and its trough at π
        let s = iv(0.0, 3.0).sin_cos(true);
        assert_eq!(s.hi(), 1.0);
        assert!(s.lo() <= 0.0 && s.lo() > -1e-15);
        let c = iv(-0.1, 0.1).sin_cos(false);
        assert_eq!(c.hi(), 1.0);
        assert!(c.lo() < 0.1f64.cos() && c.lo() > 0.99);
        let c = iv(3.0, 3.3).sin_cos(false);
        assert_eq!(c.lo(), -1.0);
        assert_eq!(iv(0.0, 7.0).sin_cos(true), iv(-1.0, 1.0));
    }

    #[test]
    fn division_by_an_interval_holding_zero_is_explicit() {
        let a = iv(1.0, 2.0);
        assert_eq!(a.div(&iv(-1.0, 1.0)), Interval::entire());
        assert!(a.div(&iv(0.0, 0.0)).is_empty());
        let q = a.div(&iv(2.0, 4.0));
        assert!(q.contains(0.25) && q.contains(1.0) && q.width() < 0.75 + 1e-12);
    }

    #[test]
    fn even_powers_of_a_straddling_interval_start_at_zero() {
        let p = iv(-1.0, 2.0).powi(2);
        assert_eq!(p.lo(), 0.0);
        assert!(p.contains(4.0) && p.hi() < 4.0 + 1e-12);
        let q = iv(-3.0, -2.0).powi(3);
        assert!(q.contains(-27.0) && q.contains(-8.0));
    }

    #[test]
    fn exact_results_are_not_widened() {
        // 0·x and sums/products representable in f64 stay exact, so −k·ω² over ω ∈ [−4, 4]
        // has the upper bound 0 itself (IEEE 754 round-to-nearest is exact on these)
        let k = iv(0.01, 0.5);
        let w = iv(-4.0, 4.0).powi(2);
        let v = k.mul(&w).neg();
        assert_eq!(v.hi(), 0.0);
        assert_eq!(iv(1.5, 2.0).add(&iv(0.25, 0.5)), iv(1.75, 2.5));
        assert_eq!(iv(3.0, 3.0).mul(&iv(0.5, 0.5)), iv(1.5, 1.5));
        assert_eq!(iv(3.0, 3.0).div(&iv(4.0, 4.0)), iv(0.75, 0.75));
        // inexact ones are: 0.1 + 0.2 and 1/3 straddle their exact values
        let s = iv(0.1, 0.1).add(&iv(0.2, 0.2));
        assert!(s.lo() < s.hi());
        let q = iv(1.0, 1.0).div(&iv(3.0, 3.0));
        assert!(q.lo() < q.hi() && q.contains(1.0 / 3.0));
    }

    #[test]
    fn exact_square_roots_are_not_widened() {
        // √0 = 0 and √(9/4) = 3/2 exactly (IEEE 754 sqrt is correctly rounded); √2 is not
        let at = |x: f64| Interval::call(Func::Sqrt, &[iv(x, x)]);
        assert_eq!(at(0.0), iv(0.0, 0.0));
        assert_eq!(at(2.25), iv(1.5, 1.5));
        let r2 = at(2.0);
        assert!(r2.lo() < r2.hi() && r2.contains(std::f64::consts::SQRT_2));
        assert_eq!(Interval::call(Func::Sqrt, &[iv(0.0, 4.0)]), iv(0.0, 2.0));
    }

    #[test]
    fn domains_clip_or_empty() {
        let s = Interval::call(Func::Sqrt, &[iv(-1.0, 4.0)]);
        assert_eq!(s.lo(), 0.0);
        assert!(s.contains(2.0));
        assert!(Interval::call(Func::Asin, &[iv(1.5, 2.0)]).is_empty());
        assert!(Interval::call(Func::Ln, &[iv(-2.0, -1.0)]).is_empty());
        assert_eq!(
            Interval::call(Func::Tan, &[iv(1.0, 2.0)]),
            Interval::entire()
        );
    }
}
