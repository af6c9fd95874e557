//! Ultimate bounds: what the proof still guarantees when the plant's true values differ from
//! the estimates the law uses.
//!
//! An estimate error enters V̇ as a bounded disturbance, so V̇ < 0 no longer holds near zero
//! error. What can still be shown is that V decreases wherever V ≥ c: every trajectory that
//! starts inside the error box with V below the box's *region-of-attraction level* enters
//! the sublevel set {V ≤ c} and stays in it. This module finds the smallest such `c` and the
//! bound it implies on each error:
//!
//! 1. **Level 0 first.** If V̇ < 0 away from zero error holds anyway (no uncertainty, or one
//!    that does not matter), c = 0 and the claim reduces to the plain proof.
//! 2. **Region of attraction.** The largest level `a` with V > a on every face of the error
//!    box (bisection, each step a branch-and-bound proof): a sublevel set below `a` lies inside
//!    the box, so the argument never leaves the domain the proof covers.
//! 3. **Level.** Bisection over log c between a level refuted by a concrete point (V ≥ c and
//!    V̇ ≥ 0 there, found by sampling or by the search) and a level proved by branch and bound
//!    (boxes where V < c surely are dropped; the rest must give V̇ < 0).
//! 4. **Bounds.** For each error `Δx` and side, the smallest `b` with V > c wherever
//!    `Δx ≥ b` (or `≤ −b`): then {V ≤ c} lies in `−b⁻ ≤ Δx ≤ b⁺`. Each step is a proof, so
//!    the bound is sound, not a sampled estimate of the projection.
//!
//! Every proof keeps its tree, so the certificate lets `recheck` re-evaluate all of them.

use crate::goal::{Compiled, Scratch, Test};
use crate::interval::Interval;
use crate::problem::Problem;
use crate::sample::{falsify, PointSet};
use crate::search::{search, Counter, Outcome, Report};
use crate::settings::{BoundSettings, Settings};

/// Below this share of the region of attraction's level, with nothing refuted, the level
/// bisection stops: the level is zero within what the search near zero error can resolve.
pub const NEAR_ZERO_LEVEL: f64 = 1e-9;

/// Which part of the error box a sublevel proof covers.
#[derive(Copy, Clone, Debug, PartialEq)]
pub enum Side {
    /// `Δx ≥ from`.
    Upper,
    /// `Δx ≤ from` (`from` negative).
    Lower,
    /// The face `Δx = from`.
    Face,
}

impl Side {
    /// Lower-case name for reports and certificates.
    pub fn name(self) -> &'static str {
        match self {
            Side::Upper => "upper",
            Side::Lower => "lower",
            Side::Face => "face",
        }
    }

    /// Parses [`Side::name`].
    pub fn from_name(s: &str) -> Option<Side> {
        match s {
            "upper" => Some(Side::Upper),
            "lower" => Some(Side::Lower),
            "face" => Some(Side::Face),
            _ => None,
        }
    }
}

/// A proof that V > `level` on part of the domain.
#[derive(Clone, Debug)]
pub struct SublevelProof {
    /// Position of the error coordinate in the sublevel goal's dims.
    pub coordinate: usize,
    /// Which part.
    pub side: Side,
    /// Where the part starts (or the face lies).
    pub from: f64,
    /// The level.
    pub level: f64,
    /// The search (with its tree).
    pub report: Report,
}

/// The guaranteed bound on one error.
#[derive(Clone, Debug)]
pub struct ErrorBound {
    /// The state.
    pub state: String,
    /// Its unit.
    pub unit: String,
    /// Guaranteed `lower ≤ state − reference ≤ upper` inside {V ≤ c}.
    pub lower: f64,
    /// See `lower`.
    pub upper: f64,
}

impl ErrorBound {
    /// The larger magnitude of the two ends.
    pub fn magnitude(&self) -> f64 {
        self.lower.abs().max(self.upper.abs())
    }
}

/// One step of the level bisection.
#[derive(Clone, Debug)]
pub struct LevelStep {
    /// Level tried.
    pub level: f64,
    /// `proven`, `refuted` or `inconclusive`.
    pub outcome: &'static str,
    /// Boxes the search took (0 when sampling refuted it).
    pub boxes: usize,
}

/// How the ultimate-bound claim ended.
#[derive(Clone, Debug)]
pub enum BoundOutcome {
    /// A level and bounds are proved (and meet any required bounds).
    Proven,
    /// No level fits: V̇ ≥ 0 at this point, where V is above every level whose sublevel set
    /// lies in the error box (or where the required bounds cannot be met with this V).
    Refuted(Counter, String),
    /// A budget ran out or the bounds could not be decided; the reason says which.
    Inconclusive(String),
}

/// Everything the ultimate-bound search found.
#[derive(Clone, Debug)]
pub struct BoundReport {
    /// The proved level `c` (0 when the plain claim holds).
    pub level: f64,
    /// The largest level refuted by a concrete point, if any (a lower bracket of `c`).
    pub refuted_level: Option<f64>,
    /// V exceeds this on every face of the error box: trajectories starting with V below it
    /// never leave the box.
    pub attraction: f64,
    /// The bound on each error implied by {V ≤ c}.
    pub bounds: Vec<ErrorBound>,
    /// Required bounds: state, bound, met.
    pub required: Vec<(String, f64, bool)>,
    /// The level bisection.
    pub steps: Vec<LevelStep>,
    /// The proof at `level`.
    pub level_report: Option<Report>,
    /// The proofs of the bounds and of the region of attraction.
    pub sublevel: Vec<SublevelProof>,
    /// Boxes over every search.
    pub boxes: usize,
    /// The outcome.
    pub outcome: BoundOutcome,
}

/// The sublevel goal `V > level` over the candidate's coordinates (`V ≥ 0` until [`above`]
/// sets its level), compiled on a problem.
pub(crate) fn sublevel_goal(
    problem: &mut Problem,
    candidate: lawsmith_expr::ExprId,
) -> Result<Compiled, crate::check::CheckError> {
    let goal = crate::goal::Goal {
        label: "V > level".into(),
        expr: candidate,
        test: Test::Within {
            lo: 0.0,
            hi: f64::INFINITY,
        },
        origin: false,
        exempt: None,
        region: None,
    };
    Compiled::new(problem, goal).map_err(crate::check::CheckError::new)
}

/// The goal `V > level` over part of the domain: a copy of the sublevel goal with the test set.
pub(crate) fn above(sub: &Compiled, level: f64) -> Compiled {
    let mut g = sub.clone();
    // strictly above: V ≥ the next double above `level`
    g.goal.test = Test::Within {
        lo: level.next_up(),
        hi: f64::INFINITY,
    };
    g.goal.label = format!("V > {level:.4e}");
    g
}

/// The root box of a sublevel proof.
pub fn sublevel_root(root: &[Interval], coordinate: usize, side: Side, from: f64) -> Vec<Interval> {
    let mut r = root.to_vec();
    let x = root[coordinate];
    r[coordinate] = match side {
        Side::Upper => Interval::new(from, x.hi()),
        Side::Lower => Interval::new(x.lo(), from),
        Side::Face => Interval::point(from),
    };
    r
}

/// The level goal at a level.
pub fn at_level(goal: &Compiled, level: f64) -> Compiled {
    let mut g = goal.clone();
    g.level = level;
    g.goal.label = format!("dV/dt < 0 wherever V >= {level:.4e}");
    g
}

struct Run<'a> {
    settings: &'a Settings,
    tol: &'a BoundSettings,
    progress: &'a (dyn Fn(&str, usize, usize) + Sync),
    boxes: usize,
}

impl Run<'_> {
    fn prove(&mut self, g: &Compiled, root: &[Interval]) -> Report {
        let rep = search(g, root, &self.settings.budget, &|b, o| {
            (self.progress)(&g.goal.label, b, o)
        });
        self.boxes += rep.boxes;
        rep
    }

    /// V > level on part of the root.
    fn sublevel(
        &mut self,
        sub: &Compiled,
        root: &[Interval],
        coordinate: usize,
        side: Side,
        from: f64,
        level: f64,
    ) -> SublevelProof {
        let g = above(sub, level);
        let r = sublevel_root(root, coordinate, side, from);
        let report = self.prove(&g, &r);
        SublevelProof {
            coordinate,
            side,
            from,
            level,
            report,
        }
    }

    /// The level goal at `level`: sampling first, then the search.
    fn level(&mut self, goal: &Compiled, root: &[Interval], level: f64) -> (Outcome, Report) {
        let g = at_level(goal, level);
        let sampled = falsify(&g, root, self.settings.samples);
        if let Some(cx) = sampled.counter {
            return (Outcome::Refuted(cx.clone()), empty_report(&cx));
        }
        let rep = self.prove(&g, root);
        (rep.outcome.clone(), rep)
    }
}

/// The report of a level refuted without a search.
fn empty_report(cx: &Counter) -> Report {
    Report {
        outcome: Outcome::Refuted(cx.clone()),
        boxes: 0,
        by_bound: 0,
        by_hessian: 0,
        excluded: 0,
        tree: None,
        worst: Vec::new(),
        seconds: 0.0,
    }
}

fn is_proven(r: &Report) -> bool {
    matches!(r.outcome, Outcome::Proven)
}

/// The largest level refuted among the sample points of the level goal: a point where V̇ ≥ 0
/// (proved with intervals), with V's lower enclosure there as the level. Points are tried from
/// the largest V down, each moved to the worst vertex of the affine coordinates first.
fn sampled_refutation(
    goal: &Compiled,
    root: &[Interval],
    samples: usize,
) -> Option<(f64, Counter)> {
    let set = PointSet::new(goal, root, samples);
    let mut s = Scratch::default();
    let mut x = vec![0.0; root.len()];
    let mut found: Vec<(f64, Vec<f64>)> = Vec::new();
    for i in 0..set.len() {
        set.point_into(i, &mut x);
        if goal.at_origin(&x) {
            continue;
        }
        let p = goal
            .worst_vertex(&x, root, &mut s)
            .unwrap_or_else(|| x.clone());
        let Some(p) = goal.declared_point(&p) else {
            continue;
        };
        let vdot = goal.value(&p, &mut s);
        // NaN counts as no counterexample
        if vdot.is_nan() || vdot < 0.0 || !goal.feasible_f64(&p, &mut s) {
            continue;
        }
        found.push((goal.region_value(&p, &mut s)?, p));
    }
    found.sort_by(|a, b| b.0.total_cmp(&a.0));
    let mut unrestricted = goal.clone();
    unrestricted.level = f64::MIN_POSITIVE;
    for (_, p) in found.into_iter().take(256) {
        let enc = goal.at_point(&p, &mut s);
        if !goal.goal.test.refutes(enc) || !goal.feasible_point(&p, &mut s) {
            continue;
        }
        let pb: Vec<Interval> = p.iter().map(|&v| Interval::point(v)).collect();
        let Some(v) = unrestricted.region_enclosure(&pb, &mut s) else {
            continue;
        };
        if v.lo() > 0.0 {
            return Some((
                v.lo(),
                Counter {
                    value: goal.value(&p, &mut s),
                    enclosure: enc,
                    point: p,
                    bracket: None,
                },
            ));
        }
    }
    None
}

/// V's lower enclosure at a counterexample of the level goal: the level it refutes.
fn refuted_at(goal: &Compiled, cx: &Counter) -> f64 {
    let mut g = goal.clone();
    g.level = f64::MIN_POSITIVE;
    let pb: Vec<Interval> = cx.point.iter().map(|&v| Interval::point(v)).collect();
    let mut s = Scratch::default();
    g.region_enclosure(&pb, &mut s)
        .map_or(0.0, |v| v.lo().max(0.0))
}

/// Finds the ultimate bound of a prepared spec. `goal` is the claim's level goal (V̇ with V as
/// its region), `sub` the goal `V > level` over V's coordinates; `required` the required
/// bounds (state, bound).
#[allow(clippy::too_many_arguments)]
pub fn ultimate_bound(
    problem: &Problem,
    goal: &Compiled,
    root: &[Interval],
    sub: &Compiled,
    sub_root: &[Interval],
    required: &[(String, f64)],
    settings: &Settings,
    tol: &BoundSettings,
    progress: &(dyn Fn(&str, usize, usize) + Sync),
) -> BoundReport {
    let mut run = Run {
        settings,
        tol,
        progress,
        boxes: 0,
    };
    let mut out = BoundReport {
        level: 0.0,
        refuted_level: None,
        attraction: 0.0,
        bounds: Vec::new(),
        required: Vec::new(),
        steps: Vec::new(),
        level_report: None,
        sublevel: Vec::new(),
        boxes: 0,
        outcome: BoundOutcome::Inconclusive(String::new()),
    };
    let errors: Vec<(usize, String, String)> = sub
        .errors
        .iter()
        .map(|&k| {
            let v = &problem.variables[sub.dims[k]];
            (k, v.symbol.clone(), v.unit.clone())
        })
        .collect();
    let zero_bounds = |out: &mut BoundReport| {
        out.bounds = errors
            .iter()
            .map(|(_, s, u)| ErrorBound {
                state: s.clone(),
                unit: u.clone(),
                lower: 0.0,
                upper: 0.0,
            })
            .collect();
    };

    // 1. the plain claim
    let (o, rep) = run.level(goal, root, 0.0);
    out.steps.push(LevelStep {
        level: 0.0,
        outcome: outcome_name(&o),
        boxes: rep.boxes,
    });
    let mut refuted: Option<(f64, Counter)> = None;
    match o {
        Outcome::Proven => {
            out.level_report = Some(rep);
            zero_bounds(&mut out);
            out.required = required
                .iter()
                .map(|(s, b)| (s.clone(), *b, true))
                .collect();
            out.outcome = BoundOutcome::Proven;
            out.boxes = run.boxes;
            // the region of attraction is the whole box's: still worth reporting
            out.attraction = attraction(&mut run, sub, sub_root, &errors, &mut out.sublevel);
            out.boxes = run.boxes;
            return out;
        }
        Outcome::Refuted(cx) => {
            let r = refuted_at(goal, &cx);
            if r > 0.0 {
                refuted = Some((r, cx));
            }
        }
        Outcome::Inconclusive(_) => {}
    }
    if let Some((r, cx)) = sampled_refutation(goal, root, settings.samples) {
        if refuted.as_ref().is_none_or(|(b, _)| r > *b) {
            refuted = Some((r, cx));
        }
    }
    out.refuted_level = refuted.as_ref().map(|x| x.0);

    // 2. the region of attraction
    let a = attraction(&mut run, sub, sub_root, &errors, &mut out.sublevel);
    out.attraction = a;
    if a <= 0.0 {
        out.outcome = BoundOutcome::Inconclusive(
            "V > 0 could not be proved on the faces of the error box".into(),
        );
        out.boxes = run.boxes;
        return out;
    }

    // 3. the level: the largest level that fits in the box first (refuted without a search
    //    when a sampled point already rules it out)
    let top = a * (1.0 - tol.level_tolerance);
    let (o, rep) = match &refuted {
        Some((r, cx)) if *r >= top => (Outcome::Refuted(cx.clone()), empty_report(cx)),
        _ => run.level(goal, root, top),
    };
    out.steps.push(LevelStep {
        level: top,
        outcome: outcome_name(&o),
        boxes: rep.boxes,
    });
    match o {
        Outcome::Proven => {}
        Outcome::Refuted(cx) => {
            let r = refuted_at(goal, &cx);
            out.refuted_level = Some(r.max(refuted.as_ref().map_or(0.0, |x| x.0)));
            out.outcome = BoundOutcome::Refuted(
                cx,
                format!(
                    "no invariant level fits in the error box: its sublevel sets stay inside only below V = {a:.4e} (V exceeds that on every face), and already the largest level tried, c = {top:.4e}, fails: dV/dt >= 0 at a point where V = {r:.4e}; widen the error box, raise the gains or shrink the uncertainty"
                ),
            );
            out.boxes = run.boxes;
            return out;
        }
        Outcome::Inconclusive(why) => {
            out.boxes = run.boxes;
            out.outcome = BoundOutcome::Inconclusive(format!(
                "dV/dt < 0 wherever V >= {top:.4e} (the largest level inside the error box) was not decided: {why}"
            ));
            out.boxes = run.boxes;
            return out;
        }
    }
    let mut hi = top;
    let mut hi_report = rep;
    let mut lo = refuted.as_ref().map_or(0.0, |x| x.0).min(hi);
    // a refuted point from the worst vertices is usually within a hair of the true level:
    // the first try is just above it, and the bisection runs only when that fails
    let mut guess = if lo > 0.0 { tol.level_tolerance } else { 0.0 };
    while hi > lo * (1.0 + tol.level_tolerance) {
        let mid = if guess > 0.0 && lo * (1.0 + guess) < hi {
            lo * (1.0 + guess)
        } else if lo > 0.0 {
            (lo * hi).sqrt()
        } else {
            // nothing refuted yet: come down fast
            hi * 1e-3
        };
        if !(mid > lo && mid < hi) {
            break;
        }
        let (o, rep) = run.level(goal, root, mid);
        out.steps.push(LevelStep {
            level: mid,
            outcome: outcome_name(&o),
            boxes: rep.boxes,
        });
        match o {
            Outcome::Proven => {
                hi = mid;
                hi_report = rep;
                guess = 0.0;
            }
            Outcome::Refuted(cx) => {
                // still guessing: step up four times as far each time
                guess *= 4.0;
                let r = refuted_at(goal, &cx).max(mid).min(hi);
                refuted = Some((r, cx));
                lo = r.max(mid);
            }
            Outcome::Inconclusive(_) => {
                guess *= 4.0;
                lo = mid;
            }
        }
        if lo == 0.0 && hi < a * NEAR_ZERO_LEVEL {
            // a level this small is zero within the tolerance of the near-origin proof
            break;
        }
    }
    out.level = hi;
    out.level_report = Some(hi_report);
    out.refuted_level = refuted.as_ref().map(|x| x.0);

    // 4. the bounds at the level
    for (k, state, unit) in &errors {
        let x = sub_root[*k];
        let upper = if x.hi() > 0.0 {
            extent(
                &mut run,
                sub,
                sub_root,
                *k,
                Side::Upper,
                hi,
                &mut out.sublevel,
            )
        } else {
            Some(0.0)
        };
        let lower = if x.lo() < 0.0 {
            extent(
                &mut run,
                sub,
                sub_root,
                *k,
                Side::Lower,
                hi,
                &mut out.sublevel,
            )
        } else {
            Some(0.0)
        };
        match (lower, upper) {
            (Some(l), Some(u)) => out.bounds.push(ErrorBound {
                state: state.clone(),
                unit: unit.clone(),
                lower: l,
                upper: u,
            }),
            _ => {
                out.outcome = BoundOutcome::Inconclusive(format!(
                    "the bound on the error of `{state}` at level {hi:.4e} was not decided"
                ));
                out.boxes = run.boxes;
                return out;
            }
        }
    }

    // 5. the required bounds
    out.required = required
        .iter()
        .map(|(s, b)| {
            let met = out
                .bounds
                .iter()
                .find(|e| &e.state == s)
                .is_some_and(|e| e.magnitude() <= *b);
            (s.clone(), *b, met)
        })
        .collect();
    out.outcome = BoundOutcome::Proven;
    if let Some((s, b, _)) = out.required.iter().find(|r| !r.2).cloned() {
        out.outcome = not_met(&mut run, sub, sub_root, &errors, &s, b, &refuted, &out);
    }
    out.boxes = run.boxes;
    out
}

fn outcome_name(o: &Outcome) -> &'static str {
    match o {
        Outcome::Proven => "proven",
        Outcome::Refuted(_) => "refuted",
        Outcome::Inconclusive(_) => "inconclusive",
    }
}

/// The largest level below which every sublevel set stays inside the error box: bisection on
/// V > a over every face, keeping the proofs at the final level.
fn attraction(
    run: &mut Run,
    sub: &Compiled,
    root: &[Interval],
    errors: &[(usize, String, String)],
    proofs: &mut Vec<SublevelProof>,
) -> f64 {
    let faces: Vec<(usize, f64)> = errors
        .iter()
        .flat_map(|(k, _, _)| [(*k, root[*k].lo()), (*k, root[*k].hi())])
        .filter(|&(_, at)| at != 0.0)
        .collect();
    if faces.is_empty() {
        return 0.0;
    }
    // an upper bracket: the smallest V sampled on a face
    let mut s = Scratch::default();
    let mut top = f64::INFINITY;
    for &(k, at) in &faces {
        let r = sublevel_root(root, k, Side::Face, at);
        let set = PointSet::new(sub, &r, 2_000);
        let mut x = vec![0.0; r.len()];
        for i in 0..set.len() {
            set.point_into(i, &mut x);
            let v = sub.value(&x, &mut s);
            if v.is_finite() && v > 0.0 {
                top = top.min(v);
            }
        }
    }
    if !top.is_finite() {
        return 0.0;
    }
    let all = |run: &mut Run, level: f64| -> Option<Vec<SublevelProof>> {
        let mut v = Vec::new();
        for &(k, at) in &faces {
            let p = run.sublevel(sub, root, k, Side::Face, at, level);
            if !is_proven(&p.report) {
                return None;
            }
            v.push(p);
        }
        Some(v)
    };
    let (mut lo, mut hi) = (0.0, top);
    let mut best: Option<(f64, Vec<SublevelProof>)> = None;
    for _ in 0..60 {
        let mid = if lo > 0.0 { 0.5 * (lo + hi) } else { 0.5 * hi };
        match all(run, mid) {
            Some(p) => {
                lo = mid;
                best = Some((mid, p));
            }
            None => hi = mid,
        }
        if lo > 0.0 && hi - lo <= run.tol.bound_tolerance * lo {
            break;
        }
    }
    match best {
        Some((a, p)) => {
            proofs.extend(p);
            a
        }
        None => 0.0,
    }
}

/// The largest level with V > level on every face of `root`'s error coordinates (bisection,
/// each step a proof), its face proofs, and the boxes spent: the connected part of
/// {V ≤ level} around zero error lies inside `root`.
pub(crate) fn level_inside(
    sub: &Compiled,
    root: &[Interval],
    settings: &Settings,
) -> (f64, Vec<SublevelProof>, usize) {
    let mut run = Run {
        settings,
        tol: &settings.bound,
        progress: &|_, _, _| {},
        boxes: 0,
    };
    let errors: Vec<(usize, String, String)> = sub
        .errors
        .iter()
        .map(|&k| (k, String::new(), String::new()))
        .collect();
    let mut proofs = Vec::new();
    let a = attraction(&mut run, sub, root, &errors, &mut proofs);
    (a, proofs, run.boxes)
}

/// The smallest `b` with V > level wherever the error is beyond `b` on one side: bisection,
/// keeping the proof at the final `b`. None when even the face is not proved.
fn extent(
    run: &mut Run,
    sub: &Compiled,
    root: &[Interval],
    k: usize,
    side: Side,
    level: f64,
    proofs: &mut Vec<SublevelProof>,
) -> Option<f64> {
    let end = match side {
        Side::Upper => root[k].hi(),
        _ => root[k].lo(),
    };
    let first = run.sublevel(sub, root, k, side, end, level);
    if !is_proven(&first.report) {
        return None;
    }
    // |b| between `lo` (refuted or zero) and `hi` (proved)
    let (mut lo, mut hi) = (0.0f64, end.abs());
    let mut best = first;
    while hi - lo > run.tol.bound_tolerance * hi {
        let mid = 0.5 * (lo + hi);
        let from = if side == Side::Upper { mid } else { -mid };
        let p = run.sublevel(sub, root, k, side, from, level);
        if is_proven(&p.report) {
            hi = mid;
            best = p;
        } else {
            lo = mid;
        }
    }
    let b = best.from;
    proofs.push(best);
    Some(b)
}

/// The outcome when a required bound is not met: refuted when the sublevel set at a refuted
/// level already reaches beyond the required bound (no invariant sublevel set of this V can
/// meet it), inconclusive otherwise.
#[allow(clippy::too_many_arguments)]
fn not_met(
    run: &mut Run,
    sub: &Compiled,
    root: &[Interval],
    errors: &[(usize, String, String)],
    state: &str,
    bound: f64,
    refuted: &Option<(f64, Counter)>,
    out: &BoundReport,
) -> BoundOutcome {
    let got = out
        .bounds
        .iter()
        .find(|e| e.state == state)
        .map_or(f64::NAN, ErrorBound::magnitude);
    let Some((r, cx)) = refuted else {
        return BoundOutcome::Inconclusive(format!(
            "the guaranteed bound on `{state}` is {got:.4}, above the required {bound}"
        ));
    };
    let Some((k, _, _)) = errors.iter().find(|e| e.1 == state) else {
        return BoundOutcome::Inconclusive(format!("`{state}` is not an error of V"));
    };
    for side in [Side::Upper, Side::Lower] {
        let from = if side == Side::Upper { bound } else { -bound };
        if !root[*k].contains(from) {
            continue;
        }
        let p = run.sublevel(sub, root, *k, side, from, *r);
        if let Outcome::Refuted(_) = p.report.outcome {
            return BoundOutcome::Refuted(
                cx.clone(),
                format!(
                    "dV/dt >= 0 at a point with V >= {r:.4e}, and the sublevel set {{V <= {r:.4e}}} already reaches beyond the required bound {bound} on `{state}`: no invariant sublevel set of this V meets it"
                ),
            );
        }
    }
    BoundOutcome::Inconclusive(format!(
        "the guaranteed bound on `{state}` is {got:.4}, above the required {bound}, but no point shows this V cannot do better (lower the level tolerance)"
    ))
}

/// V > `level` on one part of `root` (one side of coordinate `k` from `from`, or that face),
/// proved; and the boxes spent.
pub(crate) fn above_on(
    sub: &Compiled,
    root: &[Interval],
    part: (usize, Side, f64),
    level: f64,
    settings: &Settings,
) -> (SublevelProof, usize) {
    let mut run = Run {
        settings,
        tol: &settings.bound,
        progress: &|_, _, _| {},
        boxes: 0,
    };
    let (k, side, from) = part;
    let p = run.sublevel(sub, root, k, side, from, level);
    (p, run.boxes)
}

/// Per error coordinate, (lower, upper); None where an end is not proved.
type Extents = Option<Vec<(f64, f64)>>;

/// The bound on each error coordinate of `sub` inside {V ≤ level} within `root` (lower,
/// upper; bisected as an ultimate bound's), their proofs and the boxes spent.
pub(crate) fn extents(
    sub: &Compiled,
    root: &[Interval],
    level: f64,
    settings: &Settings,
) -> (Extents, Vec<SublevelProof>, usize) {
    let mut run = Run {
        settings,
        tol: &settings.bound,
        progress: &|_, _, _| {},
        boxes: 0,
    };
    let mut proofs = Vec::new();
    let mut out = Vec::new();
    for &k in &sub.errors {
        let mut end = |side: Side, beyond: bool| {
            if beyond {
                extent(&mut run, sub, root, k, side, level, &mut proofs)
            } else {
                Some(0.0)
            }
        };
        let lower = end(Side::Lower, root[k].lo() < 0.0);
        let upper = end(Side::Upper, root[k].hi() > 0.0);
        match (lower, upper) {
            (Some(l), Some(u)) => out.push((l, u)),
            _ => return (None, proofs, run.boxes),
        }
    }
    (Some(out), proofs, run.boxes)
}
