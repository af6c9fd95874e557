//! A spec turned into goals: the proof domain, the well-posedness conditions, V > 0 and the
//! claim's goal with its strategy, compiled; and counterexamples shown in every symbol.

use crate::check::{CheckError, Counterexample, GoalKind};
use crate::conditions;
use crate::goal::{Compiled, Goal, Test};
use crate::interval::Interval;
use crate::plan::{Plan, Strategy};
use crate::problem::{Problem, ProofForms};
use crate::sample::Sequence;
use crate::search::Counter;
use lawsmith_expr::{Arith, Tape};
use lawsmith_spec::{derive, Claim, Range, Spec};

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
pub(crate) struct FullTapes {
    constraints: Vec<(Tape, bool)>,
    vdot: Tape,
}

impl FullTapes {
    pub(crate) fn feasible(&self, x: &[f64]) -> bool {
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

/// A controller state's limit goal: the state, the limit, the quantity the goal's expression
/// is (see [`PreparedGoal::face`]).
type Face = (String, f64, String);

/// For each controller state, the goals that make its limits harmless to the claim: at the
/// upper limit `∂V/∂ξ ≥ 0` (goal `−∂V/∂ξ ≤ 0` with ξ there), at the lower `∂V/∂ξ ≤ 0`. Where
/// the generated code holds ξ at a limit against its update law `u` (which points outward),
/// V̇ loses the term `∂V/∂ξ·u ≥ 0`, so V̇ is no larger than the unlimited V̇ the claim is
/// proved of, and every claim (a sign, a rate, a level) still holds.
fn projections(
    spec: &Spec,
    problem: &mut Problem,
    d: &lawsmith_spec::Derivation,
) -> Vec<(GoalKind, String, Goal, Option<Face>)> {
    let mut out = Vec::new();
    for s in spec.symbols_of(lawsmith_spec::SymbolKind::Memory) {
        let lawsmith_spec::Decl::Memory { limits, .. } = &s.decl else {
            continue;
        };
        let m = &s.name;
        let dv = lawsmith_expr::derivative(&mut problem.dag, d.candidate, m);
        for (end, upper) in [(&limits.hi, true), (&limits.lo, false)] {
            let at = problem.dag.num(end.exact().clone());
            let on_face = problem
                .dag
                .substitute(dv, &std::iter::once((m.clone(), at)).collect());
            let e = if upper {
                problem.dag.neg(on_face)
            } else {
                on_face
            };
            let (expr, _) = problem.express(e);
            let (side, sign) = if upper {
                ("upper", ">=")
            } else {
                ("lower", "<=")
            };
            out.push((
                GoalKind::Projection,
                format!("the limits of `{m}`"),
                Goal {
                    label: format!(
                        "dV/d({m}) {sign} 0 where {m} is at its {side} limit {}",
                        end.value()
                    ),
                    expr,
                    test: Test::Negative { strict: false },
                    origin: false,
                    exempt: None,
                    region: None,
                },
                Some((
                    m.clone(),
                    end.value(),
                    format!("{}dV/d({m})", if upper { "-" } else { "" }),
                )),
            ));
        }
    }
    out
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
    /// For a controller state's limit goal: the state, the limit it is asked at (its
    /// coordinate is not the goal's; a counterexample shows the state there), and the
    /// quantity the goal's expression is (`-dV/d(xi)` at an upper limit).
    pub face: Option<Face>,
}

/// An actuator's command within its limits, as a goal: `lo <= command <= hi` over the whole
/// domain, its test the largest f64 interval inside the exact limits (so a proof holds of the
/// declared limits; a point outside the test's ends but not outside the limits is no
/// counterexample, see [`ActuatorGoal::outside`]).
#[derive(Debug)]
pub struct ActuatorGoal {
    /// The actuator.
    pub actuator: String,
    /// Its limits as declared.
    pub limits: Range,
    /// The goal, compiled.
    pub compiled: Compiled,
}

impl ActuatorGoal {
    /// Does this enclosure of the command lie wholly outside the declared limits (the
    /// smallest f64 interval holding them)?
    pub fn outside(&self, f: Interval) -> bool {
        let (lo, hi) = self.limits.outward();
        !f.is_empty() && (f.hi() < lo || f.lo() > hi)
    }
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
    /// What the claim's goal bounds, as its statement reads (`dV/dt`, `dV/dt + 2*r*V`).
    pub quantity: String,
    /// How the claim's goal is decided.
    pub strategy: Strategy,
    /// Per actuator, in the spec's order: its command within its limits.
    pub actuators: Vec<ActuatorGoal>,
    /// V̇ of the law as flown (each command clamped to its limits) in base symbols (in the
    /// problem's arena; [`Problem::express_plain`] puts it in proof coordinates), or why the
    /// law cannot be saturated that way.
    pub saturated: Result<lawsmith_expr::ExprId, String>,
    pub(crate) full: FullTapes,
}

/// Derives V̇ and builds every goal of a spec: the well-posedness conditions (the laws' and
/// actuators' functions and divisions, those of V and V̇, and every side condition the
/// simplifier assumed), V > 0, and the claim.
pub fn prepare(spec: &mut Spec) -> Result<Prepared, CheckError> {
    let derivation = derive(spec).map_err(CheckError::from)?;
    // V̇ of the saturated law, formed before the problem copies the spec's arena
    let saturated = lawsmith_spec::saturated_vdot(spec);
    let mut problem = Problem::new(spec);
    let forms = problem.forms(&derivation);

    let mut goals: Vec<(GoalKind, String, Goal)> =
        conditions::goals(&mut problem, &derivation, &forms)
            .into_iter()
            .map(|(source, g)| (GoalKind::Condition, source, g))
            .collect();
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
            exempt: None,
            region: None,
        },
    ));
    let mut faces: Vec<Option<Face>> = vec![None; goals.len()];
    for (kind, source, goal, face) in projections(spec, &mut problem, &derivation) {
        goals.push((kind, source, goal));
        faces.push(face);
    }
    let plan = Plan::of(&mut problem, &forms, &spec.claim);
    goals.push((GoalKind::Claim, "the claim".into(), plan.goal.clone()));

    faces.resize(goals.len(), None);
    let mut prepared_goals = Vec::new();
    for ((kind, source, g), face) in goals.into_iter().zip(faces) {
        prepared_goals.push(PreparedGoal {
            kind,
            source,
            compiled: Compiled::new(&mut problem, g).map_err(CheckError::new)?,
            face,
        });
    }
    let strategy = plan.strategy(&mut problem)?;
    let mut actuators = Vec::new();
    for (a, (_, e)) in spec.actuators.iter().zip(&forms.actuators) {
        let (lo, hi) = a.limits.inward();
        let goal = Goal {
            label: format!(
                "{} <= {} <= {}",
                a.limits.lo.value(),
                a.name,
                a.limits.hi.value()
            ),
            expr: *e,
            test: Test::Within { lo, hi },
            origin: false,
            exempt: None,
            region: None,
        };
        actuators.push(ActuatorGoal {
            actuator: a.name.clone(),
            limits: a.limits.clone(),
            compiled: Compiled::new(&mut problem, goal).map_err(CheckError::new)?,
        });
    }
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
        claim: spec.claim.clone(),
        quantity: plan.quantity,
        strategy,
        actuators,
        full,
        saturated,
    })
}

impl Prepared {
    /// The root box of a goal.
    pub fn root(&self, goal: usize) -> Vec<Interval> {
        root_of(&self.problem, &self.goals[goal].compiled.dims)
    }

    /// The root box of actuator `k`'s goal.
    pub fn actuator_root(&self, k: usize) -> Vec<Interval> {
        root_of(&self.problem, &self.actuators[k].compiled.dims)
    }

    /// The goal `V > level` of a level strategy (its test is set per proof).
    pub fn sublevel(&self) -> Option<&Compiled> {
        match &self.strategy {
            Strategy::Level { sublevel, .. } => Some(sublevel),
            Strategy::Direct => None,
        }
    }

    /// The required bounds of a level strategy (state, bound); empty otherwise.
    pub fn required(&self) -> &[(String, f64)] {
        match &self.strategy {
            Strategy::Level { required, .. } => required,
            Strategy::Direct => &[],
        }
    }

    /// The root box of the sublevel goal (empty without one).
    pub fn sublevel_root(&self) -> Vec<Interval> {
        self.sublevel()
            .map_or(Vec::new(), |g| root_of(&self.problem, &g.dims))
    }

    /// Index of the claim's goal.
    pub fn claim_index(&self) -> Option<usize> {
        self.goals.iter().position(|g| g.kind == GoalKind::Claim)
    }

    /// A counterexample of goal `goal` at `point` (over its dims) in every symbol.
    pub fn counterexample(&self, goal: usize, cx: &Counter) -> Counterexample {
        let g = &self.goals[goal];
        let mut out = self.counterexample_of(&g.compiled, Some(g.kind), cx);
        if let Some((m, limit, quantity)) = &g.face {
            out.quantity = quantity.clone();
            // the goal holds the state at its limit: show it there
            if let Some((_, v)) = out.point.iter_mut().find(|(n, _)| n == m) {
                *v = *limit;
            }
            let delta = crate::problem::error_name(m);
            if let Some(at) = self.problem.memory_error_at(m, *limit, &out.coordinates) {
                if let Some((_, v)) = out.coordinates.iter_mut().find(|(n, _)| *n == delta) {
                    *v = at;
                }
            }
        }
        out
    }

    /// A point where actuator `k`'s command leaves its limits, in every symbol.
    pub fn saturation_point(&self, k: usize, cx: &Counter) -> Counterexample {
        self.counterexample_of(&self.actuators[k].compiled, None, cx)
    }

    /// A counterexample of an actuator's goal compiled elsewhere (over a sublevel set), in
    /// every symbol.
    pub(crate) fn counterexample_of_goal(&self, c: &Compiled, cx: &Counter) -> Counterexample {
        self.counterexample_of(c, None, cx)
    }

    /// A counterexample of a compiled goal of this kind (None: an actuator's limits).
    fn counterexample_of(
        &self,
        c: &Compiled,
        kind: Option<GoalKind>,
        cx: &Counter,
    ) -> Counterexample {
        let x = complete(&self.problem, &self.full, &c.dims, &cx.point);
        // goals are stated as `f < 0`; show the quantity as the statement reads
        let (quantity, sign) = match (kind, c.goal.test) {
            (Some(GoalKind::Positive), _) => ("V".to_string(), -1.0),
            (Some(GoalKind::Projection), _) => ("the expression".to_string(), 1.0),
            (Some(GoalKind::Claim), _) => (self.quantity.clone(), 1.0),
            (Some(GoalKind::Condition), Test::Negative { .. }) => {
                ("the expression".to_string(), -1.0)
            }
            (Some(GoalKind::Condition), _) => ("the expression".to_string(), 1.0),
            (None, _) => ("the command".to_string(), 1.0),
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
            vdot: (kind != Some(GoalKind::Condition) && o[0].is_finite()).then_some(o[0]),
            sign_change: cx.bracket.is_some(),
        }
    }
}
