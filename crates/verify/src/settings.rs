//! Every setting of a check in one place: the sampling, each search's budget, the
//! tolerances of an ultimate bound's bisections, the limits of the symbolic work. Every limit
//! is explicit, and hitting one says which to raise.

use lawsmith_expr::DagLimits;
use std::time::Duration;

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
    /// Decide, per actuator, whether its command stays within its limits over the domain
    /// (a proof, or a point where it leaves them); `margin` turns it off, since it asks only
    /// for bounds.
    pub actuators: bool,
    /// Find the guidance rates that keep every actuator within its limits on the sublevel set
    /// of V within these error bounds (state, bound; the error box for a state not named):
    /// `check --rates [--within …]`. None: not asked.
    pub rates: Option<Vec<(String, f64)>>,
    /// With `rates`: also prove a region of attraction of the saturated law beyond the
    /// saturation-free set (`check --saturated`).
    pub saturated: bool,
    /// Bound the round-off of the generated code in f64 and f32 (`check --roundoff`; `emit`
    /// and `build` always do).
    pub roundoff: bool,
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
            actuators: true,
            rates: None,
            saturated: false,
            roundoff: false,
        }
    }
}

/// Limits on one search. Every limit is explicit; hitting one gives an inconclusive verdict
/// that names it.
#[derive(Clone, Debug)]
pub struct Budget {
    /// Boxes evaluated at most (`--max-boxes`).
    pub max_boxes: usize,
    /// Wall-clock limit (`--time-limit`).
    pub time_limit: Duration,
    /// Open boxes held at most (memory of the queue, `--max-queue`).
    pub max_queue: usize,
}

impl Default for Budget {
    fn default() -> Self {
        // two million boxes is a few seconds of work on a laptop core for the example laws and
        // far more than they need; a queue of a million boxes of 10 coordinates is ~200 MB
        Budget {
            max_boxes: 2_000_000,
            time_limit: Duration::from_secs(120),
            max_queue: 1_000_000,
        }
    }
}

/// Tolerances of the bisections.
#[derive(Clone, Debug)]
pub struct BoundSettings {
    /// Relative width at which the level bisection stops (`--level-tolerance`).
    pub level_tolerance: f64,
    /// Relative width at which each error-bound bisection stops.
    pub bound_tolerance: f64,
}

impl Default for BoundSettings {
    fn default() -> Self {
        // 0.2 % on the level is 0.1 % on a bound of a quadratic V, well inside what anyone
        // reads off a flight-test plot; each halving costs one proof
        BoundSettings {
            level_tolerance: 2e-3,
            bound_tolerance: 1e-3,
        }
    }
}
