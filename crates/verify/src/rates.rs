//! The guidance rates a proved law can follow without saturating.
//!
//! The claim's proof assumes the unsaturated law. Where V̇ ≤ 0 on the domain, every sublevel
//! set {V ≤ c} that lies inside the error box is a set no trajectory leaves; if every
//! actuator's command stays within its limits there, the law as flown (saturated) is the law
//! proved, on that set. Which reference rates allow it is a guidance question: the rate
//! limits of the reference filters decide it. This module proves, for the sublevel set that
//! lies within given error bounds:
//!
//! 1. **The set.** The largest level `c` with V > c on every face of the error box cut down to
//!    the given bounds (bisection, each step a branch-and-bound proof, as the region of
//!    attraction of an ultimate bound): the connected part of {V ≤ c} around zero error lies
//!    within those bounds, and V does not increase, so a trajectory starting in it stays.
//! 2. **The rates.** Each actuator's command within its declared limits wherever V ≤ c (the
//!    level joins the constraints as `V − c ≤ 0`, so a box wholly above it is excluded), for
//!    every rate in a box: first the rates held at zero, then each end of each rate's range in
//!    turn pushed out towards its declared end by bisection, each step a proof of every
//!    actuator. The box found is greedy (another order may give another box); every box
//!    reported is proved.
//!
//! Since the commands stay within their limits on {V ≤ c} for those rates, the saturated law
//! equals the proved one there: {V ≤ c} is a region of attraction of the law as flown.

use crate::bound::{self, SublevelProof};
use crate::check::{CheckError, Counterexample};
use crate::goal::{Compiled, Goal, Test};
use crate::interval::Interval;
use crate::prepare::Prepared;
use crate::problem::{ProofConstraint, Role};
use crate::sample::falsify;
use crate::search::{search, Outcome, Report};
use crate::settings::Settings;
use lawsmith_expr::BigRational;

/// Bisection steps on each end of a rate's range: the end is found to 1/2⁸ of its declared
/// extent.
pub const RATE_STEPS: usize = 8;

/// Boxes each proof of a bisection step may take (at most the check's own budget): a step
/// that needs more counts as not proved, which only makes the box found smaller.
pub const RATE_STEP_BOXES: usize = 100_000;

/// One rate's range: declared and proved.
#[derive(Clone, Debug)]
pub struct ProvedRate {
    /// The rate's name.
    pub name: String,
    /// Its unit.
    pub unit: String,
    /// The declared range (nearest f64).
    pub declared: (f64, f64),
    /// The range every command is proved within its limits for.
    pub proved: (f64, f64),
}

/// How the search for rates ended.
#[derive(Clone, Debug)]
pub enum RatesOutcome {
    /// A rate box is proved (possibly with every range a single point, zero).
    Proven,
    /// Even with every rate at zero, an actuator leaves its limits at this point inside the
    /// set.
    Refuted(String, Box<Counterexample>),
    /// A budget ran out, or no level could be proved; the reason says which.
    Inconclusive(String),
}

/// The guidance rates that keep every command within its limits.
#[derive(Clone, Debug)]
pub struct RateLimits {
    /// The error bounds the set lies within (state, bound), as asked.
    pub within: Vec<(String, f64)>,
    /// The proved level: V > level on every face of the error box cut to `within`.
    pub level: f64,
    /// The face proofs of the level (coordinates index the sublevel goal's dims).
    pub faces: Vec<SublevelProof>,
    /// The sublevel goal `V > level` the face proofs are of.
    pub sub: Compiled,
    /// Each rate, declared and proved.
    pub rates: Vec<ProvedRate>,
    /// Each actuator's goal within its limits wherever V ≤ level, and its proof over the
    /// proved rates.
    pub actuators: Vec<(String, Compiled, Report)>,
    /// Proofs run (each of every actuator).
    pub steps: usize,
    /// Boxes over every search.
    pub boxes: usize,
    /// The outcome.
    pub outcome: RatesOutcome,
    /// Where a guidance filter lets its rate go beyond the proved range: both figures.
    pub warnings: Vec<String>,
    /// The index of the constraint `V − level ≤ 0` the actuator goals carry.
    pub sublevel_constraint: usize,
    /// Beyond the saturation-free set, with the proved rates: what the law as flown
    /// (saturated) still guarantees, or why it was not sought.
    pub saturated: Option<Result<SaturatedRegion, String>>,
}

/// A region of attraction of the law as flown, with saturation active. With the guidance
/// rates within the proved ones:
///
/// 1. V > `level` (below `box_level`) on every face of the whole error box, so the connected part
///    of {V ≤ level} around zero error lies inside the box;
/// 2. V > `free` (the saturation-free level) wherever an error is beyond its bound in
///    `within`, so every point of the box with V ≤ free lies in the saturation-free set;
/// 3. V̇ of the saturated law < 0 wherever free ≤ V ≤ level.
///
/// A trajectory starting in {V ≤ level} therefore stays in it and its V falls (at a rate
/// bounded away from zero on the compact band) until V < free, where the commands are within
/// their limits, the saturated law is the proved one, and the claim's V̇ < 0 takes it to zero
/// error.
#[derive(Clone, Debug)]
pub struct SaturatedRegion {
    /// The saturation-free level.
    pub free: f64,
    /// The largest level inside the whole error box (V above it on every face).
    pub box_level: f64,
    /// The face proofs of the whole error box at `level` (coordinates index
    /// [`RateLimits::sub`]'s dims).
    pub box_faces: Vec<SublevelProof>,
    /// V > `free` beyond each bound of `within`, over the whole error box.
    pub outside: Vec<SublevelProof>,
    /// The proved level (the saturation-free one when nothing above it is proved).
    pub level: f64,
    /// V̇ of the saturated law < 0 wherever `free` ≤ V ≤ `level`, on a copy of the problem
    /// whose constraint at `constraint` is `V − level ≤ 0`, with its proof; None when no level
    /// above `free` is proved.
    pub proof: Option<(Compiled, Report)>,
    /// The index of that constraint.
    pub constraint: usize,
    /// The smallest level left undecided (its proof ran out of boxes), if any.
    pub undecided: Option<f64>,
    /// The smallest level refuted, with a point where V̇ of the saturated law ≥ 0 and
    /// free ≤ V ≤ that level, in every symbol: the region is no larger than that level.
    pub refuted: Option<(f64, Box<Counterexample>)>,
    /// Per error coordinate of V, the bounds (lower, upper) inside {V ≤ level}, proved
    /// (`bound_proofs`); empty when `proof` is None.
    pub bounds: Vec<crate::bound::ErrorBound>,
    /// The proofs of the bounds.
    pub bound_proofs: Vec<SublevelProof>,
    /// Proofs of V̇ run.
    pub steps: usize,
    /// Boxes over every search.
    pub boxes: usize,
}

/// Proofs of the saturated region's level at most (each within [`RATE_STEP_BOXES`]).
pub const SATURATED_STEPS: usize = 12;

/// V̇ of the saturated law as a goal at `level`: asked where V ≥ `free` (its region) and
/// V ≤ `level` (the last constraint of a copy of the problem). Returns it and the
/// constraint's index; an error says why the law cannot be saturated in V̇.
pub(crate) fn saturated_goal(
    prepared: &Prepared,
    free: f64,
    level: f64,
) -> Result<(Compiled, usize), CheckError> {
    let base = prepared.saturated.clone().map_err(CheckError::new)?;
    let mut problem = prepared.problem.clone();
    let index = push_sublevel(&mut problem, prepared.forms.candidate, level)?;
    let vdot = problem.express_plain(base);
    let goal = Goal {
        label: format!(
            "dV/dt < 0 with the commands clamped, wherever {free:.4e} <= V <= {level:.4e}"
        ),
        expr: vdot,
        test: Test::Negative { strict: true },
        origin: false,
        exempt: None,
        region: Some(prepared.forms.candidate),
    };
    let mut g = Compiled::new(&mut problem, goal).map_err(CheckError::new)?;
    g.level = free;
    // where no command is clamped the saturated law is the proved one: those boxes rest on
    // the claim's proof when it is of V-dot itself, strictly negative
    let strict = matches!(
        prepared.claim,
        lawsmith_spec::Claim::NegativeDefinite | lawsmith_spec::Claim::NegativeDefiniteIn(_)
    );
    if let (true, Some(ci)) = (strict, prepared.claim_index()) {
        let claim = &prepared.goals[ci].compiled;
        let exempt: Vec<usize> = claim.errors.iter().map(|&k| claim.dims[k]).collect();
        let commands: Vec<(lawsmith_expr::ExprId, (f64, f64))> = prepared
            .actuators
            .iter()
            .filter_map(|ag| match ag.compiled.goal.test {
                Test::Within { lo, hi } => Some((ag.compiled.goal.expr, (lo, hi))),
                _ => None,
            })
            .collect();
        if commands.len() == prepared.actuators.len() {
            g.set_unclamped(&problem, &commands, &exempt)
                .map_err(CheckError::new)?;
        }
    }
    Ok((g, index))
}

/// Adds the constraint `V − level ≤ 0` to a problem; returns its index.
fn push_sublevel(
    problem: &mut crate::problem::Problem,
    candidate: lawsmith_expr::ExprId,
    level: f64,
) -> Result<usize, CheckError> {
    let c = BigRational::from_float(level)
        .ok_or_else(|| CheckError::new(format!("the level {level} is not a number")))?;
    let c = problem.dag.num(c);
    let g = problem.dag.sub(candidate, c);
    let (g, _) = problem.simplify(g);
    problem.constraints.push(ProofConstraint {
        text: format!("V <= {level:e}"),
        g,
        strict: false,
    });
    Ok(problem.constraints.len() - 1)
}

/// The parts of the whole error box beyond the bounds of `within`: (coordinate in the
/// sublevel goal's dims, side, where it starts).
pub(crate) fn beyond_within(
    prepared: &Prepared,
    sub: &Compiled,
    within: &[(String, f64)],
) -> Vec<(usize, bound::Side, f64)> {
    let root = root_within(prepared, &sub.dims, &[], &[]);
    let mut out = Vec::new();
    for &k in &sub.errors {
        let v = &prepared.problem.variables[sub.dims[k]];
        let Some((_, b)) = within.iter().find(|(s, _)| *s == v.symbol) else {
            continue;
        };
        if root[k].hi() > *b {
            out.push((k, bound::Side::Upper, *b));
        }
        if root[k].lo() < -*b {
            out.push((k, bound::Side::Lower, -*b));
        }
    }
    out
}

/// The saturated law's region of attraction beyond the saturation-free set of `r`.
fn saturated_region(
    prepared: &Prepared,
    r: &RateLimits,
    settings: &Settings,
) -> Result<SaturatedRegion, String> {
    prepared.saturated.clone()?;
    let whole = root_within(prepared, &r.sub.dims, &[], &[]);
    let (box_level, box_faces, mut boxes) = bound::level_inside(&r.sub, &whole, settings);
    let mut out = SaturatedRegion {
        free: r.level,
        box_level,
        box_faces,
        outside: Vec::new(),
        level: r.level,
        proof: None,
        constraint: 0,
        refuted: None,
        undecided: None,
        bounds: Vec::new(),
        bound_proofs: Vec::new(),
        steps: 0,
        boxes,
    };
    if box_level <= r.level {
        return Ok(out);
    }
    for part in beyond_within(prepared, &r.sub, &r.within) {
        let (p, n) = bound::above_on(&r.sub, &whole, part, r.level, settings);
        boxes += n;
        if !matches!(p.report.outcome, Outcome::Proven) {
            out.boxes = boxes;
            return Err(format!(
                "V > {:.4e} (the saturation-free level) beyond `{}` = {} was not proved: the set {{V <= {:.4e}}} may reach outside the bounds",
                r.level, r.sub.names[part.0], part.2, r.level
            ));
        }
        out.outside.push(p);
    }
    let rates = proved_rate_box(prepared, r);
    let mut budget = settings.budget.clone();
    budget.max_boxes = budget.max_boxes.min(RATE_STEP_BOXES);
    // upwards from the saturation-free level by factors of 4 while proofs succeed (the
    // whole box's level at most, just below it: its face proofs are re-done at the level
    // found, with room to spare), then geometric bisection; an undecided step ends the
    // search (a larger budget might decide it, at minutes a step on a large envelope)
    let top = box_level * (1.0 - settings.bound.level_tolerance);
    let (mut lo, mut hi) = (r.level, f64::INFINITY);
    while out.steps < SATURATED_STEPS && out.undecided.is_none() {
        let level = if hi.is_finite() {
            (lo * hi).sqrt()
        } else {
            (lo * 4.0).min(top)
        };
        out.steps += 1;
        let (g, index) = saturated_goal(prepared, r.level, level).map_err(|e| e.message)?;
        let root = root_within(prepared, &g.dims, &[], &rates);
        let outcome = match falsify(&g, &root, settings.samples).counter {
            Some(cx) => Outcome::Refuted(cx),
            None => {
                let rep = search(&g, &root, &budget, &|_, _| {});
                boxes += rep.boxes;
                if matches!(rep.outcome, Outcome::Proven) {
                    lo = level;
                    out.level = level;
                    out.proof = Some((g, rep));
                    out.constraint = index;
                    if level >= top {
                        break;
                    }
                    continue;
                }
                rep.outcome
            }
        };
        hi = level;
        match outcome {
            Outcome::Refuted(cx) => {
                if g.feasible_point(&cx.point, &mut crate::goal::Scratch::default()) {
                    let mut point = prepared.counterexample_of_goal(&g, &cx);
                    point.quantity = "dV/dt with the commands clamped".into();
                    out.refuted = Some((level, Box::new(point)));
                }
            }
            _ => out.undecided = Some(level),
        }
    }
    if out.proof.is_some() {
        out.box_faces.clear();
        for &k in &r.sub.errors {
            for end in [whole[k].lo(), whole[k].hi()] {
                if end == 0.0 {
                    continue;
                }
                let part = (k, bound::Side::Face, end);
                let (p, n) = bound::above_on(&r.sub, &whole, part, out.level, settings);
                boxes += n;
                if !matches!(p.report.outcome, Outcome::Proven) {
                    out.boxes = boxes;
                    return Err(format!(
                        "V > {:.4e} on the face `{}` = {end} was not proved",
                        out.level, r.sub.names[k]
                    ));
                }
                out.box_faces.push(p);
            }
        }
        let (bounds, proofs, n) = bound::extents(&r.sub, &whole, out.level, settings);
        boxes += n;
        out.bound_proofs = proofs;
        let Some(bounds) = bounds else {
            out.boxes = boxes;
            return Err(format!(
                "the bounds on the errors inside {{V <= {:.4e}}} were not proved",
                out.level
            ));
        };
        out.bounds = r
            .sub
            .errors
            .iter()
            .zip(bounds)
            .map(|(&k, (lower, upper))| {
                let v = &prepared.problem.variables[r.sub.dims[k]];
                crate::bound::ErrorBound {
                    state: v.symbol.clone(),
                    unit: v.unit.clone(),
                    lower,
                    upper,
                }
            })
            .collect();
    }
    out.boxes = boxes;
    Ok(out)
}

/// The proved rates as a box (problem index, range).
pub(crate) fn proved_rate_box(prepared: &Prepared, r: &RateLimits) -> Vec<(usize, (f64, f64))> {
    prepared
        .problem
        .variables
        .iter()
        .enumerate()
        .filter(|(_, v)| v.role == Role::Rate)
        .zip(&r.rates)
        .map(|((i, _), p)| (i, p.proved))
        .collect()
}

/// The sublevel goal `V > level` over V's coordinates.
pub(crate) fn sublevel_goal(prepared: &mut Prepared) -> Result<Compiled, CheckError> {
    let candidate = prepared.forms.candidate;
    bound::sublevel_goal(&mut prepared.problem, candidate)
}

/// The root box of a goal's coordinates with each state's error cut to its bound in `within`
/// and each rate to `rates` (by problem index; the declared box otherwise).
pub(crate) fn root_within(
    prepared: &Prepared,
    dims: &[usize],
    within: &[(String, f64)],
    rates: &[(usize, (f64, f64))],
) -> Vec<Interval> {
    let p = &prepared.problem;
    dims.iter()
        .map(|&d| {
            let v = &p.variables[d];
            let (mut lo, mut hi) = (v.lo, v.hi);
            if v.role == Role::Error {
                if let Some((_, b)) = within.iter().find(|(s, _)| *s == v.symbol) {
                    lo = lo.max(-b);
                    hi = hi.min(*b);
                }
            }
            if let Some((_, r)) = rates.iter().find(|(i, _)| *i == d) {
                (lo, hi) = *r;
            }
            Interval::new(lo, hi)
        })
        .collect()
}

/// Each actuator's goal, within its limits wherever V ≤ `level`: compiled on a copy of the
/// problem whose last constraint is `V − level ≤ 0`. Returns the goals and that constraint's
/// index.
pub(crate) fn actuator_goals(
    prepared: &Prepared,
    level: f64,
) -> Result<(Vec<Compiled>, usize), CheckError> {
    let mut problem = prepared.problem.clone();
    let index = push_sublevel(&mut problem, prepared.forms.candidate, level)?;
    let mut out = Vec::new();
    for ag in &prepared.actuators {
        let mut goal = ag.compiled.goal.clone();
        goal.label = format!("{} wherever V <= {level:.4e}", goal.label);
        out.push(Compiled::new(&mut problem, goal).map_err(CheckError::new)?);
    }
    Ok((out, index))
}

/// Proves every actuator goal over the box with `rates`: the first failure's outcome, or the
/// proofs.
fn prove_all(
    prepared: &Prepared,
    goals: &[Compiled],
    within: &[(String, f64)],
    rates: &[(usize, (f64, f64))],
    settings: &Settings,
    boxes: &mut usize,
) -> Result<Vec<Report>, (usize, Outcome)> {
    let mut budget = settings.budget.clone();
    budget.max_boxes = budget.max_boxes.min(RATE_STEP_BOXES);
    let mut out = Vec::new();
    for (k, g) in goals.iter().enumerate() {
        let root = root_within(prepared, &g.dims, within, rates);
        if let Some(cx) = falsify(g, &root, settings.samples).counter {
            return Err((k, Outcome::Refuted(cx)));
        }
        let rep = search(g, &root, &budget, &|_, _| {});
        *boxes += rep.boxes;
        match &rep.outcome {
            Outcome::Proven => out.push(rep),
            other => return Err((k, other.clone())),
        }
    }
    Ok(out)
}

/// The guidance rates that keep every actuator within its limits on the sublevel set of V
/// within `within` (state, bound; the error box where a state is not named). The claim must be
/// proven with V̇ ≤ 0 on the domain (not an ultimate bound).
pub fn rate_limits(
    prepared: &mut Prepared,
    within: &[(String, f64)],
    settings: &Settings,
) -> Result<RateLimits, CheckError> {
    let sub = sublevel_goal(prepared)?;
    let sub_root = root_within(prepared, &sub.dims, within, &[]);
    let (level, faces, mut boxes) = bound::level_inside(&sub, &sub_root, settings);
    let rates: Vec<(usize, ProvedRate)> = prepared
        .problem
        .variables
        .iter()
        .enumerate()
        .filter(|(_, v)| v.role == Role::Rate)
        .map(|(i, v)| {
            let declared = (v.lo, v.hi);
            (
                i,
                ProvedRate {
                    name: v.name.clone(),
                    unit: v.unit.clone(),
                    declared,
                    // zero, or the declared end nearest to it
                    proved: (0.0f64.clamp(v.lo, v.hi), 0.0f64.clamp(v.lo, v.hi)),
                },
            )
        })
        .collect();
    let mut out = RateLimits {
        within: within.to_vec(),
        level,
        faces,
        sub,
        rates: rates.iter().map(|(_, r)| r.clone()).collect(),
        actuators: Vec::new(),
        steps: 0,
        boxes,
        outcome: RatesOutcome::Inconclusive(String::new()),
        warnings: Vec::new(),
        sublevel_constraint: 0,
        saturated: None,
    };
    if level <= 0.0 {
        out.outcome = RatesOutcome::Inconclusive(
            "V > 0 could not be proved on the faces of the error box within the bounds".into(),
        );
        return Ok(out);
    }
    let (goals, index) = actuator_goals(prepared, level)?;
    out.sublevel_constraint = index;
    let box_of = |r: &[ProvedRate]| -> Vec<(usize, (f64, f64))> {
        rates
            .iter()
            .zip(r)
            .map(|((i, _), p)| (*i, p.proved))
            .collect()
    };
    // every rate at zero first: without it no rate box holds
    let mut current = out.rates.clone();
    out.steps += 1;
    let mut proofs = match prove_all(
        prepared,
        &goals,
        within,
        &box_of(&current),
        settings,
        &mut boxes,
    ) {
        Ok(p) => p,
        // a point counts only where the command is beyond the declared limits themselves
        Err((k, Outcome::Refuted(cx))) if prepared.actuators[k].outside(cx.enclosure) => {
            let name = prepared.actuators[k].actuator.clone();
            out.outcome =
                RatesOutcome::Refuted(name, Box::new(counterexample(prepared, &goals[k], &cx)));
            out.boxes = boxes;
            return Ok(out);
        }
        Err((k, o)) => {
            out.outcome = RatesOutcome::Inconclusive(match o {
                Outcome::Inconclusive(why) => why,
                _ => format!(
                    "`{}` reaches its limit within rounding at one point",
                    prepared.actuators[k].actuator
                ),
            });
            out.boxes = boxes;
            return Ok(out);
        }
    };
    // then each end of each rate, pushed out towards its declared end
    for j in 0..current.len() {
        for upper in [false, true] {
            let (dlo, dhi) = current[j].declared;
            let end = if upper { dhi } else { dlo };
            if end == 0.0 {
                continue;
            }
            let (mut ok, mut bad) = (0.0f64, 1.0f64);
            for step in 0..=RATE_STEPS {
                // the declared end itself first, then halving
                let t = if step == 0 { 1.0 } else { 0.5 * (ok + bad) };
                let mut trial = current.clone();
                if upper {
                    trial[j].proved.1 = t * end;
                } else {
                    trial[j].proved.0 = t * end;
                }
                out.steps += 1;
                match prove_all(
                    prepared,
                    &goals,
                    within,
                    &box_of(&trial),
                    settings,
                    &mut boxes,
                ) {
                    Ok(p) => {
                        ok = t;
                        current = trial;
                        proofs = p;
                        if step == 0 {
                            break;
                        }
                    }
                    Err(_) => bad = t,
                }
            }
        }
    }
    out.rates = current;
    out.actuators = prepared
        .actuators
        .iter()
        .zip(goals)
        .zip(proofs)
        .map(|((ag, g), p)| (ag.actuator.clone(), g, p))
        .collect();
    out.boxes = boxes;
    out.outcome = RatesOutcome::Proven;
    if settings.saturated {
        out.saturated = Some(saturated_region(prepared, &out, settings));
    }
    Ok(out)
}

/// A counterexample of an actuator goal in every symbol.
fn counterexample(
    prepared: &Prepared,
    g: &Compiled,
    cx: &crate::search::Counter,
) -> Counterexample {
    prepared.counterexample_of_goal(g, cx)
}
