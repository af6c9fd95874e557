//! Sparse multivariate polynomials with exact rational coefficients, exact division and
//! greatest common divisors (primitive pseudo-remainder sequences, recursive in the variables).
//!
//! Variables are small integers handed out by the simplifier (one per atom). Monomials are kept
//! in a `BTreeMap` under the lexicographic order with variable 0 most significant, so the
//! leading term is the last entry.

use num_rational::BigRational;
use num_traits::{One, Signed, Zero};
use std::cmp::Ordering;
use std::collections::BTreeMap;

pub(crate) type Var = u32;

/// A monomial: sorted `(variable, exponent)` pairs with positive exponents.
#[derive(Clone, PartialEq, Eq, Hash, Debug, Default)]
pub(crate) struct Mono(pub(crate) Vec<(Var, u32)>);

/// Lexicographic comparison of two sparse exponent vectors, given an order on the variables.
pub(crate) fn lex_cmp<K: Ord>(a: &[(K, u32)], b: &[(K, u32)]) -> Ordering {
    let (mut i, mut j) = (0, 0);
    loop {
        match (a.get(i), b.get(j)) {
            (None, None) => return Ordering::Equal,
            (Some(_), None) => return Ordering::Greater,
            (None, Some(_)) => return Ordering::Less,
            (Some((va, ea)), Some((vb, eb))) => match va.cmp(vb) {
                Ordering::Equal => {
                    if ea != eb {
                        return ea.cmp(eb);
                    }
                    i += 1;
                    j += 1;
                }
                // `a` has a more significant variable that `b` lacks
                Ordering::Less => return Ordering::Greater,
                Ordering::Greater => return Ordering::Less,
            },
        }
    }
}

impl Ord for Mono {
    fn cmp(&self, other: &Self) -> Ordering {
        lex_cmp(&self.0, &other.0)
    }
}

impl PartialOrd for Mono {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

impl Mono {
    pub(crate) fn one() -> Mono {
        Mono(Vec::new())
    }

    pub(crate) fn var(v: Var, e: u32) -> Mono {
        if e == 0 {
            Mono::one()
        } else {
            Mono(vec![(v, e)])
        }
    }

    pub(crate) fn is_one(&self) -> bool {
        self.0.is_empty()
    }

    pub(crate) fn degree(&self) -> u32 {
        self.0.iter().map(|&(_, e)| e).sum()
    }

    pub(crate) fn degree_in(&self, v: Var) -> u32 {
        self.0.iter().find(|&&(w, _)| w == v).map_or(0, |&(_, e)| e)
    }

    pub(crate) fn mul(&self, other: &Mono) -> Mono {
        let mut out = Vec::with_capacity(self.0.len() + other.0.len());
        let (mut i, mut j) = (0, 0);
        while i < self.0.len() || j < other.0.len() {
            match (self.0.get(i), other.0.get(j)) {
                (Some(&(va, ea)), Some(&(vb, eb))) if va == vb => {
                    out.push((va, ea + eb));
                    i += 1;
                    j += 1;
                }
                (Some(&(va, ea)), Some(&(vb, _))) if va < vb => {
                    out.push((va, ea));
                    i += 1;
                }
                (Some(&(va, ea)), None) => {
                    out.push((va, ea));
                    i += 1;
                }
                (_, Some(&(vb, eb))) => {
                    out.push((vb, eb));
                    j += 1;
                }
                (None, None) => unreachable!(),
            }
        }
        Mono(out)
    }

    /// `self / other` when `other` divides `self`.
    pub(crate) fn div(&self, other: &Mono) -> Option<Mono> {
        let mut out = Vec::with_capacity(self.0.len());
        let mut j = 0;
        for &(v, e) in &self.0 {
            let d = match other.0.get(j) {
                Some(&(w, f)) if w == v => {
                    j += 1;
                    f
                }
                Some(&(w, _)) if w < v => return None,
                _ => 0,
            };
            if d > e {
                return None;
            }
            if e > d {
                out.push((v, e - d));
            }
        }
        if j < other.0.len() {
            return None;
        }
        Some(Mono(out))
    }

    /// Componentwise minimum of exponents.
    pub(crate) fn gcd(&self, other: &Mono) -> Mono {
        let mut out = Vec::new();
        let mut j = 0;
        for &(v, e) in &self.0 {
            while j < other.0.len() && other.0[j].0 < v {
                j += 1;
            }
            if let Some(&(w, f)) = other.0.get(j) {
                if w == v {
                    out.push((v, e.min(f)));
                }
            }
        }
        Mono(out)
    }

    /// The monomial with variable `v` removed.
    pub(crate) fn without(&self, v: Var) -> Mono {
        Mono(self.0.iter().copied().filter(|&(w, _)| w != v).collect())
    }
}

/// A polynomial: monomial → non-zero rational coefficient.
#[derive(Clone, PartialEq, Eq, Debug, Default)]
pub(crate) struct Poly(pub(crate) BTreeMap<Mono, BigRational>);

impl Poly {
    pub(crate) fn zero() -> Poly {
        Poly(BTreeMap::new())
    }

    pub(crate) fn constant(c: BigRational) -> Poly {
        let mut p = Poly::zero();
        p.add_term(Mono::one(), c);
        p
    }

    pub(crate) fn one() -> Poly {
        Poly::constant(BigRational::one())
    }

    pub(crate) fn term(m: Mono, c: BigRational) -> Poly {
        let mut p = Poly::zero();
        p.add_term(m, c);
        p
    }

    pub(crate) fn var(v: Var) -> Poly {
        Poly::term(Mono::var(v, 1), BigRational::one())
    }

    pub(crate) fn is_zero(&self) -> bool {
        self.0.is_empty()
    }

    /// The constant value, if the polynomial has no variable.
    pub(crate) fn as_constant(&self) -> Option<BigRational> {
        match self.0.len() {
            0 => Some(BigRational::zero()),
            1 => {
                let (m, c) = self.0.iter().next().expect("one term");
                m.is_one().then(|| c.clone())
            }
            _ => None,
        }
    }

    pub(crate) fn is_one(&self) -> bool {
        self.as_constant().is_some_and(|c| c.is_one())
    }

    pub(crate) fn add_term(&mut self, m: Mono, c: BigRational) {
        if c.is_zero() {
            return;
        }
        match self.0.entry(m) {
            std::collections::btree_map::Entry::Vacant(v) => {
                v.insert(c);
            }
            std::collections::btree_map::Entry::Occupied(mut o) => {
                *o.get_mut() += c;
                if o.get().is_zero() {
                    o.remove();
                }
            }
        }
    }

    pub(crate) fn add(&self, other: &Poly) -> Poly {
        let mut out = self.clone();
        for (m, c) in &other.0 {
            out.add_term(m.clone(), c.clone());
        }
        out
    }

    pub(crate) fn neg(&self) -> Poly {
        Poly(self.0.iter().map(|(m, c)| (m.clone(), -c)).collect())
    }

    pub(crate) fn sub(&self, other: &Poly) -> Poly {
        self.add(&other.neg())
    }

    pub(crate) fn scale(&self, k: &BigRational) -> Poly {
        if k.is_zero() {
            return Poly::zero();
        }
        Poly(self.0.iter().map(|(m, c)| (m.clone(), c * k)).collect())
    }

    pub(crate) fn mul_term(&self, m: &Mono, k: &BigRational) -> Poly {
        if k.is_zero() {
            return Poly::zero();
        }
        Poly(self.0.iter().map(|(n, c)| (n.mul(m), c * k)).collect())
    }

    pub(crate) fn mul(&self, other: &Poly) -> Poly {
        let mut out = Poly::zero();
        for (m, c) in &self.0 {
            for (n, d) in &other.0 {
                out.add_term(m.mul(n), c * d);
            }
        }
        out
    }

    /// Leading term under the lexicographic variable-index order.
    pub(crate) fn lead(&self) -> Option<(&Mono, &BigRational)> {
        self.0.iter().next_back()
    }

    /// Exact quotient `self / d`, or `None` when `d` does not divide `self`.
    pub(crate) fn div_exact(&self, d: &Poly) -> Option<Poly> {
        let (dm, dc) = d.lead()?;
        if let Some(c) = d.as_constant() {
            return Some(self.scale(&(BigRational::one() / c)));
        }
        let mut r = self.clone();
        let mut q = Poly::zero();
        while let Some((rm, rc)) = r.lead() {
            let m = rm.div(dm)?;
            let c = rc / dc;
            r = r.sub(&d.mul_term(&m, &c));
            q.add_term(m, c);
        }
        Some(q)
    }

    /// The smallest variable index that occurs, if any.
    fn first_var(&self) -> Option<Var> {
        self.0
            .keys()
            .filter_map(|m| m.0.first().map(|&(v, _)| v))
            .min()
    }

    pub(crate) fn degree_in(&self, v: Var) -> u32 {
        self.0.keys().map(|m| m.degree_in(v)).max().unwrap_or(0)
    }

    /// Coefficients of the powers of `v` (each free of `v`).
    fn coeffs_in(&self, v: Var) -> BTreeMap<u32, Poly> {
        let mut out: BTreeMap<u32, Poly> = BTreeMap::new();
        for (m, c) in &self.0 {
            out.entry(m.degree_in(v))
                .or_default()
                .add_term(m.without(v), c.clone());
        }
        out
    }

    fn coeff_in(&self, v: Var, k: u32) -> Poly {
        let mut out = Poly::zero();
        for (m, c) in &self.0 {
            if m.degree_in(v) == k {
                out.add_term(m.without(v), c.clone());
            }
        }
        out
    }

    /// The single term, if the polynomial has exactly one.
    fn single_term(&self) -> Option<(&Mono, &BigRational)> {
        if self.0.len() == 1 {
            self.0.iter().next()
        } else {
            None
        }
    }

    /// Scales so that the leading coefficient (variable-index order) is 1.
    fn monic(&self) -> Poly {
        match self.lead() {
            Some((_, c)) => self.scale(&(BigRational::one() / c)),
            None => Poly::zero(),
        }
    }

    /// Makes every coefficient an integer with no common factor and a positive leading
    /// coefficient. Keeps pseudo-remainder sequences from growing fractions.
    fn primitive_over_z(&self) -> Poly {
        use num_integer::Integer;
        let mut den = num_bigint::BigInt::one();
        for c in self.0.values() {
            den = den.lcm(c.denom());
        }
        let mut g = num_bigint::BigInt::zero();
        for c in self.0.values() {
            let n = (c * BigRational::from_integer(den.clone())).to_integer();
            g = g.gcd(&n);
        }
        if g.is_zero() {
            return self.clone();
        }
        let mut k = BigRational::new(den, g);
        if self.lead().is_some_and(|(_, c)| c.is_negative()) {
            k = -k;
        }
        self.scale(&k)
    }
}

/// Work allowance for one gcd, counted in coefficient operations weighted by the size of the
/// coefficients in 64-bit words. Pseudo-remainder sequences can blow up on large dense inputs,
/// in the number of terms and in the length of the coefficients alike; when the allowance runs
/// out the gcd gives up and the caller simply does not cancel (still exact, only less reduced).
/// Two hundred thousand word operations is a few milliseconds: far more than any law needs,
/// small enough to never hang.
pub(crate) const GCD_BUDGET: u64 = 200_000;

/// Size of a polynomial's coefficients in 64-bit words (numerators and denominators).
fn words(p: &Poly) -> usize {
    p.0.values()
        .map(|c| (c.numer().bits() + c.denom().bits()) as usize / 64 + 1)
        .sum()
}

/// Greatest common divisor, normalised to leading coefficient 1 (variable-index order), or
/// `None` when the work allowance ran out.
#[cfg(test)]
pub(crate) fn gcd(a: &Poly, b: &Poly) -> Option<Poly> {
    let mut budget = GCD_BUDGET;
    gcd_in(a, b, &mut budget)
}

/// [`gcd`] spending from `budget` (what is left of it on return), `None` when it ran out.
pub(crate) fn gcd_within(a: &Poly, b: &Poly, budget: &mut u64) -> Option<Poly> {
    gcd_in(a, b, budget)
}

fn spend(budget: &mut u64, work: usize) -> Option<()> {
    *budget = budget.checked_sub(work as u64 + 1)?;
    Some(())
}

fn gcd_in(a: &Poly, b: &Poly, budget: &mut u64) -> Option<Poly> {
    spend(budget, a.0.len() + b.0.len())?;
    if a.is_zero() {
        return Some(b.monic());
    }
    if b.is_zero() {
        return Some(a.monic());
    }
    if a.as_constant().is_some() || b.as_constant().is_some() {
        return Some(Poly::one());
    }
    if let Some((m, _)) = a.single_term() {
        return Some(mono_gcd_with(m, b));
    }
    if let Some((m, _)) = b.single_term() {
        return Some(mono_gcd_with(m, a));
    }
    if a == b {
        return Some(a.monic());
    }
    let x = match (a.first_var(), b.first_var()) {
        (Some(p), Some(q)) => p.min(q),
        _ => return Some(Poly::one()),
    };
    let (da, db) = (a.degree_in(x), b.degree_in(x));
    if da == 0 {
        return gcd_in(a, &content_in(b, x, budget)?, budget);
    }
    if db == 0 {
        return gcd_in(&content_in(a, x, budget)?, b, budget);
    }
    let ca = content_in(a, x, budget)?;
    let cb = content_in(b, x, budget)?;
    let c = gcd_in(&ca, &cb, budget)?;
    let pa = a.div_exact(&ca).expect("content divides");
    let pb = b.div_exact(&cb).expect("content divides");
    let (mut f, mut g) = if da >= db { (pa, pb) } else { (pb, pa) };
    loop {
        let r = prem(&f, &g, x, budget)?;
        if r.is_zero() {
            break;
        }
        if r.degree_in(x) == 0 {
            g = Poly::one();
            break;
        }
        f = g;
        g = primitive_in(&r, x, budget)?;
    }
    Some(c.mul(&primitive_in(&g, x, budget)?).monic())
}

fn mono_gcd_with(m: &Mono, p: &Poly) -> Poly {
    let mut g = m.clone();
    for n in p.0.keys() {
        g = g.gcd(n);
        if g.is_one() {
            break;
        }
    }
    Poly::term(g, BigRational::one())
}

/// The gcd of the coefficients of `p` seen as a polynomial in `x`.
fn content_in(p: &Poly, x: Var, budget: &mut u64) -> Option<Poly> {
    let mut g = Poly::zero();
    for c in p.coeffs_in(x).into_values() {
        g = gcd_in(&g, &c, budget)?;
        if g.is_one() {
            break;
        }
    }
    Some(g)
}

fn primitive_in(p: &Poly, x: Var, budget: &mut u64) -> Option<Poly> {
    let c = content_in(p, x, budget)?;
    Some(p.div_exact(&c).expect("content divides").primitive_over_z())
}

/// Pseudo-remainder of `f` by `g` in `x`.
fn prem(f: &Poly, g: &Poly, x: Var, budget: &mut u64) -> Option<Poly> {
    let n = g.degree_in(x);
    let lc_g = g.coeff_in(x, n);
    let lc_const = lc_g.as_constant();
    let mut r = f.clone();
    while !r.is_zero() {
        let m = r.degree_in(x);
        if m < n {
            break;
        }
        let lc_r = r.coeff_in(x, m);
        spend(
            budget,
            (words(&lc_r) + words(&lc_g)) * (words(&r) + words(g)),
        )?;
        let shift = Mono::var(x, m - n);
        r = match &lc_const {
            Some(c) => {
                let q = lc_r.scale(&(BigRational::one() / c));
                r.sub(&mul_shift(&q, &shift).mul(g))
            }
            None => lc_g.mul(&r).sub(&mul_shift(&lc_r, &shift).mul(g)),
        };
        r = r.primitive_over_z();
    }
    Some(r)
}

fn mul_shift(p: &Poly, m: &Mono) -> Poly {
    p.mul_term(m, &BigRational::one())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn q(n: i64) -> BigRational {
        BigRational::from_integer(n.into())
    }

    // x = 0, y = 1, z = 2
    fn p(terms: &[(i64, &[(Var, u32)])]) -> Poly {
        let mut out = Poly::zero();
        for (c, m) in terms {
            out.add_term(Mono(m.to_vec()), q(*c));
        }
        out
    }

    #[test]
    fn gcd_of_products_recovers_the_common_factor() {
        // (x + y)(x - z) and (x + y)(y + 2): gcd x + y
        let a = p(&[(1, &[(0, 1)]), (1, &[(1, 1)])]);
        let b = p(&[(1, &[(0, 1)]), (-1, &[(2, 1)])]);
        let c = p(&[(1, &[(1, 1)]), (2, &[])]);
        let g = gcd(&a.mul(&b), &a.mul(&c)).unwrap();
        assert_eq!(g, a.monic());
        let g2 = gcd(&a.mul(&a).mul(&b), &a.mul(&b).mul(&c)).unwrap();
        assert_eq!(g2, a.mul(&b).monic());
        assert!(gcd(&b, &c).unwrap().is_one());
    }

    #[test]
    fn exact_division_detects_remainders() {
        let a = p(&[(1, &[(0, 2)]), (-1, &[(1, 2)])]); // x² − y²
        let b = p(&[(1, &[(0, 1)]), (-1, &[(1, 1)])]); // x − y
        let quotient = a.div_exact(&b).unwrap();
        assert_eq!(quotient, p(&[(1, &[(0, 1)]), (1, &[(1, 1)])]));
        let c = p(&[(1, &[(0, 1)]), (2, &[(1, 1)])]);
        assert_eq!(a.div_exact(&c), None);
    }
}
