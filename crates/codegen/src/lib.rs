//! Code generation for lawsmith: the verified law as deterministic Rust (no_std) and C99.
//!
//! A spec becomes a [`Controller`]: the proved envelope, the limits, the guidance filters and
//! one straight-line [`Program`] (SSA) for the laws and actuator commands. Both emitters print
//! that one program, operation for operation, and [`Controller::step`] interprets it with the
//! same semantics, so the law the simulation flies is the law the firmware gets.
//!
//! **Key decision:** the law is built from the formulas as the spec wrote them (definitions
//! and `ddt` expanded, parameters folded exactly), not from the expanded canonical form the
//! prover uses: the written structure shares its energy errors between laws, is better
//! conditioned, and costs fewer operations. The proof covers both, since they are the same
//! rational function.
//!
//! ```
//! use lawsmith_codegen::{Controller, Float, Provenance};
//! let yaml = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/../../specs/pendulum_damping.yaml")).unwrap();
//! let spec = lawsmith_spec::load(&yaml).unwrap();
//! let c = Controller::new(&spec).unwrap();
//! // torque = -k_d*omega: one multiplication and one negation
//! assert_eq!(c.op_count(), 2);
//! let out = c.step(&[0.1, 2.0], &[0.1]);
//! assert_eq!(out.commands, vec![-0.2]);
//! assert!(!out.domain);
//! ```
#![deny(missing_docs)]

mod c;
mod controller;
mod header;
mod ir;
mod real;
mod rust;

pub use controller::{
    clamp_command, Actuator, Controller, EmitError, Filter, Gain, Memory, Ranged, State,
    StepOutput, Workspace, MAX_ACTUATORS, OUTPUT_FIELDS,
};
pub use header::{float_literal, Provenance, MARKER};
pub use ir::{Builder, IrError, Op, Program, Slot};
pub use real::Real;

/// The floating-point type of the generated code.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum Float {
    /// `f32` / `float`.
    F32,
    /// `f64` / `double`.
    F64,
}

impl Float {
    /// The value the code of this type holds for the double `x`: the literal an emitter
    /// prints for it (its nearest value of the type), as a double.
    pub fn literal(self, x: f64) -> f64 {
        match self {
            Float::F64 => x,
            Float::F32 => f64::from(x as f32),
        }
    }

    /// The ends of a declared range as this type's code compares against them: rounded
    /// inward, so every value the code accepts lies in the range (the f32 nearest to 0.2 is
    /// 2.98e-9 above it, and would accept points outside the proved box). An f64 range end
    /// is already the nearest double to the decimal written, inside the proof's box, whose
    /// ends are rounded outward.
    pub fn inward(self, (lo, hi): (f64, f64)) -> (f64, f64) {
        match self {
            Float::F64 => (lo, hi),
            Float::F32 => {
                let (mut l, mut h) = (lo as f32, hi as f32);
                if f64::from(l) < lo {
                    l = l.next_up();
                }
                if f64::from(h) > hi {
                    h = h.next_down();
                }
                (f64::from(l), f64::from(h))
            }
        }
    }
}

/// The name of a function in C's `<math.h>` and in the `libm` crate, which share their
/// names, for this float type (`sin`, `sinf`). One table for both emitters.
pub(crate) fn math_name(f: lawsmith_expr::Func, float: Float) -> String {
    use lawsmith_expr::Func;
    // the formula language's names, where C's differ
    let base = match f {
        Func::Ln => "log",
        Func::Abs => "fabs",
        Func::Min => "fmin",
        Func::Max => "fmax",
        Func::Clamp => unreachable!("the IR lowers clamp to fmax and fmin"),
        _ => f.name(),
    };
    with_float(base, float)
}

/// A `<math.h>`/`libm` name in this float type: `pow`, `powf`.
pub(crate) fn with_float(base: &str, float: Float) -> String {
    match float {
        Float::F32 => format!("{base}f"),
        Float::F64 => base.to_string(),
    }
}

/// The languages to emit.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum Lang {
    /// `NAME.rs`.
    Rust,
    /// `NAME.h` and `NAME.c`.
    C,
    /// All of them.
    All,
}

/// Generates the files of a controller: (file name, contents), in a fixed order.
pub fn generate(
    c: &Controller,
    prov: &Provenance,
    lang: Lang,
    float: Float,
) -> Result<Vec<(String, String)>, EmitError> {
    // a range narrower than the type's spacing holds none of its numbers: no input could
    // ever be accepted, so there is no code to write
    let ranges = c.references.iter().chain(&c.rates).chain(&c.signals);
    let errors = c.states.iter().map(|s| (&s.name, s.error));
    for (name, range) in ranges.map(|r| (&r.name, r.range)).chain(errors) {
        let (lo, hi) = float.inward(range);
        if lo > hi {
            return Err(EmitError(format!(
                "the range [{}, {}] of `{name}` holds no single-precision number; widen it or emit f64",
                range.0, range.1
            )));
        }
    }
    let mut out = Vec::new();
    if matches!(lang, Lang::Rust | Lang::All) {
        let text = rust::emit(c, prov, float).map_err(EmitError)?;
        out.push((format!("{}.rs", c.name), text));
    }
    if matches!(lang, Lang::C | Lang::All) {
        let (h, s) = c::emit(c, prov, float);
        out.push((format!("{}.h", c.name), h));
        out.push((format!("{}.c", c.name), s));
    }
    Ok(out)
}
