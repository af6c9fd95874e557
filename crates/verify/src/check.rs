//! `check`: well-posedness, V positive definite, and the claim, each falsified by sampling and
//! then proved by branch and bound; plus the actuator saturation shares.

use crate::bound::{ultimate_bound, BoundOutcome, BoundReport, BoundSettings};
use crate::goal::{Compiled, Goal, Test};
use crate::interval::Interval;
use crate::problem::{Problem, ProofForms, Variable};
use crate::sample::{falsify, Sampled, Sequence};
use crate::search::{search, Budget, Counter, Outcome, Report};
use lawsmith_expr::Arith;
use lawsmith_expr::{
    to_text, BigRational, CondKind, Dag, DagLimits, Decimal, ExprId, Func, Node, Tape,
};
use lawsmith_spec::{derive, Claim, Spec};
use std::collections::HashSet;
use std::time::Instant;

/// Settings of a check. Every limit is explicit.
#[derive(Clone, Debug)]
pub struct Settings {
    /// Low-discrepancy samples per goal for the falsifier (`--samples`).
    pub samples: usize,
    /// Limits of each branch-and-bound search.
    pub budget: Budget,
    /// Tolerances of an ultimate-bound claim's bisections.
    pub bound: BoundSettings,
    /// Limits of the symbolic work (`--max-nodes`, `--max-term-products`), applied to the
    /// spec's DAG before the derivation.
    pub dag: DagLimits,
}

impl Default for Settings {
    fn default() -> Self {
        // 20,000 samples take milliseconds per goal and reliably find the counterexamples of
        // the mutation tests; the proof does not depend on them
        Settings {
            samples: 20_000,
            budget: Budget::default(),
            bound: BoundSettings::default(),
            dag: DagLimits::default(),
        }
    }
}

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
    /// The Lyapunov claim.
    Claim,
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

/// Share of the domain where an actuator command leaves its limits.
#[derive(Clone, Debug)]
pub struct Saturation {
    /// Actuator.
    pub actuator: String,
    /// Declared limits.
    pub limits: (f64, f64),
    /// Share of samples outside the limits.
    pub share: f64,
    /// Range of the command seen in the samples.
    pub seen: (f64, f64),
    /// Samples.
    pub samples: usize,
}

/// Everything `check` found.
#[derive(Debug)]
pub struct CheckReport {
    /// Spec name.
    pub name: String,
    /// The claim.
    pub claim: Claim,
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

/// A well-posedness condition before it becomes a goal.
struct Cond {
    kind: CondKind,
    expr: ExprId,
    in_proof: bool,
    source: String,
}

/// Collects the domain conditions of every function and division in `e`: a function with a
/// pole or an undefined point gets the condition that keeps its argument away from it.
fn conditions_of(dag: &mut Dag, e: ExprId, source: &str, out: &mut Vec<Cond>) {
    let mut stack = vec![e];
    let mut seen = HashSet::new();
    while let Some(id) = stack.pop() {
        if !seen.insert(id) {
            continue;
        }
        let node = dag.node(id).clone();
        let zero = BigRational::from_integer(0.into());
        let cond = match &node {
            Node::Div(_, b) => Some((CondKind::NonZero, *b)),
            Node::Pow(a, b) => match dag.as_num(*b) {
                Some(k) if k.is_integer() => (k < &zero).then_some((CondKind::NonZero, *a)),
                Some(k) if k > &zero => Some((CondKind::NonNegative, *a)),
                _ => Some((CondKind::Positive, *a)),
            },
            Node::Call(Func::Asin | Func::Acos, xs) => Some((CondKind::UnitInterval, xs[0])),
            Node::Call(Func::Sqrt, xs) => Some((CondKind::NonNegative, xs[0])),
            Node::Call(Func::Ln, xs) => Some((CondKind::Positive, xs[0])),
            // tan has its poles where cos vanishes
            Node::Call(Func::Tan, xs) => {
                Some((CondKind::NonZero, dag.call(Func::Cos, vec![xs[0]])))
            }
            // atan2(y, x) is undefined at y = x = 0 and jumps by 2π across the half-line
            // y = 0, x < 0; off that closed half-line, and only there, sqrt(x^2 + y^2) + x > 0
            // (the half-angle form 2*atan(y/(sqrt(x^2 + y^2) + x)) of atan2). The closed loop,
            // and the mean-value forms of the proof, need a continuous law.
            Node::Call(Func::Atan2, xs) => {
                let (y, x) = (xs[0], xs[1]);
                let (x2, y2) = (dag.powi(x, 2), dag.powi(y, 2));
                let r2 = dag.add(vec![x2, y2]);
                let r = dag.call(Func::Sqrt, vec![r2]);
                Some((CondKind::Positive, dag.add(vec![r, x])))
            }
            _ => None,
        };
        if let Some((kind, expr)) = cond {
            out.push(Cond {
                kind,
                expr,
                in_proof: false,
                source: source.to_string(),
            });
        }
        stack.extend(node.children_vec());
    }
}

fn condition_goal(problem: &mut Problem, c: &Cond) -> (Goal, Vec<Cond>) {
    let (u, assumed) = if c.in_proof {
        problem.simplify(c.expr)
    } else {
        problem.express(c.expr)
    };
    let text = |p: &Problem, e| to_text(&p.dag, e);
    let (label, expr, test) = match c.kind {
        CondKind::UnitInterval => (
            format!("-1 <= {} <= 1", text(problem, u)),
            u,
            Test::Within { lo: -1.0, hi: 1.0 },
        ),
        CondKind::NonZero => (format!("{} != 0", text(problem, u)), u, Test::NonZero),
        CondKind::Positive | CondKind::NonNegative => {
            let neg = problem.dag.neg(u);
            let (nu, _) = problem.simplify(neg);
            let strict = c.kind == CondKind::Positive;
            let op = if strict { ">" } else { ">=" };
            (
                format!("{} {op} 0", text(problem, u)),
                nu,
                Test::Negative { strict },
            )
        }
    };
    let more = assumed
        .into_iter()
        .map(|(rule, k)| Cond {
            kind: k.kind,
            expr: k.expr,
            in_proof: true,
            source: format!("assumed by the simplifier ({rule})"),
        })
        .collect();
    (
        Goal {
            label,
            expr,
            test,
            origin: false,
            region: None,
        },
        more,
    )
}

/// A full point of the domain: `dims` from `point`, every other coordinate from the first
/// low-discrepancy point of the domain that meets every constraint (midpoints if none does).
fn complete(problem: &Problem, all: &FullTapes, dims: &[usize], point: &[f64]) -> Vec<f64> {
    let root = problem.declared_box();
    let fill = |mut x: Vec<f64>| {
        for (k, &d) in dims.iter().enumerate() {
            x[d] = point[k];
        }
        x
    };
    let seq = Sequence::new(root.len());
    for i in 1..=4096u64 {
        let x = fill(seq.point(i, &root));
        if all.feasible(&x) {
            return x;
        }
    }
    fill(root.iter().map(Interval::mid).collect())
}

/// Tapes over every coordinate: the constraints and V̇.
#[derive(Debug)]
struct FullTapes {
    constraints: Vec<(Tape, bool)>,
    vdot: Tape,
}

impl FullTapes {
    fn feasible(&self, x: &[f64]) -> bool {
        let mut scratch = Vec::new();
        self.constraints.iter().all(|(t, strict)| {
            let mut o = [0.0];
            t.eval_into(x, &mut scratch, &mut o);
            if *strict {
                o[0] < 0.0
            } else {
                o[0] <= 0.0
            }
        })
    }
}

fn root_of(problem: &Problem, dims: &[usize]) -> Vec<Interval> {
    dims.iter()
        .map(|&i| Interval::new(problem.variables[i].lo, problem.variables[i].hi))
        .collect()
}

/// The claim as a goal: the expression that must be negative and how.
fn claim_goal(problem: &mut Problem, forms: &ProofForms, claim: Claim) -> Goal {
    match claim {
        Claim::NegativeDefinite => Goal {
            label: "dV/dt < 0 wherever the error is not zero".into(),
            expr: forms.vdot,
            test: Test::Negative { strict: true },
            origin: true,
            region: None,
        },
        Claim::NegativeSemidefinite => Goal {
            label: "dV/dt <= 0".into(),
            expr: forms.vdot,
            test: Test::Negative { strict: false },
            origin: true,
            region: None,
        },
        Claim::UltimateBound => Goal {
            label: "dV/dt < 0 wherever V >= c".into(),
            expr: forms.vdot,
            test: Test::Negative { strict: true },
            origin: true,
            region: Some(forms.candidate),
        },
        Claim::Exponential(rate) => {
            let two_rate = Decimal::from_f64(rate).exact() * BigRational::from_integer(2.into());
            let c = problem.dag.num(two_rate);
            let scaled = problem.dag.mul(vec![c, forms.candidate]);
            let sum = problem.dag.add(vec![forms.vdot, scaled]);
            let (expr, _) = problem.simplify(sum);
            Goal {
                label: format!("dV/dt <= -2*{rate}*V"),
                expr,
                test: Test::Negative { strict: false },
                origin: true,
                region: None,
            }
        }
    }
}

/// One goal of a prepared check.
#[derive(Debug)]
pub struct PreparedGoal {
    /// What it is about.
    pub kind: GoalKind,
    /// Where it comes from.
    pub source: String,
    /// The goal, compiled.
    pub compiled: Compiled,
}

/// A spec turned into goals, ready to be sampled and searched (by [`check`]) or to have a
/// certificate's leaves re-evaluated (by [`crate::recheck`]).
#[derive(Debug)]
pub struct Prepared {
    /// The proof domain and the expressions.
    pub problem: Problem,
    /// V, V̇, laws and actuators in proof coordinates.
    pub forms: ProofForms,
    /// Every goal, in order: conditions, V > 0, the claim.
    pub goals: Vec<PreparedGoal>,
    /// The claim.
    pub claim: Claim,
    /// For an ultimate-bound claim: the goal `V > level` over V's coordinates (its test is
    /// set per proof), and the required bounds.
    pub sublevel: Option<Compiled>,
    /// Required bounds of an ultimate-bound claim (state, bound).
    pub required: Vec<(String, f64)>,
    full: FullTapes,
}

/// Derives V̇ and builds every goal of a spec: the well-posedness conditions (the laws' and
/// actuators' functions and divisions, those of V and V̇, and every side condition the
/// simplifier assumed), V > 0, and the claim.
pub fn prepare(spec: &mut Spec) -> Result<Prepared, CheckError> {
    let derivation = derive(spec).map_err(CheckError::from)?;
    let mut problem = Problem::new(spec);
    let forms = problem.forms(&derivation);

    let mut conds = Vec::new();
    for (n, e) in &derivation.laws {
        conditions_of(&mut problem.dag, *e, &format!("law `{n}`"), &mut conds);
    }
    for (n, e) in &derivation.actuators {
        conditions_of(&mut problem.dag, *e, &format!("actuator `{n}`"), &mut conds);
    }
    conditions_of(&mut problem.dag, derivation.candidate, "V", &mut conds);
    conditions_of(&mut problem.dag, derivation.vdot, "dV/dt", &mut conds);
    // the plant model closed with the laws must be defined wherever the proof looks
    for (n, e) in &derivation.closed_loop {
        conditions_of(
            &mut problem.dag,
            *e,
            &format!("dynamics of `{n}`"),
            &mut conds,
        );
    }
    for (rule, c) in &derivation.assumptions {
        conds.push(Cond {
            kind: c.kind,
            expr: c.expr,
            in_proof: false,
            source: format!("assumed by the simplifier ({rule})"),
        });
    }
    for (rule, c) in &forms.assumed {
        conds.push(Cond {
            kind: c.kind,
            expr: c.expr,
            in_proof: true,
            source: format!("assumed by the simplifier ({rule})"),
        });
    }

    let mut goals: Vec<(GoalKind, String, Goal)> = Vec::new();
    let mut seen: HashSet<(String, ExprId)> = HashSet::new();
    let mut i = 0;
    while i < conds.len() {
        let (g, more) = condition_goal(&mut problem, &conds[i]);
        if seen.insert((format!("{:?}", g.test), g.expr)) {
            goals.push((GoalKind::Condition, conds[i].source.clone(), g));
        }
        conds.extend(more);
        i += 1;
    }
    let neg_v = problem.dag.neg(forms.candidate);
    let (neg_v, _) = problem.simplify(neg_v);
    goals.push((
        GoalKind::Positive,
        "the Lyapunov candidate".into(),
        Goal {
            label: "V > 0 wherever the error is not zero".into(),
            expr: neg_v,
            test: Test::Negative { strict: true },
            origin: true,
            region: None,
        },
    ));
    let cg = claim_goal(&mut problem, &forms, spec.claim);
    goals.push((GoalKind::Claim, "the claim".into(), cg));

    let mut prepared_goals = Vec::new();
    for (kind, source, g) in goals {
        prepared_goals.push(PreparedGoal {
            kind,
            source,
            compiled: Compiled::new(&mut problem, g).map_err(CheckError::new)?,
        });
    }
    let sublevel = match spec.claim {
        Claim::UltimateBound => Some(
            Compiled::new(
                &mut problem,
                Goal {
                    label: "V > c".into(),
                    expr: forms.candidate,
                    test: Test::Within {
                        lo: 0.0,
                        hi: f64::INFINITY,
                    },
                    origin: false,
                    region: None,
                },
            )
            .map_err(CheckError::new)?,
        ),
        _ => None,
    };
    let names: Vec<String> = problem.variables.iter().map(|v| v.name.clone()).collect();
    let name_refs: Vec<&str> = names.iter().map(String::as_str).collect();
    let full = FullTapes {
        constraints: problem
            .constraints
            .iter()
            .map(|c| Ok((Tape::compile(&problem.dag, &[c.g], &name_refs)?, c.strict)))
            .collect::<Result<_, String>>()
            .map_err(CheckError::new)?,
        vdot: Tape::compile(&problem.dag, &[forms.vdot], &name_refs).map_err(CheckError::new)?,
    };
    Ok(Prepared {
        problem,
        forms,
        goals: prepared_goals,
        claim: spec.claim,
        sublevel,
        required: spec.required_bounds.clone(),
        full,
    })
}

impl Prepared {
    /// The root box of a goal.
    pub fn root(&self, goal: usize) -> Vec<Interval> {
        root_of(&self.problem, &self.goals[goal].compiled.dims)
    }

    /// The root box of the sublevel goal (empty without one).
    pub fn sublevel_root(&self) -> Vec<Interval> {
        self.sublevel
            .as_ref()
            .map_or(Vec::new(), |g| root_of(&self.problem, &g.dims))
    }

    /// Index of the claim's goal.
    pub fn claim_index(&self) -> Option<usize> {
        self.goals.iter().position(|g| g.kind == GoalKind::Claim)
    }

    /// A counterexample of goal `goal` at `point` (over its dims) in every symbol.
    pub fn counterexample(&self, goal: usize, cx: &Counter) -> Counterexample {
        let c = &self.goals[goal].compiled;
        let x = complete(&self.problem, &self.full, &c.dims, &cx.point);
        // goals are stated as `f < 0`; show the quantity as the statement reads
        let (quantity, sign) = match (self.goals[goal].kind, c.goal.test) {
            (GoalKind::Positive, _) => ("V".to_string(), -1.0),
            (GoalKind::Claim, _) => match self.claim {
                Claim::Exponential(r) => (format!("dV/dt + 2*{r}*V"), 1.0),
                _ => ("dV/dt".to_string(), 1.0),
            },
            (GoalKind::Condition, Test::Negative { .. }) => ("the expression".to_string(), -1.0),
            (GoalKind::Condition, _) => ("the expression".to_string(), 1.0),
        };
        let mut scratch = Vec::new();
        let mut o = [0.0];
        self.full.vdot.eval_into(&x, &mut scratch, &mut o);
        Counterexample {
            goal: c.goal.label.clone(),
            coordinates: self
                .problem
                .variables
                .iter()
                .map(|v| v.name.clone())
                .zip(x.iter().copied())
                .collect(),
            point: self.problem.base_values(&x),
            quantity,
            value: sign * cx.value,
            enclosure: if sign < 0.0 {
                cx.enclosure.neg()
            } else {
                cx.enclosure
            },
            // V̇ was simplified assuming the conditions: where one fails it means nothing
            vdot: (self.goals[goal].kind != GoalKind::Condition && o[0].is_finite())
                .then_some(o[0]),
            sign_change: cx.bracket.is_some(),
        }
    }
}

/// Runs the whole check. `progress(label, boxes, open)` reports the searches.
pub fn check(
    spec: &mut Spec,
    settings: &Settings,
    progress: &(dyn Fn(&str, usize, usize) + Sync),
) -> Result<(CheckReport, Prepared), CheckError> {
    let start = Instant::now();
    spec.dag.set_limits(settings.dag.clone());
    let prepared = prepare(spec)?;
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
        if let (GoalKind::Claim, Some(sub)) = (pg.kind, &prepared.sublevel) {
            let b = ultimate_bound(
                &prepared.problem,
                c,
                &root,
                sub,
                &prepared.sublevel_root(),
                &prepared.required,
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
        .map(|s| s.min_margin)
        .filter(|m| m.is_finite());
    let saturation = saturation(&prepared, spec, settings.samples);
    let report = CheckReport {
        name: spec.name.clone(),
        claim: spec.claim,
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
    };
    Ok((report, prepared))
}

/// Samples the whole domain (points meeting the constraints) and counts, per actuator, the
/// points where the command leaves its limits.
fn saturation(prepared: &Prepared, spec: &Spec, samples: usize) -> Vec<Saturation> {
    let (problem, forms, full) = (&prepared.problem, &prepared.forms, &prepared.full);
    let names: Vec<String> = problem.variables.iter().map(|v| v.name.clone()).collect();
    let refs: Vec<&str> = names.iter().map(String::as_str).collect();
    let root = problem.declared_box();
    let mut out = Vec::new();
    for (a, (name, e)) in spec.actuators.iter().zip(&forms.actuators) {
        let Ok(tape) = Tape::compile(&problem.dag, &[*e], &refs) else {
            continue;
        };
        let (mut outside, mut n) = (0usize, 0usize);
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        let mut scratch = Vec::new();
        let seq = Sequence::new(root.len());
        for i in 1..=samples as u64 {
            let x = seq.point(i, &root);
            if !full.feasible(&x) {
                continue;
            }
            let mut o = [0.0];
            tape.eval_into(&x, &mut scratch, &mut o);
            let v = o[0];
            n += 1;
            lo = lo.min(v);
            hi = hi.max(v);
            if !(a.limits.0..=a.limits.1).contains(&v) {
                outside += 1;
            }
        }
        out.push(Saturation {
            actuator: name.clone(),
            limits: a.limits,
            share: if n > 0 {
                outside as f64 / n as f64
            } else {
                0.0
            },
            seen: (lo, hi),
            samples: n,
        });
    }
    out
}
