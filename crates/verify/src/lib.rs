//! Verification for lawsmith. Today: sound interval arithmetic, and interval evaluation of
//! expressions through the same flat tape the f64 evaluator uses. The Lyapunov prover
//! (well-posedness, sampling falsifier, branch and bound, certificates) is built on these.
//!
//! **Key decision:** our own small interval type on `f64::next_up`/`next_down` and the `libm`
//! crate, instead of an interval library: the established one needs a CPU-specific build flag
//! and GMP for its transcendental functions; this one stays portable, and its soundness is
//! checked against point evaluations and against mpmath's interval arithmetic.
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

mod interval;

pub use interval::{Interval, LIBM_ULPS};
