//! Closed-loop simulation for lawsmith: the energy law a spec declares, flown as lawsmith
//! generated it, beside PID and LQR baselines, on a rigid-body longitudinal model of the
//! invented demo airframe.
//!
//! **Key decision:** the energy law is flown through `lawsmith_codegen::Controller`, the
//! reference interpreter of the very program the Rust and C emitters print (a test shows it
//! equals the emitted Rust bit for bit along a trajectory), so the simulation flies the
//! emitted law, not a second hand-written copy. Everything is deterministic from the
//! scenario's seed; transcendental functions come from `libm`, so the numbers do not depend
//! on the platform's C library.
//!
//! ```
//! use lawsmith_sim::airframe::Airframe;
//! use lawsmith_sim::linear::trim;
//! let t = trim(&Airframe::default(), 22.0, 120.0, 0.0).unwrap();
//! assert!(t.residual < 1e-9 && t.controls.throttle > 0.0 && t.controls.throttle < 1.0);
//! ```
#![deny(missing_docs)]

pub mod airframe;
pub mod atmosphere;
pub mod bounded;
pub mod fly;
pub mod linear;
pub mod montecarlo;
pub mod output;
pub mod pilots;
pub mod plot;
pub mod run;
pub mod scenario;
pub mod turbulence;
