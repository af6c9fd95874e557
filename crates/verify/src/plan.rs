//! Claims as plans: each claim of a spec becomes the goal it asks of V̇ and the strategy that
//! decides it. A new claim is one variant of [`lawsmith_spec::Claim`] and one arm of
//! [`Plan::of`] (and, if no strategy fits, one variant of [`Strategy`]); `check`, the report,
//! the certificate and `margin` follow the strategy, never the claim.

use crate::check::CheckError;
use crate::goal::{Compiled, Goal, Test};
use crate::problem::{Problem, ProofForms};
use lawsmith_expr::{BigRational, Decimal, ExprId};
use lawsmith_spec::Claim;

/// How a claim's goal is decided.
#[derive(Debug)]
pub enum Strategy {
    /// Sampled, then proved by branch and bound, as it stands.
    Direct,
    /// "V̇ < 0 wherever V ≥ c": bisect the level `c`, prove the region of attraction and each
    /// error's bound on {V ≤ c} by sublevel proofs, and meet the required bounds.
    Level {
        /// The goal `V > level` over V's coordinates (its test is set per proof).
        sublevel: Box<Compiled>,
        /// Required bounds (state, largest |error|), empty for `auto`.
        required: Vec<(String, f64)>,
    },
}

/// A claim as a goal and a way to decide it.
#[derive(Debug, Clone)]
pub struct Plan {
    /// The goal the claim asks of V̇.
    pub goal: Goal,
    /// What the goal bounds, as its statement reads.
    pub quantity: String,
    /// For a level strategy: V and the required bounds.
    level: Option<(ExprId, Vec<(String, f64)>)>,
}

impl Plan {
    /// The plan of a claim.
    pub fn of(problem: &mut Problem, forms: &ProofForms, claim: &Claim) -> Plan {
        let direct = |goal: Goal| Plan {
            goal,
            quantity: "dV/dt".into(),
            level: None,
        };
        let negative = |label: &str, strict: bool, region: Option<ExprId>| Goal {
            label: label.into(),
            expr: forms.vdot,
            test: Test::Negative { strict },
            origin: true,
            exempt: None,
            region,
        };
        match claim {
            Claim::NegativeDefinite => direct(negative(
                "dV/dt < 0 wherever the error is not zero",
                true,
                None,
            )),
            Claim::NegativeSemidefinite => direct(negative("dV/dt <= 0", false, None)),
            Claim::NegativeDefiniteIn(names) => {
                let which = names.join(" or ");
                let label = format!("dV/dt < 0 wherever the error of {which} is not zero");
                let mut goal = negative(&label, true, None);
                goal.exempt = Some(problem.errors_of(names));
                direct(goal)
            }
            Claim::UltimateBound { required } => Plan {
                goal: negative("dV/dt < 0 wherever V >= c", true, Some(forms.candidate)),
                quantity: "dV/dt".into(),
                level: Some((forms.candidate, required.clone())),
            },
            Claim::Exponential(rate) => {
                let two_rate =
                    Decimal::from_f64(*rate).exact() * BigRational::from_integer(2.into());
                let c = problem.dag.num(two_rate);
                let scaled = problem.dag.mul(vec![c, forms.candidate]);
                let sum = problem.dag.add(vec![forms.vdot, scaled]);
                let (expr, _) = problem.simplify(sum);
                Plan {
                    goal: Goal {
                        label: format!("dV/dt <= -2*{rate}*V"),
                        expr,
                        test: Test::Negative { strict: false },
                        origin: true,
                        exempt: None,
                        region: None,
                    },
                    quantity: format!("dV/dt + 2*{rate}*V"),
                    level: None,
                }
            }
        }
    }

    /// The strategy, its goals compiled (after the claim's goal, so the proof's expressions
    /// are built in a fixed order).
    pub fn strategy(&self, problem: &mut Problem) -> Result<Strategy, CheckError> {
        let Some((candidate, required)) = &self.level else {
            return Ok(Strategy::Direct);
        };
        Ok(Strategy::Level {
            sublevel: Box::new(crate::bound::sublevel_goal(problem, *candidate)?),
            required: required.clone(),
        })
    }
}
