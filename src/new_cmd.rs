//! `lawsmith new NAME`: a commented starter spec that loads, proves and emits as written, to
//! be edited into the law the user wants.

use crate::{write_atomic, ReportFormat, EXIT_INVALID, EXIT_REFUSED};
use std::path::Path;
use std::process::ExitCode;

/// The starter spec; `@NAME@` is replaced by the spec's name.
const STARTER: &str = r#"# @NAME@: a starter spec written by `lawsmith new`. Edit it into your law, then run
#   lawsmith derive @NAME@.yaml   (V and the closed-loop dV/dt, simplified)
#   lawsmith check  @NAME@.yaml   (prove the claim over the envelope below)
#   lawsmith emit   @NAME@.yaml --out generated/@NAME@
# As written: speed hold of a point mass on a level line. The thrust cancels the drag it is
# told and makes the speed error decay at the rate k_v, so V = m*e^2/2 has dV/dt = -k_v*m*e^2.
# The numbers are an invented example. A proof covers only the model and the envelope declared
# here; flight-test under your local regulations and licensed practice.
name: @NAME@
summary: Speed hold of a point mass; the kinetic energy of the speed error is a Lyapunov function.
assumptions:
  - The mass moves on a straight, level line; the drag is measured or estimated each cycle.

# Fixed at generation time: { value, unit }. Units: kg m s A K, N J W Pa Hz, rad, 1.
parameters:
  mass: { value: 2.0, unit: kg }

# Set at run time; the proof covers every value in the range (constraints: a list of `a < b`).
gains:
  k_v: { range: [0.2, 2.0], unit: 1/s, default: 0.5 }
  k_g: { range: [0.1, 1.0], unit: 1/s, default: 0.4 }

# Proof coordinates: each state tracks a reference (or an equilibrium); the proof covers the
# error `state - reference` over its box, which must hold zero inside.
states:
  v: { unit: m/s, reference: v_r, error: [-2, 2] }

# What the guidance filter produces, with its range and the range of its rate of change.
references:
  v_r: { unit: m/s, range: [1, 10], rate: vdot_r, rate_range: [-0.5, 0.5] }

# Measured or estimated each cycle.
signals:
  drag: { unit: N, range: [0, 5] }

# What the plant takes; each has a law below.
inputs:
  thrust: { unit: N }

# Optional: what the law does not know, and what it carries from one period to the next.
#   uncertain:   the plant's true value of a signal or input, its error named for the candidate
#     drag_true: { estimate: drag, relative: [-0.2, 0.2], error: drag_error }
#                or a constant unknown: { constant: [min, max], unit: N }
#   memory:      controller states (integrators, adaptive estimates), held within their limits
#     dhat: { unit: 1, initial: 0, update: FORMULA for d(dhat)/dt, limits: [-0.3, 0.3],
#             estimates: drag_error }   (or `equilibrium: NUMBER` for an integrator)
# The dynamics may use true values and unknowns, the laws their estimates and the controller
# states; the candidate may use all of them. With an estimate, claim
# { negative_definite_in: [v] } asks dV/dt < 0 wherever the speed error is not zero, whatever
# the estimate's error (see specs/energy_adaptive.yaml and specs/energy_integral.yaml).

# The proof model: state -> its time derivative.
dynamics:
  v: (thrust - drag) / mass

# Definitions usable in later formulas (ref(e) is e at the references, ddt(e) its rate).
energies:
  e_kin: 0.5 * mass * v^2

lyapunov:
  where:
    ev: v - ref(v)
  candidate: 0.5 * mass * ev^2
  # negative_definite, negative_semidefinite, { exponential: RATE },
  # { ultimate_bound: auto } with an `uncertain:` section,
  # or { negative_definite_in: [STATE, ...] } with controller states
  claim: negative_definite

# In evaluation order; a law may use the laws above it.
laws:
  thrust: drag + mass * (vdot_r - k_v * ev)

# What the firmware sends, saturated to its limits (an optional `safe:` value inside them is
# sent if the law's value is ever not finite; zero clamped into the limits otherwise).
actuators:
  thrust_cmd: { law: thrust, unit: N, limits: [0, 20] }

# First-order reference filters with rate limits.
guidance:
  v_r: { command: v_cmd, gain: k_g, rate_limit: [-0.5, 0.5] }
"#;

/// The starter text for a spec called `name`.
pub fn starter(name: &str) -> String {
    STARTER.replace("@NAME@", name)
}

pub fn new_cmd(name: &str, dir: &Path, force: bool, format: ReportFormat) -> ExitCode {
    if let Some(problem) =
        lawsmith_spec::identifier_problem(name).or_else(|| lawsmith_spec::reserved_reason(name))
    {
        eprintln!("error[bad-name]: {problem}");
        return ExitCode::from(EXIT_INVALID);
    }
    let path = dir.join(format!("{name}.yaml"));
    if path.exists() && !force {
        eprintln!(
            "error[exists]: {} exists; pass --force to overwrite it",
            path.display()
        );
        return ExitCode::from(EXIT_REFUSED);
    }
    if let Err(e) =
        std::fs::create_dir_all(dir).and_then(|_| write_atomic(&path, starter(name).as_bytes()))
    {
        eprintln!("error[io]: cannot write {}: {e}", path.display());
        return ExitCode::from(EXIT_INVALID);
    }
    if format == ReportFormat::Json {
        let v = serde_json::json!({ "name": name, "wrote": path.display().to_string() });
        crate::print_json(&v);
    } else if crate::verbosity() > 0 {
        println!(
            "wrote {}; next: lawsmith check {}",
            path.display(),
            path.display()
        );
    }
    ExitCode::SUCCESS
}
