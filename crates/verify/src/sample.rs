//! The sampling falsifier: many cheap f64 evaluations to find a counterexample before (or
//! instead of) a proof, and to measure the worst margin.
//!
//! Points: a low-discrepancy sequence over the goal's box (Roberts' R_d, deterministic), every
//! corner of the box (up to 2¹² of them), and, for Lyapunov goals, points close to zero error
//! (the error part of sequence points shrunk by 10⁻¹ … 10⁻⁶) and points on the coordinate planes
//! of the error (some errors set exactly to zero: a semidefinite `V̇` vanishes there).
//! A suspected failure is confirmed with point intervals before it is reported.

use crate::goal::Test;
use crate::goal::{Compiled, Scratch};
use crate::interval::Interval;
use crate::search::{bracket_zero, confirm, Counter};
use rayon::prelude::*;

/// Largest number of dimensions whose corners are all tried.
const MAX_CORNER_DIMS: usize = 12;

/// Points near zero error per shrink factor.
const NEAR_ZERO_POINTS: usize = 512;

/// φ_d, the unique positive root of `x^(d+1) = x + 1` (Newton's method from 2; φ₁ is the
/// golden ratio, φ₂ the plastic number).
pub fn generalized_golden_ratio(d: usize) -> f64 {
    let mut x: f64 = 2.0;
    for _ in 0..100 {
        let f = x.powi(d as i32 + 1) - x - 1.0;
        let df = (d as f64 + 1.0) * x.powi(d as i32) - 1.0;
        let next = x - f / df;
        if next == x {
            break;
        }
        x = next;
    }
    x
}

/// A low-discrepancy sequence over a box: Roberts' additive recurrence R_d, whose point `n`
/// has coordinates `frac(0.5 + n·α_k)` with `α_k = φ_d^−(k+1)`. Held in 64-bit fixed point,
/// a coordinate costs one exact wrapping multiplication, any point can be had directly, and
/// the uniformity does not degrade with the dimension as Halton's large bases do.
#[derive(Clone, Debug)]
pub struct Sequence {
    alpha: Vec<u64>,
}

impl Sequence {
    /// The sequence for `d` coordinates.
    pub fn new(d: usize) -> Sequence {
        let phi = generalized_golden_ratio(d.max(1));
        let alpha = (0..d)
            .map(|k| {
                let a = phi.powi(-(k as i32 + 1)).fract();
                // as a fraction of 2^64 (53 significant bits; the rest zero)
                (a * 18_446_744_073_709_551_616.0) as u64
            })
            .collect();
        Sequence { alpha }
    }

    /// `frac(0.5 + n·α)` in [0, 1) for the fixed-point `α`: the 0.5 offset of Roberts'
    /// construction, then the top 53 bits as a fraction.
    #[inline]
    fn unit(alpha: u64, n: u64) -> f64 {
        // below 2^53, so the signed conversion (one instruction on x86) is exact
        ((alpha.wrapping_mul(n).wrapping_add(1 << 63) >> 11) as i64) as f64
            * (1.0 / (1u64 << 53) as f64)
    }

    /// Point `n` (n ≥ 1 for the usual sequence) mapped into `bx`, written to `out`.
    pub fn point_into(&self, n: u64, bx: &[Interval], out: &mut [f64]) {
        for ((&a, x), o) in self.alpha.iter().zip(bx).zip(out) {
            *o = x.lo() + Sequence::unit(a, n) * (x.hi() - x.lo());
        }
    }

    /// Point `n` mapped into `bx`.
    pub fn point(&self, n: u64, bx: &[Interval]) -> Vec<f64> {
        let mut out = vec![0.0; bx.len()];
        self.point_into(n, bx, &mut out);
        out
    }
}

/// What sampling found.
#[derive(Clone, Debug)]
pub struct Sampled {
    /// The worst confirmed counterexample (largest violation), if any.
    pub counter: Option<Counter>,
    /// Smallest normalised margin seen: for a Lyapunov goal `−f/‖ê‖²` with each error scaled
    /// by the largest magnitude of its range; otherwise the slack of the test.
    pub min_margin: f64,
    /// Where it was seen.
    pub min_point: Vec<f64>,
    /// Points evaluated (after the constraint filter).
    pub evaluated: usize,
}

/// The points the falsifier tries, in a fixed order, each made on demand from its index (so
/// workers generate their own and nothing large is held): `samples` points of the sequence,
/// every other one on a coordinate plane of the error; every corner of the box (up to
/// 2¹² of them); and, for a Lyapunov goal, points of the sequence with their error shrunk
/// towards zero by 10⁻¹ … 10⁻⁶.
pub struct PointSet<'a> {
    root: &'a [Interval],
    errors: &'a [usize],
    seq: Sequence,
    samples: usize,
    corners: usize,
    near: usize,
    proper_masks: u64,
}

/// Shrink factors of the error for the points near zero error.
const SHRINKS: [f64; 6] = [1e-1, 1e-2, 1e-3, 1e-4, 1e-5, 1e-6];

impl<'a> PointSet<'a> {
    /// The points for a goal over `root`.
    pub fn new(goal: &'a Compiled, root: &'a [Interval], samples: usize) -> PointSet<'a> {
        let d = root.len();
        let errors = &goal.errors[..];
        let origin = goal.goal.origin;
        PointSet {
            root,
            errors,
            seq: Sequence::new(d),
            // a constant needs one evaluation
            samples: if d == 0 { 1 } else { samples },
            corners: if d > 0 && d <= MAX_CORNER_DIMS {
                1 << d
            } else {
                0
            },
            near: if origin && d > 0 {
                NEAR_ZERO_POINTS.min(samples)
            } else {
                0
            },
            proper_masks: if origin && errors.len() >= 2 {
                (1u64 << errors.len().min(16)) - 2
            } else {
                0
            },
        }
    }

    /// Number of points.
    pub fn len(&self) -> usize {
        self.samples + self.corners + self.near * SHRINKS.len()
    }

    /// Writes points `start .. start + n` column by column: coordinate `k` of point `j` goes
    /// to `cols[k * n + j]`.
    pub fn columns_into(&self, start: usize, n: usize, cols: &mut [f64], row: &mut [f64]) {
        let d = self.root.len();
        if start + n <= self.samples {
            // the common case: plain sequence points, generated coordinate-major
            for (k, x) in self.root.iter().enumerate() {
                let a = self.seq.alpha[k];
                let (lo, w) = (x.lo(), x.hi() - x.lo());
                // n·α advanced by one α per point: the same bits as the product
                let mut acc = a.wrapping_mul(start as u64 + 1);
                for c in cols[k * n..(k + 1) * n].iter_mut() {
                    let u = ((acc.wrapping_add(1 << 63) >> 11) as i64) as f64
                        * (1.0 / (1u64 << 53) as f64);
                    *c = lo + u * w;
                    acc = acc.wrapping_add(a);
                }
            }
            if self.proper_masks > 0 {
                // the mask of an even index i is 1 + (i/2) mod masks, counted up here rather
                // than divided for each point
                let first = start as u64 + 1;
                let first_even = first + first % 2;
                let mut m = (first_even / 2) % self.proper_masks;
                let mut j = (first_even - first) as usize;
                while j < n {
                    let mask = 1 + m;
                    for (bit, &k) in self.errors.iter().enumerate().take(16) {
                        if mask & (1 << bit) != 0 && self.root[k].contains(0.0) {
                            cols[k * n + j] = 0.0;
                        }
                    }
                    m = if m + 1 == self.proper_masks { 0 } else { m + 1 };
                    j += 2;
                }
            }
            return;
        }
        for j in 0..n {
            self.point_into(start + j, row);
            for k in 0..d {
                cols[k * n + j] = row[k];
            }
        }
    }

    /// Writes point `idx` (< `len()`) to `out` (`root.len()` values).
    pub fn point_into(&self, idx: usize, out: &mut [f64]) {
        let root = self.root;
        if idx < self.samples {
            let i = idx as u64 + 1;
            self.seq.point_into(i, root, out);
            // every other point lies on a coordinate plane of the error
            if self.proper_masks > 0 && i.is_multiple_of(2) {
                let mask = 1 + (i / 2) % self.proper_masks;
                for (bit, &k) in self.errors.iter().enumerate().take(16) {
                    if mask & (1 << bit) != 0 && root[k].contains(0.0) {
                        out[k] = 0.0;
                    }
                }
            }
            return;
        }
        let idx = idx - self.samples;
        if idx < self.corners {
            for (k, (o, x)) in out.iter_mut().zip(root).enumerate() {
                *o = if idx & (1 << k) != 0 { x.hi() } else { x.lo() };
            }
            return;
        }
        let idx = idx - self.corners;
        let (shrink, m) = (SHRINKS[idx / self.near], (idx % self.near) as u64);
        self.seq.point_into(100_004 + m, root, out);
        for &k in self.errors {
            // shrink towards zero error, staying inside the box
            let z = 0.0f64.clamp(root[k].lo(), root[k].hi());
            out[k] = z + (out[k] - z) * shrink;
        }
    }
}

/// Per-worker buffers of the falsifier.
struct Batch {
    cols: Vec<f64>,
    row: Vec<f64>,
    norm: Vec<f64>,
    values: Vec<f64>,
    feasible: Vec<bool>,
}

impl Sampled {
    fn empty() -> Sampled {
        Sampled {
            counter: None,
            min_margin: f64::INFINITY,
            min_point: Vec::new(),
            evaluated: 0,
        }
    }

    /// Keeps the smaller margin and the larger violation of the two.
    fn merge(&mut self, o: Sampled, test: &Test) {
        self.evaluated += o.evaluated;
        if o.min_margin < self.min_margin || self.min_point.is_empty() && !o.min_point.is_empty() {
            self.min_margin = o.min_margin;
            self.min_point = o.min_point;
        }
        if let Some(c) = o.counter {
            self.offer(c, test);
        }
    }

    fn offer(&mut self, c: Counter, test: &Test) {
        let worse = self
            .counter
            .as_ref()
            .is_none_or(|o| test.slack(c.value) < test.slack(o.value));
        if worse {
            self.counter = Some(c);
        }
    }
}

/// Samples a goal over `root`.
pub fn falsify(goal: &Compiled, root: &[Interval], samples: usize) -> Sampled {
    let d = root.len();
    let set = PointSet::new(goal, root, samples);
    let scale: Vec<f64> = root
        .iter()
        .map(|x| if x.mag() > 0.0 { x.mag() } else { 1.0 })
        .collect();
    let test = goal.goal.test;
    if test == Test::NonZero {
        if let Some(c) = sign_change(goal, &set) {
            let mut r = Sampled::empty();
            r.counter = Some(c);
            r.min_margin = 0.0;
            r.evaluated = set.len();
            return r;
        }
    }
    // points per batched evaluation: 128 measured fastest (the tape's slots stay in L2)
    const LANES: usize = 128;
    const CHUNK: usize = 16 * LANES;
    let inv_scale: Vec<f64> = scale.iter().map(|x| 1.0 / x).collect();
    let chunks = set.len().div_ceil(CHUNK);
    let parts: Vec<Sampled> = (0..chunks)
        .into_par_iter()
        .map_init(
            || {
                let b = Batch {
                    cols: vec![0.0; LANES * d],
                    row: vec![0.0; d],
                    norm: vec![0.0; LANES],
                    values: Vec::new(),
                    feasible: Vec::new(),
                };
                (Scratch::default(), b)
            },
            |(s, b), c| {
                let mut r = Sampled::empty();
                let end = ((c + 1) * CHUNK).min(set.len());
                let mut start = c * CHUNK;
                while start < end {
                    let n = LANES.min(end - start);
                    set.columns_into(start, n, &mut b.cols, &mut b.row);
                    goal.values_columns(&b.cols[..n * d], n, s, &mut b.values, &mut b.feasible);
                    // squared scaled error norms, lane by lane
                    b.norm[..n].fill(0.0);
                    for &k in &goal.errors {
                        for (q, x) in b.norm[..n].iter_mut().zip(&b.cols[k * n..(k + 1) * n]) {
                            let e = x * inv_scale[k];
                            *q += e * e;
                        }
                    }
                    for j in 0..n {
                        let v = b.values[j];
                        if !b.feasible[j] {
                            continue;
                        }
                        let slack = test.slack(v);
                        if goal.goal.origin {
                            if b.norm[j] == 0.0 {
                                continue;
                            }
                            // margin = slack / norm, compared without dividing
                            if slack < r.min_margin * b.norm[j] || r.min_point.is_empty() {
                                r.min_margin = slack / b.norm[j];
                                r.min_point = (0..d).map(|k| b.cols[k * n + j]).collect();
                            }
                        } else if slack < r.min_margin || r.min_point.is_empty() {
                            r.min_margin = slack;
                            r.min_point = (0..d).map(|k| b.cols[k * n + j]).collect();
                        }
                        r.evaluated += 1;
                        if test.suspects(v) {
                            for (k, x) in b.row.iter_mut().enumerate() {
                                *x = b.cols[k * n + j];
                            }
                            if let Some(cx) = confirm(goal, &b.row, s) {
                                r.offer(cx, &test);
                            }
                        }
                    }
                    start += n;
                }
                r
            },
        )
        .collect();
    let mut total = Sampled::empty();
    for p in parts {
        total.merge(p, &test);
    }
    total
}

/// A sign change among the points of a `≠ 0` goal, located by bisection.
fn sign_change(goal: &Compiled, set: &PointSet) -> Option<Counter> {
    let mut s = Scratch::default();
    let mut p = vec![0.0; set.root.len()];
    let (mut pos, mut neg): (Option<Vec<f64>>, Option<Vec<f64>>) = (None, None);
    for idx in 0..set.len() {
        set.point_into(idx, &mut p);
        if goal.at_origin(&p) || !goal.feasible_f64(&p, &mut s) {
            continue;
        }
        let v = goal.value(&p, &mut s);
        if v > 0.0 && pos.is_none() {
            pos = Some(p.clone());
        } else if v < 0.0 && neg.is_none() {
            neg = Some(p.clone());
        }
        if let (Some(a), Some(b)) = (&pos, &neg) {
            if let Some(c) = bracket_zero(goal, a, b, &mut s) {
                return Some(c);
            }
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn columns_and_single_points_agree() {
        use crate::goal::Goal;
        use crate::problem::Problem;
        let spec = lawsmith_spec::load(include_str!("../../../specs/energy_pitch.yaml")).unwrap();
        let mut problem = Problem::new(&spec);
        let dh = problem.dag.sym("Δh");
        let dv = problem.dag.sym("Δva");
        let e = problem.dag.mul(vec![dh, dv]);
        let goal = Goal {
            label: "t".into(),
            expr: e,
            test: Test::Negative { strict: true },
            origin: true,
            exempt: None,
            region: None,
        };
        let c = Compiled::new(&mut problem, goal).unwrap();
        let root: Vec<Interval> = c
            .dims
            .iter()
            .map(|&i| {
                let v = &problem.variables[i];
                Interval::new(v.lo, v.hi)
            })
            .collect();
        let set = PointSet::new(&c, &root, 300);
        let d = root.len();
        let (mut row, mut one) = (vec![0.0; d], vec![0.0; d]);
        for (start, n) in [(0, 64), (1, 63), (7, 64), (250, 50), (290, 64)] {
            let n = n.min(set.len() - start);
            let mut cols = vec![0.0; n * d];
            set.columns_into(start, n, &mut cols, &mut row);
            for j in 0..n {
                set.point_into(start + j, &mut one);
                for k in 0..d {
                    assert_eq!(
                        cols[k * n + j].to_bits(),
                        one[k].to_bits(),
                        "point {}",
                        start + j
                    );
                }
            }
        }
    }

    #[test]
    fn generalized_golden_ratios_are_the_known_constants() {
        // φ₁ = (1 + √5)/2 and φ₂ = the plastic number 1.324717957244746 (Roberts' R_d
        // construction; both constants from memory)
        assert!((generalized_golden_ratio(1) - (1.0 + 5f64.sqrt()) / 2.0).abs() < 1e-15);
        assert!((generalized_golden_ratio(2) - 1.324_717_957_244_746).abs() < 1e-14);
        let p = generalized_golden_ratio(7);
        assert!((p.powi(8) - p - 1.0).abs() < 1e-13);
    }

    #[test]
    fn the_sequence_fills_a_square_evenly() {
        // 10,000 points in a 20×20 grid: every cell gets 25 ± 4 (uniform random points would
        // stray by ±15 at 3σ), the mark of a low-discrepancy sequence
        let bx = [Interval::new(0.0, 1.0), Interval::new(0.0, 1.0)];
        let seq = Sequence::new(2);
        let mut cells = [0u32; 400];
        for n in 1..=10_000 {
            let p = seq.point(n, &bx);
            assert!(p.iter().all(|x| (0.0..1.0).contains(x)));
            cells[(p[0] * 20.0) as usize * 20 + (p[1] * 20.0) as usize] += 1;
        }
        let (lo, hi) = (cells.iter().min().unwrap(), cells.iter().max().unwrap());
        assert!(*lo >= 21 && *hi <= 29, "cells between {lo} and {hi}");
    }
}
