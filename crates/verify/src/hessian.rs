//! Negative (semi)definiteness of a symmetric interval matrix.
//!
//! A matrix "in" an interval matrix is any real symmetric matrix whose entries lie in the
//! intervals. Two sufficient tests, both sound for every such matrix:
//!
//! - **Minors** (n ≤ 4): Sylvester's criterion on interval determinants. Strict: the leading
//!   principal minors alternate in sign, `(−1)^k·M_k > 0`. Semidefinite: every principal minor
//!   satisfies `(−1)^|S|·M_S ≥ 0`. Interval determinants enclose the determinant of every
//!   matrix in the box, so the signs hold for each of them.
//! - **Scaled Gershgorin**: `D·H·D` with `D = diag(1/√|mid H_ii|)` has the same inertia as `H`
//!   (congruence), and every eigenvalue of it is at most `max_i (H'_ii + Σ_{j≠i} |H'_ij|)`.
//!
//! Each test returns the number it decided on (negative means strictly passed), so a
//! certificate can record it and a re-check can recompute it.

use crate::interval::Interval;
use lawsmith_expr::Arith;

/// Which test decided.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum Method {
    /// Sylvester's criterion on interval minors.
    Minors,
    /// Gershgorin's theorem after diagonal scaling.
    Gershgorin,
}

impl Method {
    /// Name used in certificates.
    pub fn name(self) -> &'static str {
        match self {
            Method::Minors => "minors",
            Method::Gershgorin => "gershgorin",
        }
    }

    /// Inverse of [`Method::name`].
    pub fn from_name(s: &str) -> Option<Method> {
        match s {
            "minors" => Some(Method::Minors),
            "gershgorin" => Some(Method::Gershgorin),
            _ => None,
        }
    }
}

/// Largest size for which minors are tried (4 has 15 principal minors; beyond, Gershgorin).
pub const MAX_MINORS_SIZE: usize = 4;

/// Runs one test on the `n×n` matrix `h` (row-major, symmetric). Returns the decisive value:
/// the matrix is proved negative definite when it is `< 0`, negative semidefinite when `≤ 0`
/// (for `strict = false`). NaN (an empty or undefined entry) never passes.
pub fn measure(method: Method, h: &[Interval], n: usize, strict: bool) -> f64 {
    if h.iter().any(|x| x.is_empty()) {
        return f64::NAN;
    }
    match method {
        Method::Minors => minors(h, n, strict),
        Method::Gershgorin => gershgorin(h, n),
    }
}

fn minors(h: &[Interval], n: usize, strict: bool) -> f64 {
    if n > MAX_MINORS_SIZE {
        return f64::NAN;
    }
    let mut worst = f64::NEG_INFINITY;
    let subsets: Vec<Vec<usize>> = if strict {
        (1..=n).map(|k| (0..k).collect()).collect()
    } else {
        (1..(1u32 << n))
            .map(|mask| (0..n).filter(|i| mask & (1 << i) != 0).collect())
            .collect()
    };
    for s in subsets {
        let m = det(h, n, &s);
        let signed = if s.len() % 2 == 1 { m.neg() } else { m };
        // (−1)^|S|·M_S must be positive (≥ 0): the value is minus its lower bound
        worst = worst.max(-signed.lo());
    }
    worst
}

/// Interval determinant of the principal submatrix on `rows` (cofactor expansion; n ≤ 4).
fn det(h: &[Interval], n: usize, rows: &[usize]) -> Interval {
    match rows.len() {
        1 => h[rows[0] * n + rows[0]],
        _ => {
            let mut acc = Interval::point(0.0);
            let r0 = rows[0];
            for (k, &c) in rows.iter().enumerate() {
                let minor_cols: Vec<usize> = rows.iter().copied().filter(|&x| x != c).collect();
                let sub = det_cols(h, n, &rows[1..], &minor_cols);
                let term = h[r0 * n + c].mul(&sub);
                acc = if k % 2 == 0 {
                    acc.add(&term)
                } else {
                    acc.add(&term.neg())
                };
            }
            acc
        }
    }
}

/// Interval determinant of the submatrix with the given rows and columns (same length).
fn det_cols(h: &[Interval], n: usize, rows: &[usize], cols: &[usize]) -> Interval {
    if rows.len() == 1 {
        return h[rows[0] * n + cols[0]];
    }
    let mut acc = Interval::point(0.0);
    for (k, &c) in cols.iter().enumerate() {
        let rest: Vec<usize> = cols.iter().copied().filter(|&x| x != c).collect();
        let term = h[rows[0] * n + c].mul(&det_cols(h, n, &rows[1..], &rest));
        acc = if k % 2 == 0 {
            acc.add(&term)
        } else {
            acc.add(&term.neg())
        };
    }
    acc
}

fn gershgorin(h: &[Interval], n: usize) -> f64 {
    // any positive scaling is valid; this one makes the diagonal about −1
    let d: Vec<Interval> = (0..n)
        .map(|i| {
            let m = h[i * n + i].mid();
            let s = if m < 0.0 && m.is_finite() {
                1.0 / (-m).sqrt()
            } else {
                1.0
            };
            Interval::point(if s.is_finite() && s > 0.0 { s } else { 1.0 })
        })
        .collect();
    let mut worst = f64::NEG_INFINITY;
    for i in 0..n {
        let mut row = d[i].mul(&h[i * n + i]).mul(&d[i]);
        for j in (0..n).filter(|&j| j != i) {
            let off = d[i].mul(&h[i * n + j]).mul(&d[j]);
            row = row.add(&Interval::point(off.mag()));
        }
        worst = worst.max(row.hi());
    }
    worst
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Tries the tests in order and returns the first that passes, with its value.
    fn negative(h: &[Interval], n: usize, strict: bool) -> Option<(Method, f64)> {
        let passes = |v: f64| if strict { v < 0.0 } else { v <= 0.0 };
        let mut methods = vec![Method::Gershgorin];
        if n <= MAX_MINORS_SIZE {
            methods.insert(0, Method::Minors);
        }
        methods
            .into_iter()
            .map(|m| (m, measure(m, h, n, strict)))
            .find(|&(_, v)| passes(v))
    }

    fn m(entries: &[(f64, f64)]) -> Vec<Interval> {
        entries.iter().map(|&(a, b)| Interval::new(a, b)).collect()
    }

    #[test]
    fn a_negative_definite_box_passes_and_an_indefinite_one_fails() {
        // every matrix [[−2±0.1, 1±0.1], [1±0.1, −2±0.1]] has eigenvalues near −1 and −3
        let h = m(&[(-2.1, -1.9), (0.9, 1.1), (0.9, 1.1), (-2.1, -1.9)]);
        assert!(negative(&h, 2, true).is_some());
        // [[−1, 2], [2, −1]] has eigenvalue +1
        let h = m(&[(-1.0, -1.0), (2.0, 2.0), (2.0, 2.0), (-1.0, -1.0)]);
        assert!(negative(&h, 2, true).is_none());
        assert!(negative(&h, 2, false).is_none());
    }

    #[test]
    fn semidefinite_needs_every_principal_minor() {
        // diag(0, −2k): semidefinite, not definite (the damping-injection Hessian)
        let h = m(&[(0.0, 0.0), (0.0, 0.0), (0.0, 0.0), (-1.0, -0.02)]);
        assert!(negative(&h, 2, true).is_none());
        assert!(negative(&h, 2, false).is_some());
        // leading minors of [[0, 0], [0, 1]] are 0 and 0, but the second diagonal entry is
        // positive: only the full set of principal minors catches it
        let h = m(&[(0.0, 0.0), (0.0, 0.0), (0.0, 0.0), (1.0, 1.0)]);
        assert!(negative(&h, 2, false).is_none());
    }

    #[test]
    fn scaling_lets_gershgorin_see_badly_scaled_definite_matrices() {
        // diag(−1, −10, −100, −1000, −10000) with H01 = H10 = √10/2 ≈ 1.58: definite (the
        // leading 2×2 has det 10 − 2.5 > 0) but row 0 is not diagonally dominant until scaled
        // (then the off-diagonal is 0.5); a 5×5 needs Gershgorin since minors stop at 4
        let mut h = vec![Interval::point(0.0); 25];
        for i in 0..5 {
            h[i * 5 + i] = Interval::point(-(10f64.powi(i as i32)));
        }
        h[1] = Interval::point(0.5 * 10f64.sqrt());
        h[5] = h[1];
        let (method, v) = negative(&h, 5, true).expect("definite");
        assert_eq!(method, Method::Gershgorin);
        assert!(v < 0.0);
    }
}
