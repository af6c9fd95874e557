//! Scenarios: what is flown, in YAML.
//!
//! ```yaml
//! name: altitude_step_up
//! summary: Climb 30 m at constant airspeed.
//! spec: ../energy_longitudinal.yaml      # the energy law flown (relative to this file)
//! duration: 90                           # s
//! initial: { h: 120, va: 22 }            # trimmed level flight
//! commands:                              # piecewise constant; a key left out keeps its value
//!   - { at: 5, h: 150 }
//! wind: { x: 0, z: 0, turbulence: none } # steady wind (m/s, z down) and Dryden intensity
//! estimates: { drag: 1.0, thrust: 1.0, alpha_bias: 0.0, thrust_bias: 0.0 }   # what the controllers believe
//! noise: { h: 0.0, va: 0.0, theta: 0.0, q: 0.0 }           # sensor noise σ
//! seed: 1
//! ```
//!
//! Optional: `rates: { plant: 50, control: 50 }` (Hz), `tuning:` for the baselines and the
//! inner loop, `gains:` for the energy law, `dispersions:` for Monte Carlo. Every key and its
//! default is documented in `docs/scenarios.md`; [`json_schema`] is the format's schema.

use schemars::JsonSchema;
use serde::Deserialize;
use std::collections::BTreeMap;

/// A command change.
#[derive(Clone, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct CommandChange {
    /// Time of the change, s.
    pub at: f64,
    /// New altitude command, m.
    #[serde(default)]
    pub h: Option<f64>,
    /// New airspeed command, m/s.
    #[serde(default)]
    pub va: Option<f64>,
}

/// The initial trimmed flight.
#[derive(Clone, Copy, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Initial {
    /// Altitude, m.
    pub h: f64,
    /// Airspeed, m/s.
    pub va: f64,
}

/// Steady wind and turbulence.
#[derive(Clone, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct WindSpec {
    /// Horizontal wind along the flight path (tailwind positive), m/s.
    #[serde(default)]
    pub x: f64,
    /// Vertical wind, positive down, m/s.
    #[serde(default)]
    pub z: f64,
    /// Dryden intensity: none, light, moderate, severe.
    #[serde(default = "default_turbulence")]
    pub turbulence: String,
}

fn default_turbulence() -> String {
    "none".into()
}

impl Default for WindSpec {
    fn default() -> Self {
        WindSpec {
            x: 0.0,
            z: 0.0,
            turbulence: default_turbulence(),
        }
    }
}

/// What the controllers' models get wrong: the truth is the airframe, the controllers use
/// these factors and biases on their estimates.
#[derive(Clone, Copy, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Estimates {
    /// Factor on the drag estimate (1.2: 20% high).
    #[serde(default = "one")]
    pub drag: f64,
    /// Factor on the thrust model used to map thrust to throttle.
    #[serde(default = "one")]
    pub thrust: f64,
    /// Bias on the angle-of-attack estimate, rad.
    #[serde(default)]
    pub alpha_bias: f64,
    /// Bias of the thrust model the controllers invert, N: the propulsion delivers the
    /// commanded thrust plus this.
    #[serde(default)]
    pub thrust_bias: f64,
}

fn one() -> f64 {
    1.0
}

impl Default for Estimates {
    fn default() -> Self {
        Estimates {
            drag: 1.0,
            thrust: 1.0,
            alpha_bias: 0.0,
            thrust_bias: 0.0,
        }
    }
}

/// Sensor noise (standard deviations).
#[derive(Clone, Copy, Debug, Default, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct SensorNoise {
    /// Altitude, m.
    #[serde(default)]
    pub h: f64,
    /// Airspeed, m/s.
    #[serde(default)]
    pub va: f64,
    /// Pitch attitude, rad.
    #[serde(default)]
    pub theta: f64,
    /// Pitch rate, rad/s.
    #[serde(default)]
    pub q: f64,
}

/// Simulation rates.
#[derive(Clone, Copy, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Rates {
    /// Plant integration rate (RK4), Hz.
    #[serde(default = "plant_rate")]
    pub plant: f64,
    /// Controller rate, Hz (a divisor of the plant rate).
    #[serde(default = "control_rate")]
    pub control: f64,
}

/// RK4 at 50 Hz matches 400 Hz to 6e-5 m of altitude on the example scenarios (the fastest
/// mode, the elevator servo at 20 rad/s, gives ω·dt = 0.4); a test keeps it so.
fn plant_rate() -> f64 {
    50.0
}

fn control_rate() -> f64 {
    50.0
}

impl Default for Rates {
    fn default() -> Self {
        Rates {
            plant: plant_rate(),
            control: control_rate(),
        }
    }
}

/// The inner pitch-attitude loop on the elevator (energy law and PID).
#[derive(Clone, Copy, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct PitchTuning {
    /// Elevator per pitch error, rad/rad.
    #[serde(default = "k_theta")]
    pub k_theta: f64,
    /// Elevator per pitch rate, rad/(rad/s).
    #[serde(default = "k_q")]
    pub k_q: f64,
    /// Elevator per integrated pitch error, rad/(rad·s).
    #[serde(default = "k_i")]
    pub k_i: f64,
}

fn k_theta() -> f64 {
    1.6
}
fn k_q() -> f64 {
    0.25
}
fn k_i() -> f64 {
    1.2
}

impl Default for PitchTuning {
    fn default() -> Self {
        PitchTuning {
            k_theta: k_theta(),
            k_q: k_q(),
            k_i: k_i(),
        }
    }
}

/// Successive-loop PID: altitude through pitch, airspeed through throttle.
#[derive(Clone, Copy, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct PidTuning {
    /// Pitch per altitude error, rad/m.
    #[serde(default = "kp_h")]
    pub kp_h: f64,
    /// Pitch per integrated altitude error, rad/(m·s).
    #[serde(default = "ki_h")]
    pub ki_h: f64,
    /// Pitch per climb-rate error, rad/(m/s).
    #[serde(default = "kd_h")]
    pub kd_h: f64,
    /// Throttle per airspeed error, 1/(m/s).
    #[serde(default = "kp_v")]
    pub kp_v: f64,
    /// Throttle per integrated airspeed error, 1/m.
    #[serde(default = "ki_v")]
    pub ki_v: f64,
}

fn kp_h() -> f64 {
    0.025
}
fn ki_h() -> f64 {
    0.002
}
fn kd_h() -> f64 {
    0.06
}
fn kp_v() -> f64 {
    0.12
}
fn ki_v() -> f64 {
    0.04
}

impl Default for PidTuning {
    fn default() -> Self {
        PidTuning {
            kp_h: kp_h(),
            ki_h: ki_h(),
            kd_h: kd_h(),
            kp_v: kp_v(),
            ki_v: ki_v(),
        }
    }
}

/// LQR with integral action: weights by Bryson's rule (1/maximum², common practice).
#[derive(Clone, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct LqrTuning {
    /// Largest acceptable deviations of (u, w, q, θ, h, ∫h, ∫V) in SI units.
    #[serde(default = "lqr_states")]
    pub states: Vec<f64>,
    /// Largest acceptable deviations of (elevator rad, throttle).
    #[serde(default = "lqr_inputs")]
    pub inputs: Vec<f64>,
}

fn lqr_states() -> Vec<f64> {
    vec![1.0, 1.0, 0.3, 0.1, 2.0, 8.0, 4.0]
}

fn lqr_inputs() -> Vec<f64> {
    vec![0.08, 0.25]
}

impl Default for LqrTuning {
    fn default() -> Self {
        LqrTuning {
            states: lqr_states(),
            inputs: lqr_inputs(),
        }
    }
}

/// Baseline tuning.
#[derive(Clone, Debug, Default, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Tuning {
    /// Inner pitch loop.
    #[serde(default)]
    pub pitch: PitchTuning,
    /// PID baseline.
    #[serde(default)]
    pub pid: PidTuning,
    /// LQR baseline.
    #[serde(default)]
    pub lqr: LqrTuning,
}

/// Monte Carlo dispersions: each run draws uniformly within ± these.
#[derive(Clone, Copy, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Dispersions {
    /// Relative mass change.
    #[serde(default = "d_mass")]
    pub mass: f64,
    /// Relative change of the zero-lift drag (truth, not estimate).
    #[serde(default = "d_drag")]
    pub cd0: f64,
    /// Steady horizontal and vertical wind, m/s (vertical a fifth of it).
    #[serde(default = "d_wind")]
    pub wind: f64,
    /// Relative error of the drag estimate.
    #[serde(default = "d_drag")]
    pub drag_estimate: f64,
    /// Relative error of the thrust model.
    #[serde(default = "d_thrust")]
    pub thrust_estimate: f64,
    /// Bias of the angle-of-attack estimate, rad.
    #[serde(default = "d_alpha")]
    pub alpha_bias: f64,
    /// Bias of the thrust model, N (none by default).
    #[serde(default)]
    pub thrust_bias: f64,
}

fn d_mass() -> f64 {
    0.1
}
fn d_drag() -> f64 {
    0.2
}
fn d_wind() -> f64 {
    3.0
}
fn d_thrust() -> f64 {
    0.1
}
fn d_alpha() -> f64 {
    0.01
}

impl Default for Dispersions {
    fn default() -> Self {
        Dispersions {
            mass: d_mass(),
            cd0: d_drag(),
            wind: d_wind(),
            drag_estimate: d_drag(),
            thrust_estimate: d_thrust(),
            alpha_bias: d_alpha(),
            thrust_bias: 0.0,
        }
    }
}

/// A scenario as written.
#[derive(Clone, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// Name.
    pub name: String,
    /// One line.
    #[serde(default)]
    pub summary: Option<String>,
    /// The spec of the energy law, relative to the scenario file.
    pub spec: String,
    /// Further laws flown beside it, each under its spec's name (paths relative to the
    /// scenario file; their spec's default gains).
    #[serde(default)]
    pub compare: Vec<String>,
    /// Length, s.
    pub duration: f64,
    /// Initial trimmed flight.
    pub initial: Initial,
    /// Command changes.
    #[serde(default)]
    pub commands: Vec<CommandChange>,
    /// Wind.
    #[serde(default)]
    pub wind: WindSpec,
    /// Estimate errors.
    #[serde(default)]
    pub estimates: Estimates,
    /// Sensor noise.
    #[serde(default)]
    pub noise: SensorNoise,
    /// Seed of turbulence and noise.
    #[serde(default = "default_seed")]
    pub seed: u64,
    /// Rates.
    #[serde(default)]
    pub rates: Rates,
    /// Baseline and inner-loop tuning.
    #[serde(default)]
    pub tuning: Tuning,
    /// Energy-law gains (defaults: the spec's).
    #[serde(default)]
    pub gains: BTreeMap<String, f64>,
    /// Rate limits of the guidance filters by reference, `[lo, hi]`, cut into the spec's
    /// (e.g. the rates `check --rates` proves keep every command within its limits).
    #[serde(default)]
    pub rate_limits: BTreeMap<String, [f64; 2]>,
    /// Monte Carlo dispersions.
    #[serde(default)]
    pub dispersions: Dispersions,
    /// The arithmetic the energy law (and its guidance filters) computes in: `double`, or
    /// `single` as the f32 code computes it (bit for bit).
    #[serde(default)]
    pub arithmetic: Arithmetic,
}

/// The float type the flown law computes in.
#[derive(Clone, Copy, Debug, Default, Deserialize, JsonSchema, PartialEq, Eq)]
#[serde(rename_all = "lowercase")]
pub enum Arithmetic {
    /// IEEE 754 binary64: the f64 code.
    #[default]
    Double,
    /// IEEE 754 binary32: the f32 code.
    Single,
}

fn default_seed() -> u64 {
    1
}

/// The JSON Schema (draft 2020-12) of a scenario file, from the types serde reads it with.
pub fn json_schema() -> serde_json::Value {
    let mut schema = schemars::generate::SchemaSettings::draft2020_12()
        .into_generator()
        .into_root_schema_for::<Scenario>();
    schema.insert("title".into(), "lawsmith scenario".into());
    schema.insert(
        "description".into(),
        "A flight lawsmith sim flies: the spec, the initial trim, the commands, wind, estimate errors, noise, rates, baseline tuning, gains and Monte Carlo dispersions (docs/scenarios.md).".into(),
    );
    schema.to_value()
}

/// A scenario that cannot be flown.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ScenarioError(pub String);

impl std::fmt::Display for ScenarioError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for ScenarioError {}

/// Largest duration accepted, s (a day of flight; keeps a typo from running for hours).
pub const MAX_DURATION: f64 = 86_400.0;

impl Scenario {
    /// Parses and checks a scenario. Errors name the line and column where serde-saphyr knows
    /// them.
    pub fn parse(text: &str) -> Result<Scenario, ScenarioError> {
        let s: Scenario = serde_saphyr::from_str(text).map_err(|e| ScenarioError(e.to_string()))?;
        s.validate()?;
        Ok(s)
    }

    fn validate(&self) -> Result<(), ScenarioError> {
        let bad = |m: String| Err(ScenarioError(m));
        if !(self.duration > 0.0 && self.duration <= MAX_DURATION) {
            return bad(format!(
                "duration {} must be in (0, {MAX_DURATION}] s",
                self.duration
            ));
        }
        if !(self.rates.plant > 0.0 && self.rates.control > 0.0) {
            return bad("rates must be positive".into());
        }
        let ratio = self.rates.plant / self.rates.control;
        if (ratio - ratio.round()).abs() > 1e-9 || ratio < 1.0 {
            return bad(format!(
                "the control rate {} Hz must divide the plant rate {} Hz",
                self.rates.control, self.rates.plant
            ));
        }
        if crate::turbulence::w20_of(&self.wind.turbulence).is_none() {
            return bad(format!(
                "unknown turbulence `{}` (none, light, moderate, severe)",
                self.wind.turbulence
            ));
        }
        let mut last = f64::NEG_INFINITY;
        for c in &self.commands {
            if !(c.at >= 0.0 && c.at >= last) {
                return bad(format!(
                    "command times must be non-negative and in order (at {})",
                    c.at
                ));
            }
            last = c.at;
        }
        if self.tuning.lqr.states.len() != 7 || self.tuning.lqr.inputs.len() != 2 {
            return bad("lqr tuning needs 7 state and 2 input deviations".into());
        }
        if self
            .tuning
            .lqr
            .states
            .iter()
            .chain(&self.tuning.lqr.inputs)
            .any(|v| v.is_nan() || *v <= 0.0)
        {
            return bad("lqr deviations must be positive".into());
        }
        let all = [
            self.initial.h,
            self.initial.va,
            self.wind.x,
            self.wind.z,
            self.estimates.drag,
            self.estimates.thrust,
            self.estimates.alpha_bias,
            self.estimates.thrust_bias,
        ];
        if all.iter().any(|v| !v.is_finite()) {
            return bad("initial state, wind and estimates must be finite".into());
        }
        Ok(())
    }

    /// The altitude and airspeed commands at time `t`.
    pub fn command_at(&self, t: f64) -> (f64, f64) {
        let (mut h, mut v) = (self.initial.h, self.initial.va);
        for c in &self.commands {
            if c.at <= t {
                if let Some(x) = c.h {
                    h = x;
                }
                if let Some(x) = c.va {
                    v = x;
                }
            }
        }
        (h, v)
    }
}
