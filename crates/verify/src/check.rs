//! `check`: well-posedness, V positive definite, and the claim, each falsified by sampling and
//! then proved by branch and bound; plus the actuator saturation shares.

use crate::bound::{ultimate_bound, BoundOutcome, BoundReport};
use crate::goal::Test;
use crate::interval::Interval;
use crate::plan::Strategy;
use crate::prepare::{prepare, Prepared};
use crate::problem::Variable;
use crate::rates::{rate_limits, RateLimits};
use crate::sample::{falsify, Sampled, Sequence};
use crate::search::{search, Counter, Outcome, Report};
use crate::settings::Settings;
use lawsmith_expr::Tape;
use lawsmith_spec::{Claim, Spec};
use std::time::Instant;

/// The overall answer.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum Verdict {
    /// Every goal is proved.
    Proven,
    /// Some goal fails at a concrete point.
    Falsified,
    /// Neither: a budget ran out, or a goal could not be decided.
    Inconclusive,
}

impl Verdict {
    /// Lower-case name for reports and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Verdict::Proven => "proven",
            Verdict::Falsified => "falsified",
            Verdict::Inconclusive => "inconclusive",
        }
    }
}

/// What a goal is about.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum GoalKind {
    /// A well-posedness condition of the laws (or an assumption of the simplifier).
    Condition,
    /// V > 0 away from zero error.
    Positive,
    /// A controller state's limits never increase V: ∂V/∂ξ ≥ 0 at its upper limit and ≤ 0
    /// at its lower, so holding it there (projection, anti-windup) keeps the claim.
    Projection,
    /// The Lyapunov claim.
    Claim,
}

impl GoalKind {
    /// The name in certificates and JSON.
    pub fn name(self) -> &'static str {
        match self {
            GoalKind::Condition => "condition",
            GoalKind::Positive => "positive",
            GoalKind::Projection => "projection",
            GoalKind::Claim => "claim",
        }
    }
}

/// How one goal ended.
#[derive(Clone, Debug)]
pub enum Status {
    /// Proved over the whole domain.
    Proven,
    /// Fails at a point.
    Refuted(Counter),
    /// Not decided; the reason names the limit.
    Inconclusive(String),
    /// Not attempted because an earlier goal failed.
    Skipped,
}

/// One goal's result.
#[derive(Debug)]
pub struct GoalResult {
    /// What it is about.
    pub kind: GoalKind,
    /// Statement.
    pub label: String,
    /// Where it comes from (a law, an actuator, the simplifier).
    pub source: String,
    /// Its expression in proof coordinates.
    pub text: String,
    /// The test.
    pub test: Test,
    /// Exempt at zero error.
    pub origin: bool,
    /// The search coordinates (problem indices).
    pub dims: Vec<usize>,
    /// Sampling.
    pub sampled: Option<Sampled>,
    /// Branch and bound.
    pub search: Option<Report>,
    /// The outcome.
    pub status: Status,
}

/// A counterexample in every symbol of the spec.
#[derive(Clone, Debug)]
pub struct Counterexample {
    /// The statement that fails there.
    pub goal: String,
    /// Every proof coordinate (errors as `Δx`), in problem order.
    pub coordinates: Vec<(String, f64)>,
    /// Every base symbol of the spec.
    pub point: Vec<(String, f64)>,
    /// The quantity the statement is about: `V`, `dV/dt`, `dV/dt + 2*rate*V`, or a
    /// condition's expression.
    pub quantity: String,
    /// Its value there (f64).
    pub value: f64,
    /// Its rigorous enclosure there.
    pub enclosure: Interval,
    /// V̇ there in f64 (None where the laws are not defined).
    pub vdot: Option<f64>,
    /// The goal's expression changes sign across this point (a `≠ 0` goal): it is provably
    /// positive and provably negative at two points a few ulps apart around it.
    pub sign_change: bool,
}

/// An actuator's command against its limits over the domain: proved to stay within them
/// (saturation-free), a point where it leaves them, or undecided; and the share of sampled
/// domain points where it leaves them.
#[derive(Clone, Debug)]
pub struct Saturation {
    /// Actuator.
    pub actuator: String,
    /// Declared limits (nearest f64).
    pub limits: (f64, f64),
    /// Share of samples outside the limits.
    pub share: f64,
    /// Range of the command seen in the samples.
    pub seen: (f64, f64),
    /// Samples.
    pub samples: usize,
    /// The goal `lo <= command <= hi`: proven (saturation-free over the domain), refuted (the
    /// command leaves its limits at a point), inconclusive, or skipped (not asked, or the
    /// laws are not defined everywhere).
    pub status: Status,
    /// Where it leaves its limits, in every symbol.
    pub point: Option<Counterexample>,
    /// Its expression in proof coordinates.
    pub text: String,
    /// The goal's search coordinates (problem indices).
    pub dims: Vec<usize>,
    /// Branch and bound.
    pub search: Option<Report>,
}

impl Saturation {
    /// The verdict's name in reports and JSON: `saturation-free`, `saturates`, `undecided`
    /// or `not checked`.
    pub fn verdict(&self) -> &'static str {
        match self.status {
            Status::Proven => "saturation-free",
            Status::Refuted(_) => "saturates",
            Status::Inconclusive(_) => "undecided",
            Status::Skipped => "not checked",
        }
    }
}

/// Everything `check` found.
#[derive(Debug)]
pub struct CheckReport {
    /// Spec name.
    pub name: String,
    /// The claim.
    pub claim: Claim,
    /// What the claim's goal bounds, as its statement reads (`dV/dt`, `dV/dt + 2*r*V`).
    pub quantity: String,
    /// Overall verdict.
    pub verdict: Verdict,
    /// Well-posedness: Some(true) proved, Some(false) refuted, None undecided.
    pub well_posed: Option<bool>,
    /// The proof domain.
    pub variables: Vec<Variable>,
    /// Constraints as written.
    pub constraints: Vec<String>,
    /// Every goal, in the order run: conditions, V > 0, the claim.
    pub goals: Vec<GoalResult>,
    /// The first failing goal's counterexample.
    pub counterexample: Option<Counterexample>,
    /// Saturation shares, per actuator.
    pub saturation: Vec<Saturation>,
    /// Smallest sampled normalised margin of the claim, `−f/‖ê‖²`.
    pub min_margin: Option<f64>,
    /// Boxes evaluated over all searches.
    pub boxes: usize,
    /// Wall time of the whole check.
    pub seconds: f64,
    /// For an ultimate-bound claim: the level, the bounds and their proofs.
    pub bound: Option<BoundReport>,
    /// What a proven claim implies, in plain words, with its assumptions and what it does not
    /// imply (for a law with controller states); empty otherwise.
    pub follows: Vec<String>,
    /// When asked (`Settings::rates`): the guidance rates that keep every actuator within its
    /// limits, or why they were not sought.
    pub rates: Option<Result<RateLimits, String>>,
    /// With `settings.roundoff`: the proved round-off bounds of the generated code, or why
    /// there is no code to bound.
    pub roundoff: Option<Result<crate::roundoff::RoundoffReport, String>>,
}

/// A check that could not run (the spec is unusable for a proof).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CheckError {
    /// What went wrong.
    pub message: String,
    /// The derivation's own error, located in the spec file, when that is where it failed.
    pub derive: Option<lawsmith_spec::DeriveError>,
}

impl CheckError {
    /// An error without a location in the spec.
    pub fn new(message: impl Into<String>) -> CheckError {
        CheckError {
            message: message.into(),
            derive: None,
        }
    }
}

impl From<lawsmith_spec::DeriveError> for CheckError {
    fn from(e: lawsmith_spec::DeriveError) -> CheckError {
        CheckError {
            message: e.to_string(),
            derive: Some(e),
        }
    }
}

impl std::fmt::Display for CheckError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for CheckError {}

/// Runs the whole check. `progress(label, boxes, open)` reports the searches.
pub fn check(
    spec: &mut Spec,
    settings: &Settings,
    progress: &(dyn Fn(&str, usize, usize) + Sync),
) -> Result<(CheckReport, Prepared), CheckError> {
    let start = Instant::now();
    spec.dag.set_limits(settings.dag.clone());
    let mut prepared = prepare(spec)?;
    let mut results = Vec::new();
    let mut failed = false;
    let mut boxes = 0;
    let mut bound = None;
    for (gi, pg) in prepared.goals.iter().enumerate() {
        let c = &pg.compiled;
        let g = &c.goal;
        let mut r = GoalResult {
            kind: pg.kind,
            label: g.label.clone(),
            source: pg.source.clone(),
            text: c.text.clone(),
            test: g.test,
            origin: g.origin,
            dims: c.dims.clone(),
            sampled: None,
            search: None,
            status: Status::Skipped,
        };
        // a condition is always decided (it is cheap); V and the claim only while nothing
        // failed, since V̇ was derived under the conditions
        if failed && pg.kind != GoalKind::Condition {
            results.push(r);
            continue;
        }
        let root = prepared.root(gi);
        if let (GoalKind::Claim, Strategy::Level { sublevel, required }) =
            (pg.kind, &prepared.strategy)
        {
            let b = ultimate_bound(
                &prepared.problem,
                c,
                &root,
                sublevel,
                &prepared.sublevel_root(),
                required,
                settings,
                &settings.bound,
                progress,
            );
            boxes += b.boxes;
            r.status = match &b.outcome {
                BoundOutcome::Proven => Status::Proven,
                BoundOutcome::Refuted(cx, _) => Status::Refuted(cx.clone()),
                BoundOutcome::Inconclusive(why) => Status::Inconclusive(why.clone()),
            };
            r.label = match (&b.outcome, b.level > 0.0 || !b.bounds.is_empty()) {
                (BoundOutcome::Proven, false) => "dV/dt < 0 wherever the error is not zero".into(),
                (_, true) => format!("dV/dt < 0 wherever V >= {:.4e}", b.level),
                _ => "dV/dt < 0 wherever V >= c, for a level c inside the error box".into(),
            };
            r.search = b.level_report.clone();
            bound = Some(b);
            results.push(r);
            continue;
        }
        let sampled = falsify(c, &root, settings.samples);
        if let Some(cx) = sampled.counter.clone() {
            r.status = Status::Refuted(cx);
        } else {
            let rep = search(c, &root, &settings.budget, &|b, o| progress(&g.label, b, o));
            boxes += rep.boxes;
            r.status = match &rep.outcome {
                Outcome::Proven => Status::Proven,
                Outcome::Refuted(cx) => Status::Refuted(cx.clone()),
                Outcome::Inconclusive(why) => Status::Inconclusive(why.clone()),
            };
            r.search = Some(rep);
        }
        r.sampled = Some(sampled);
        if matches!(r.status, Status::Refuted(_)) {
            failed = true;
        }
        results.push(r);
    }

    let cond_status: Vec<&Status> = results
        .iter()
        .filter(|r| r.kind == GoalKind::Condition)
        .map(|r| &r.status)
        .collect();
    let well_posed = if cond_status.iter().any(|s| matches!(s, Status::Refuted(_))) {
        Some(false)
    } else if cond_status.iter().all(|s| matches!(s, Status::Proven)) {
        Some(true)
    } else {
        None
    };
    let verdict = if results
        .iter()
        .any(|r| matches!(r.status, Status::Refuted(_)))
    {
        Verdict::Falsified
    } else if results.iter().all(|r| matches!(r.status, Status::Proven)) {
        Verdict::Proven
    } else {
        Verdict::Inconclusive
    };
    let counterexample = results
        .iter()
        .enumerate()
        .find_map(|(gi, r)| match &r.status {
            Status::Refuted(cx) => Some(prepared.counterexample(gi, cx)),
            _ => None,
        });
    let min_margin = results
        .iter()
        .find(|r| r.kind == GoalKind::Claim)
        .and_then(|r| r.sampled.as_ref())
        // + 0.0: a margin of −0 (V̇ = 0 where sampled) is 0
        .map(|s| s.min_margin + 0.0)
        .filter(|m| m.is_finite());
    let decide = settings.actuators && well_posed != Some(false);
    let saturation = saturation(&prepared, settings, decide, progress);
    boxes += saturation
        .iter()
        .filter_map(|a| a.search.as_ref())
        .map(|s| s.boxes)
        .sum::<usize>();
    let rates = settings.rates.as_ref().map(|within| {
        if verdict != Verdict::Proven {
            return Err(format!(
                "not sought: the claim is {}, and the set no trajectory leaves rests on it",
                verdict.name()
            ));
        }
        if matches!(prepared.strategy, Strategy::Level { .. }) {
            return Err(
                "not sought for an ultimate-bound claim: V decreases only above its level".into(),
            );
        }
        let mut r = rate_limits(&mut prepared, within, settings).map_err(|e| e.message)?;
        if matches!(r.outcome, crate::rates::RatesOutcome::Proven) {
            // a guidance filter that lets its rate beyond the proved range
            for g in &spec.guidance {
                let rate = spec.symbol(&g.reference).and_then(|s| match &s.decl {
                    lawsmith_spec::Decl::Reference { rate, .. } => Some(rate.clone()),
                    _ => None,
                });
                let Some(p) = rate.and_then(|q| r.rates.iter().find(|p| p.name == q)) else {
                    continue;
                };
                let (lo, hi) = g.rate_limit;
                if lo < p.proved.0 || hi > p.proved.1 {
                    r.warnings.push(format!(
                        "the guidance filter of `{}` limits its rate `{}` to [{lo}, {hi}], beyond the proved [{}, {}]",
                        g.reference,
                        p.name,
                        crate::report::sig_up(p.proved.0),
                        crate::report::sig_down(p.proved.1)
                    ));
                }
            }
        }
        Ok(r)
    });
    let roundoff = settings.roundoff.then(|| {
        let c = lawsmith_codegen::Controller::new(spec).map_err(|e| e.0)?;
        crate::roundoff::roundoff_report(&c, crate::roundoff::ROUNDOFF_LEAVES)
    });
    let report = CheckReport {
        name: spec.name.clone(),
        claim: spec.claim.clone(),
        quantity: prepared.quantity.clone(),
        verdict,
        well_posed,
        variables: prepared.problem.variables.clone(),
        constraints: prepared
            .problem
            .constraints
            .iter()
            .map(|c| c.text.clone())
            .collect(),
        goals: results,
        counterexample,
        saturation,
        min_margin,
        boxes,
        seconds: start.elapsed().as_secs_f64(),
        bound,
        follows: if verdict == Verdict::Proven {
            follows(spec)
        } else {
            Vec::new()
        },
        rates,
        roundoff,
    };
    Ok((report, prepared))
}

/// What a proven claim of a law with controller states implies, in plain words: the
/// standard Lyapunov arguments (LaSalle's invariance principle; Barbalat's lemma for the
/// adaptive case), with the assumptions they rest on and what they do not give.
fn follows(spec: &Spec) -> Vec<String> {
    let memory: Vec<(&str, Option<&str>)> = spec
        .symbols_of(lawsmith_spec::SymbolKind::Memory)
        .map(|s| match &s.decl {
            lawsmith_spec::Decl::Memory {
                settle: lawsmith_spec::Settle::Unknown(u),
                ..
            } => (s.name.as_str(), Some(u.as_str())),
            _ => (s.name.as_str(), None),
        })
        .collect();
    if memory.is_empty() {
        return Vec::new();
    }
    let names = |v: &[&str]| v.join(", ");
    let all: Vec<&str> = memory.iter().map(|(m, _)| *m).collect();
    let mut out = vec![
        "assumed: the trajectory stays in the proof domain (references, rates and signals in \
         their ranges, errors in their boxes); every unknown is constant; each controller \
         state is held at its limits when its update law points outward (proved not to \
         increase V)"
            .to_string(),
    ];
    match &spec.claim {
        lawsmith_spec::Claim::NegativeDefiniteIn(tracked) => {
            let t: Vec<&str> = tracked.iter().map(String::as_str).collect();
            out.push(format!(
                "V never increases, so the errors of every state and of {} stay bounded \
                 (within the sublevel set of V they start in)",
                names(&all)
            ));
            out.push(format!(
                "dV/dt <= -W(error of {}) with W positive definite: its integral over time is \
                 finite and the errors' rates are bounded, so the errors of {} converge to zero \
                 (Barbalat's lemma; LaSalle's invariance principle)",
                names(&t),
                names(&t)
            ));
            for (m, u) in &memory {
                if tracked.iter().any(|k| k == m) {
                    continue;
                }
                out.push(match u {
                    Some(u) => format!(
                        "not implied: {m} need not converge to {u}; it stays bounded, and \
                         converges only where the signals keep exciting it (persistent \
                         excitation)"
                    ),
                    None => format!(
                        "not implied: {m} need not settle at its equilibrium; it stays bounded"
                    ),
                });
            }
        }
        lawsmith_spec::Claim::NegativeDefinite | lawsmith_spec::Claim::Exponential(_) => {
            out.push(format!(
                "every error, those of {} included, converges to zero: the origin of the \
                 closed loop with its controller states is asymptotically stable",
                names(&all)
            ));
            for (m, u) in &memory {
                if let Some(u) = u {
                    out.push(format!("{m} converges to the unknown {u} it estimates"));
                }
            }
        }
        _ => {}
    }
    out
}

/// Per actuator: samples the whole domain (points meeting the constraints) and counts the
/// points where the command leaves its limits; then, when `decide`, proves the command within
/// its limits over the domain or finds a point where it leaves them (sampled, then branch and
/// bound, as every goal).
fn saturation(
    prepared: &Prepared,
    settings: &Settings,
    decide: bool,
    progress: &(dyn Fn(&str, usize, usize) + Sync),
) -> Vec<Saturation> {
    let (problem, forms, full) = (&prepared.problem, &prepared.forms, &prepared.full);
    let names: Vec<String> = problem.variables.iter().map(|v| v.name.clone()).collect();
    let refs: Vec<&str> = names.iter().map(String::as_str).collect();
    let root = problem.declared_box();
    let mut out = Vec::new();
    for (k, (ag, (_, e))) in prepared.actuators.iter().zip(&forms.actuators).enumerate() {
        let tape = Tape::compile(&problem.dag, &[*e], &refs).ok();
        let limits = ag.limits.nearest();
        let (mut outside, mut n) = (0usize, 0usize);
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        let mut scratch = Vec::new();
        let seq = Sequence::new(root.len());
        for i in (1..=settings.samples as u64).filter(|_| tape.is_some()) {
            let x = seq.point(i, &root);
            if !full.feasible(&x) {
                continue;
            }
            let mut o = [0.0];
            if let Some(t) = &tape {
                t.eval_into(&x, &mut scratch, &mut o);
            }
            let v = o[0];
            n += 1;
            lo = lo.min(v);
            hi = hi.max(v);
            if !(limits.0..=limits.1).contains(&v) {
                outside += 1;
            }
        }
        let c = &ag.compiled;
        let (status, search) = if decide {
            decide_limits(prepared, k, settings, progress)
        } else {
            (Status::Skipped, None)
        };
        out.push(Saturation {
            actuator: ag.actuator.clone(),
            limits,
            share: if n > 0 {
                outside as f64 / n as f64
            } else {
                0.0
            },
            seen: (lo, hi),
            samples: n,
            point: match &status {
                Status::Refuted(cx) => Some(prepared.saturation_point(k, cx)),
                _ => None,
            },
            status,
            text: c.text.clone(),
            dims: c.dims.clone(),
            search,
        });
    }
    out
}

/// Decides actuator `k`'s goal. A point is a counterexample only where the command's
/// enclosure lies outside the declared limits themselves, not just outside the test's f64
/// ends inside them.
fn decide_limits(
    prepared: &Prepared,
    k: usize,
    settings: &Settings,
    progress: &(dyn Fn(&str, usize, usize) + Sync),
) -> (Status, Option<Report>) {
    let ag = &prepared.actuators[k];
    let c = &ag.compiled;
    let root = prepared.actuator_root(k);
    let confirmed = |cx: Counter| {
        if ag.outside(cx.enclosure) {
            Status::Refuted(cx)
        } else {
            Status::Inconclusive(format!(
                "`{}` reaches its limit within rounding at one point",
                ag.actuator
            ))
        }
    };
    if let Some(cx) = falsify(c, &root, settings.samples).counter {
        return (confirmed(cx), None);
    }
    let label = &c.goal.label;
    let rep = search(c, &root, &settings.budget, &|b, o| progress(label, b, o));
    let status = match &rep.outcome {
        Outcome::Proven => Status::Proven,
        Outcome::Refuted(cx) => confirmed(cx.clone()),
        Outcome::Inconclusive(why) => Status::Inconclusive(why.clone()),
    };
    (status, Some(rep))
}
