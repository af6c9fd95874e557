//! The Monte Carlo cross-check of an ultimate bound: fly the energy law over dispersed runs
//! with the estimate errors the spec declares uncertain, evaluate the spec's Lyapunov
//! candidate V along every trajectory, and record whether a run, once inside the proved
//! sublevel set {V ≤ c}, ever left it, and the largest errors it showed there.
//!
//! The proof assumes the unsaturated law and an ideal pitch loop; the simulation has neither,
//! so this is a test of the claim against a model the proof did not see, not a restatement
//! of it.

use crate::montecarlo::variant;
use crate::run::Setup;
use lawsmith_expr::Tape;
use lawsmith_spec::{Decl, Spec};
use rayon::prelude::*;

/// V along trajectories: the candidate compiled over the symbols it reads.
#[derive(Clone, Debug)]
pub struct Watch {
    tape: Tape,
    /// Per variable of the tape, where its value comes from.
    sources: Vec<Source>,
}

#[derive(Clone, Copy, Debug)]
enum Source {
    H,
    Va,
    HRef,
    VaRef,
    Const(f64),
}

impl Watch {
    /// Compiles the candidate of `spec`; `gains` in the spec's gain order.
    pub fn new(spec: &Spec, gains: &[(String, f64)]) -> Result<Watch, String> {
        let names = spec.dag.symbols(spec.candidate);
        let mut sources = Vec::with_capacity(names.len());
        for n in &names {
            let sym = spec
                .symbol(n)
                .ok_or_else(|| format!("the candidate reads `{n}`, which is not declared"))?;
            let reference_of = |state: &str| {
                spec.symbol(state)
                    .and_then(|s| s.reference())
                    .is_some_and(|r| r == n)
            };
            let src = match (&sym.decl, n.as_str()) {
                (Decl::State { .. }, "h") => Source::H,
                (Decl::State { .. }, "va") => Source::Va,
                (Decl::Reference { .. }, _) if reference_of("h") => Source::HRef,
                (Decl::Reference { .. }, _) if reference_of("va") => Source::VaRef,
                (Decl::Parameter { value }, _) => Source::Const(value.value()),
                (Decl::Gain { .. }, _) => Source::Const(
                    gains
                        .iter()
                        .find(|(g, _)| g == n)
                        .map(|g| g.1)
                        .ok_or_else(|| format!("no value for gain `{n}`"))?,
                ),
                _ => {
                    return Err(format!(
                        "the candidate reads `{n}`, which the simulation does not fly"
                    ))
                }
            };
            sources.push(src);
        }
        let vars: Vec<&str> = names.iter().map(String::as_str).collect();
        let tape = Tape::compile(&spec.dag, &[spec.candidate], &vars)?;
        Ok(Watch { tape, sources })
    }

    /// V at altitude `h`, airspeed `va` and references `h_r`, `va_r`.
    pub fn value(&self, h: f64, va: f64, h_r: f64, va_r: f64, scratch: &mut Vec<f64>) -> f64 {
        let vars: Vec<f64> = self
            .sources
            .iter()
            .map(|s| match *s {
                Source::H => h,
                Source::Va => va,
                Source::HRef => h_r,
                Source::VaRef => va_r,
                Source::Const(c) => c,
            })
            .collect();
        let mut out = [0.0];
        self.tape.eval_into(&vars, scratch, &mut out);
        out[0]
    }
}

/// What one run showed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RunBound {
    /// Time the run first had V ≤ c, s (None: never).
    pub entered: Option<f64>,
    /// Time it first had V > c after entering, s (None: never).
    pub left: Option<f64>,
    /// Largest V / c after entering.
    pub worst_ratio: f64,
    /// Smallest and largest altitude error `h − h_r` after entering, m.
    pub h_error: (f64, f64),
    /// Smallest and largest airspeed error `va − va_r` after entering, m/s.
    pub va_error: (f64, f64),
}

/// The cross-check over a campaign.
#[derive(Clone, Debug)]
pub struct BoundCheck {
    /// The proved level c.
    pub level: f64,
    /// Every run, in run order.
    pub runs: Vec<RunBound>,
}

impl BoundCheck {
    /// Runs that entered {V ≤ c}.
    pub fn entered(&self) -> usize {
        self.runs.iter().filter(|r| r.entered.is_some()).count()
    }

    /// Runs that left {V ≤ c} after entering it.
    pub fn left(&self) -> usize {
        self.runs.iter().filter(|r| r.left.is_some()).count()
    }

    /// The largest V / c after entering, over all runs.
    pub fn worst_ratio(&self) -> f64 {
        self.runs.iter().map(|r| r.worst_ratio).fold(0.0, f64::max)
    }

    /// The extreme altitude errors after entering, over all runs.
    pub fn h_error(&self) -> (f64, f64) {
        hull(self.runs.iter().map(|r| r.h_error))
    }

    /// The extreme airspeed errors after entering, over all runs.
    pub fn va_error(&self) -> (f64, f64) {
        hull(self.runs.iter().map(|r| r.va_error))
    }
}

fn hull(it: impl Iterator<Item = (f64, f64)>) -> (f64, f64) {
    it.fold((f64::INFINITY, f64::NEG_INFINITY), |a, b| {
        (a.0.min(b.0), a.1.max(b.1))
    })
}

/// Flies the energy law over `runs` dispersed variants of the setup's scenario (the same
/// draws as `montecarlo::campaign`) and watches V against the level `c`.
pub fn cross_check(
    setup: &Setup,
    spec: &Spec,
    level: f64,
    runs: usize,
    seed: u64,
) -> Result<BoundCheck, String> {
    let gains: Vec<(String, f64)> = setup
        .law
        .gains
        .iter()
        .zip(&setup.gains)
        .map(|(g, v)| (g.name.clone(), *v))
        .collect();
    let watch = Watch::new(spec, &gains)?;
    let runs: Result<Vec<RunBound>, String> = (0..runs)
        .into_par_iter()
        .map(|i| {
            let v = variant(setup, seed, i);
            let flight = setup.fly("energy", &v)?;
            let mut scratch = Vec::new();
            let mut r = RunBound {
                entered: None,
                left: None,
                worst_ratio: 0.0,
                h_error: (f64::INFINITY, f64::NEG_INFINITY),
                va_error: (f64::INFINITY, f64::NEG_INFINITY),
            };
            for s in &flight.samples {
                let value = watch.value(s.h, s.va, s.h_r, s.va_r, &mut scratch);
                // NaN counts as outside
                let inside = value <= level;
                if r.entered.is_none() {
                    if !inside {
                        continue;
                    }
                    r.entered = Some(s.t);
                }
                if !inside && r.left.is_none() {
                    r.left = Some(s.t);
                }
                r.worst_ratio = r.worst_ratio.max(if value.is_nan() {
                    f64::INFINITY
                } else {
                    value / level
                });
                let (dh, dva) = (s.h - s.h_r, s.va - s.va_r);
                r.h_error = (r.h_error.0.min(dh), r.h_error.1.max(dh));
                r.va_error = (r.va_error.0.min(dva), r.va_error.1.max(dva));
            }
            Ok(r)
        })
        .collect();
    Ok(BoundCheck { level, runs: runs? })
}
