//! Verification for lawsmith: proves a spec's Lyapunov claim over its declared envelope, or
//! finds a concrete counterexample.
//!
//! The domain is a box in proof coordinates (each state's error around its reference, the
//! references, their rates, the signals, the gains); parameters are exact constants. Every
//! question is a [`Goal`]: a well-posedness condition of the laws (an `asin` argument in
//! [−1, 1], a denominator away from zero, …), `V > 0` away from zero error, and the claim
//! (`V̇ < 0`, `V̇ ≤ 0`, `V̇ ≤ −2λV`, or — with estimate errors — V̇ < 0 wherever V ≥ c, an
//! ultimate bound). Each goal is first sampled (a low-discrepancy sequence, the
//! corners, points near zero error and on its coordinate planes) and then proved by branch and
//! bound with sound interval arithmetic in centered form; near zero error, where `V̇` and its
//! gradient vanish, an interval Hessian test closes the proof (Taylor's theorem).
//!
//! **Key decision:** the prover never reports a proof it does not have. Every leaf of the
//! split tree carries its evidence (an enclosure, a Hessian test value, or a violated
//! constraint) and is written to the certificate, and [`recheck`] re-evaluates every leaf of
//! a certificate without the search. Intervals are our own, small and sound (outward rounding
//! on `f64::next_up`/`next_down`, `libm` widened by 2 ulps), checked against point
//! evaluations and against mpmath's interval arithmetic.
//!
//! ```
//! use lawsmith_expr::{parse_expr, Dag, Tape};
//! use lawsmith_verify::Interval;
//!
//! let mut dag = Dag::new();
//! let e = parse_expr(&mut dag, "x^2 - 2*x").unwrap();
//! let tape = Tape::compile(&dag, &[e], &["x"]).unwrap();
//! let mut out = [Interval::point(0.0)];
//! tape.run(&[Interval::new(0.0, 1.0)], &mut Vec::new(), &mut out);
//! // naive interval arithmetic: [0, 1] − [0, 2] = [−2, 1] ⊇ the true range [−1, 0]
//! assert!(out[0].lo() <= -1.0 && out[0].hi() >= 0.0);
//! ```
#![deny(missing_docs)]

mod bound;
mod certificate;
mod check;
mod conditions;
mod goal;
mod hessian;
mod interval;
mod margin;
mod plan;
mod prepare;
mod problem;
mod rates;
pub mod report;
mod roundoff;
mod sample;
mod search;
mod settings;

// The exports are what the CLI, the tests and the benchmarks use; the types of their public
// fields (goal results, counterexamples, search reports, …) are reached through them.
pub use bound::{BoundOutcome, BoundReport};
pub use certificate::{
    certificate, recheck, recheck_roundoff, sha256_hex, Origin, ProvedRegion, Rechecked,
    RecheckedRoundoff, Rejection, CERTIFICATE_VERSION,
};
pub use check::{check, CheckError, CheckReport, GoalKind, Status, Verdict};
pub use goal::Scratch;
pub use interval::Interval;
pub use margin::{margin, MarginReport, MarginSettings};
pub use prepare::{prepare, Prepared};
pub use rates::{
    rate_limits, ProvedRate, RateLimits, RatesOutcome, SaturatedRegion, RATE_STEPS, SATURATED_STEPS,
};
pub use roundoff::{
    law_domain, law_roundoff, leaf_bound, leaves_of, roundoff, roundoff_report, InputMap,
    RoundoffBound, RoundoffReport, LIB_ULPS, ROUNDOFF_LEAVES,
};
pub use sample::{falsify, Sequence};
pub use search::search;
pub use settings::{BoundSettings, Budget, Settings};
