//! The lawsmith spec: the YAML format in which a control law is declared, its SI units, its
//! validation with positioned diagnostics, and the derivation of V̇ along the closed loop.
//!
//! **Key decision:** the loader never stops at the first problem. It collects every
//! diagnostic (class, byte span, label, hint) so a user fixes a spec in one pass, and it keeps
//! the positions of every name and formula from the YAML so a bad formula points at the line
//! and the column *inside* the formula. The crate does no file IO: callers pass the text.
//!
//! ```
//! let yaml = r#"
//! name: spring
//! parameters:
//!   k: { value: 2, unit: N/m }
//!   mass: { value: 1, unit: kg }
//! gains:
//!   c: { range: [0.1, 1], unit: N*s/m, default: 0.5 }
//! states:
//!   x: { unit: m, error: [-1, 1] }
//!   v: { unit: m/s, error: [-1, 1] }
//! inputs:
//!   force: { unit: N }
//! dynamics:
//!   x: v
//!   v: (force - k * x) / mass
//! lyapunov:
//!   candidate: 0.5 * k * x^2 + 0.5 * mass * v^2
//!   claim: negative_semidefinite
//! laws:
//!   force: -c * v
//! "#;
//! let mut spec = lawsmith_spec::load(yaml).unwrap();
//! let d = lawsmith_spec::derive(&mut spec).unwrap();
//! assert_eq!(lawsmith_expr::to_text(&spec.dag, d.vdot), "-c*v^2");
//! ```
#![deny(missing_docs)]

pub mod derivation;
mod derive;
mod diag;
mod load;
mod model;
mod names;
#[allow(missing_docs)]
mod schema;
mod units;

pub use derive::{derive, derive_with, saturated_vdot, Derivation, DeriveError};
pub use diag::{render, Diagnostic};
pub use load::{load, MAX_SPEC_BYTES};
pub use model::{
    uncertainty_name, Actuator, Claim, Constraint, Decl, ErrorForm, Guidance, Range, Settle, Spec,
    Symbol, SymbolKind, Target,
};
pub use names::{identifier_problem, reserved_reason, C_RESERVED, RUST_RESERVED};
pub use schema::json_schema;
pub use units::{degrees_to_radians, named_units, parse_unit, Dim};
