//! The controllers flown: the energy law (lawsmith's generated law, run by the codegen
//! interpreter that equals the emitted Rust bit for bit), successive-loop PID and LQR with
//! integral action.
//!
//! The energy law reads the spec's names: states `h` (altitude) and `va` (airspeed),
//! references `h_r`, `va_r` with rates `hdot_r`, `vadot_r`, signals `drag` and `alpha`, and
//! commands `pitch_cmd` (pitch attitude, to the inner loop) and `thrust_cmd` (N, mapped to
//! throttle through the propulsion model). The guidance filters of the spec produce the
//! references for all three controllers, so they chase the same trajectory.

use crate::airframe::{Airframe, Controls};
use crate::atmosphere::at_altitude;
use crate::linear::{linearise, lqr, Trim};
use crate::scenario::{Estimates, LqrTuning, PidTuning, PitchTuning};
use lawsmith_codegen::Controller;
use nalgebra::{DMatrix, DVector};

/// What the controllers see each step.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Measured {
    /// Altitude, m.
    pub h: f64,
    /// Climb rate, m/s.
    pub hdot: f64,
    /// Airspeed, m/s.
    pub va: f64,
    /// Pitch attitude, rad.
    pub theta: f64,
    /// Pitch rate, rad/s.
    pub q: f64,
    /// Angle of attack, rad (true; the estimate adds its bias).
    pub alpha: f64,
    /// Body velocities (u, w), m/s, for the LQR's state.
    pub uw: (f64, f64),
}

/// The guidance references.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct References {
    /// Altitude reference, m.
    pub h: f64,
    /// Its rate, m/s.
    pub hdot: f64,
    /// Airspeed reference, m/s.
    pub va: f64,
    /// Its rate, m/s².
    pub vadot: f64,
}

/// What a controller did in one step, besides the controls.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Notes {
    /// The energy law's domain flag.
    pub domain: bool,
    /// The energy law's limit bits.
    pub limits: u32,
    /// The law's estimate of the relative drag error (a controller state that estimates it),
    /// NaN for a law without one.
    pub drag_error_estimate: f64,
    /// The drag the law was told, N (NaN for a controller that is told none).
    pub drag_estimate: f64,
}

impl Default for Notes {
    fn default() -> Self {
        Notes {
            domain: false,
            limits: 0,
            drag_error_estimate: f64::NAN,
            drag_estimate: f64::NAN,
        }
    }
}

/// A controller of the simulation.
pub trait Pilot {
    /// Its name in reports.
    fn name(&self) -> &str;
    /// The controls for one step of `dt` seconds.
    fn step(&mut self, m: &Measured, r: &References, dt: f64) -> (Controls, Notes);
}

/// Pitch-attitude hold on the elevator (PI with rate damping, anti-windup by freezing the
/// integrator while the elevator is saturated).
#[derive(Clone, Debug)]
pub struct PitchLoop {
    t: PitchTuning,
    trim_elevator: f64,
    limit: f64,
    integral: f64,
}

impl PitchLoop {
    /// The loop about a trim.
    pub fn new(t: PitchTuning, trim_elevator: f64, limit: f64) -> PitchLoop {
        PitchLoop {
            t,
            trim_elevator,
            limit,
            integral: 0.0,
        }
    }

    /// The elevator command for a pitch command.
    pub fn elevator(&mut self, theta_cmd: f64, m: &Measured, dt: f64) -> f64 {
        // positive elevator pitches the nose down (Cm_δe < 0)
        let e = theta_cmd - m.theta;
        let raw =
            self.trim_elevator - self.t.k_theta * e + self.t.k_q * m.q - self.t.k_i * self.integral;
        let saturated = raw.abs() >= self.limit;
        let pushes_out = (raw - self.trim_elevator) * (-e) > 0.0;
        if !(saturated && pushes_out) {
            self.integral += e * dt;
        }
        raw.clamp(-self.limit, self.limit)
    }
}

/// The energy law of a spec.
pub struct EnergyPilot {
    name: String,
    law: Controller,
    /// The controller states, carried from step to step.
    memory: Vec<f64>,
    /// The controller state that estimates the relative drag error, if one does.
    drag_error_state: Option<usize>,
    gains: Vec<f64>,
    slots: Vec<usize>,
    pitch_out: usize,
    thrust_out: usize,
    model: Airframe,
    estimates: Estimates,
    pitch: PitchLoop,
    ws: lawsmith_codegen::Workspace,
    inputs: Vec<f64>,
    memory_before: Vec<f64>,
    last: Option<lawsmith_codegen::StepOutput>,
    /// In single precision: the law's state and buffers in f32 (the f64 ones mirror them).
    single: Option<Single>,
}

/// The energy law computing in f32, as its f32 code does.
struct Single {
    memory: Vec<f32>,
    gains: Vec<f32>,
    inputs: Vec<f32>,
    ws: lawsmith_codegen::Workspace<f32>,
}

/// The spec names the energy pilot reads, in the order of its slots.
pub const ENERGY_INPUTS: [&str; 8] = [
    "h", "va", "h_r", "va_r", "hdot_r", "vadot_r", "drag", "alpha",
];

impl EnergyPilot {
    /// The pilot `name` for a spec's controller with these gains (in the spec's gain order);
    /// `drag_error_state` is the controller state that estimates the relative drag error.
    pub fn new(
        name: &str,
        drag_error_state: Option<usize>,
        law: Controller,
        gains: Vec<f64>,
        model: Airframe,
        estimates: Estimates,
        pitch: PitchLoop,
    ) -> Result<EnergyPilot, String> {
        let names = law.input_names();
        let mut slots = vec![usize::MAX; names.len()];
        for (i, n) in names.iter().enumerate() {
            let k = ENERGY_INPUTS.iter().position(|e| e == n).ok_or_else(|| {
                format!(
                    "the simulation does not know the spec's input `{n}` (it provides {})",
                    ENERGY_INPUTS.join(", ")
                )
            })?;
            slots[i] = k;
        }
        let out = |n: &str| {
            law.actuators
                .iter()
                .position(|a| a.name == n)
                .ok_or_else(|| {
                    format!("the spec has no actuator `{n}`, which the simulation flies")
                })
        };
        let pitch_out = out("pitch_cmd")?;
        let thrust_out = out("thrust_cmd")?;
        Ok(EnergyPilot {
            name: name.to_string(),
            memory: law.start_memory(),
            drag_error_state,
            law,
            gains,
            slots,
            pitch_out,
            thrust_out,
            model,
            estimates,
            pitch,
            ws: lawsmith_codegen::Workspace::default(),
            inputs: Vec::new(),
            memory_before: Vec::new(),
            last: None,
            single: None,
        })
    }

    /// The pilot computing its law in single precision, as the f32 code does: inputs,
    /// gains and controller states rounded to f32, every operation in f32.
    pub fn in_single_precision(mut self) -> EnergyPilot {
        let single = |v: &[f64]| v.iter().map(|&x| x as f32).collect::<Vec<f32>>();
        self.single = Some(Single {
            memory: self.law.start_memory(),
            gains: single(&self.gains),
            inputs: Vec::new(),
            ws: lawsmith_codegen::Workspace::default(),
        });
        self.memory = self
            .law
            .start_memory::<f32>()
            .iter()
            .map(|&x| f64::from(x))
            .collect();
        self
    }

    /// The law's inputs of the last step, in the spec's input order.
    pub fn last_inputs(&self) -> &[f64] {
        &self.inputs
    }

    /// The controller states after the last step (before it: see [`EnergyPilot::last_memory`]).
    pub fn memory(&self) -> &[f64] {
        &self.memory
    }

    /// The controller states the last step started from.
    pub fn last_memory(&self) -> &[f64] {
        &self.memory_before
    }

    /// What the law computed in the last step.
    pub fn last_output(&self) -> Option<&lawsmith_codegen::StepOutput> {
        self.last.as_ref()
    }

    /// The gains it flies.
    pub fn gains(&self) -> &[f64] {
        &self.gains
    }

    /// The generated law it flies.
    pub fn law(&self) -> &Controller {
        &self.law
    }

    /// The drag the law is told: the model's polar at the estimated α, times the estimate's
    /// factor.
    fn drag_estimate(&self, m: &Measured, alpha: f64) -> f64 {
        let rho = at_altitude(m.h).density;
        let qbar = 0.5 * rho * m.va * m.va;
        let cl = self.model.cl0 + self.model.cl_alpha * alpha;
        self.estimates.drag * qbar * self.model.area * self.model.cd(cl)
    }
}

impl Pilot for EnergyPilot {
    fn name(&self) -> &str {
        &self.name
    }

    fn step(&mut self, m: &Measured, r: &References, dt: f64) -> (Controls, Notes) {
        let alpha = m.alpha + self.estimates.alpha_bias;
        let drag = self.drag_estimate(m, alpha);
        let values = [m.h, m.va, r.h, r.va, r.hdot, r.vadot, drag, alpha];
        self.inputs.clear();
        self.inputs.extend(self.slots.iter().map(|&k| values[k]));
        self.memory_before.clone_from(&self.memory);
        let out = match &mut self.single {
            None => self.law.run_in(
                &self.inputs,
                &self.gains,
                &mut self.memory,
                dt,
                &mut self.ws,
            ),
            Some(f) => {
                f.inputs.clear();
                f.inputs.extend(self.inputs.iter().map(|&x| x as f32));
                let o = self
                    .law
                    .run_in(&f.inputs, &f.gains, &mut f.memory, dt as f32, &mut f.ws);
                self.memory.clear();
                self.memory.extend(f.memory.iter().map(|&x| f64::from(x)));
                o.map(f64::from)
            }
        };
        let theta_cmd = out.commands[self.pitch_out];
        let thrust = out.commands[self.thrust_out];
        let per_throttle = self.estimates.thrust * self.model.thrust(1.0, m.va);
        let throttle = if per_throttle > 0.0 {
            // the model inverted is off by the bias: the aircraft gets `thrust + bias`
            ((thrust + self.estimates.thrust_bias) / per_throttle).clamp(0.0, 1.0)
        } else {
            1.0
        };
        let elevator = self.pitch.elevator(theta_cmd, m, dt);
        let notes = Notes {
            domain: out.domain,
            limits: out.limits,
            // what the state estimates at this step (the value the commands used)
            drag_error_estimate: self
                .drag_error_state
                .map_or(f64::NAN, |j| self.memory_before[j]),
            drag_estimate: drag,
        };
        self.last = Some(out);
        (Controls { elevator, throttle }, notes)
    }
}

/// Successive-loop PID: altitude through a pitch command, airspeed through throttle;
/// anti-windup by freezing each integrator while its output is saturated and the error
/// pushes further.
pub struct PidPilot {
    t: PidTuning,
    trim: Trim,
    pitch_limits: (f64, f64),
    ih: f64,
    iv: f64,
    pitch: PitchLoop,
}

impl PidPilot {
    /// The pilot about a trim, with the pitch command limited as the energy law's.
    pub fn new(t: PidTuning, trim: Trim, pitch_limits: (f64, f64), pitch: PitchLoop) -> PidPilot {
        PidPilot {
            t,
            trim,
            pitch_limits,
            ih: 0.0,
            iv: 0.0,
            pitch,
        }
    }
}

impl Pilot for PidPilot {
    fn name(&self) -> &str {
        "pid"
    }

    fn step(&mut self, m: &Measured, r: &References, dt: f64) -> (Controls, Notes) {
        let eh = r.h - m.h;
        let theta0 = self.trim.state.theta;
        let raw =
            theta0 + self.t.kp_h * eh + self.t.ki_h * self.ih + self.t.kd_h * (r.hdot - m.hdot);
        let theta_cmd = raw.clamp(self.pitch_limits.0, self.pitch_limits.1);
        if raw == theta_cmd || (raw > theta_cmd) != (eh > 0.0) {
            self.ih += eh * dt;
        }
        let ev = r.va - m.va;
        let raw_t = self.trim.controls.throttle + self.t.kp_v * ev + self.t.ki_v * self.iv;
        let throttle = raw_t.clamp(0.0, 1.0);
        if raw_t == throttle || (raw_t > throttle) != (ev > 0.0) {
            self.iv += ev * dt;
        }
        let elevator = self.pitch.elevator(theta_cmd, m, dt);
        (Controls { elevator, throttle }, Notes::default())
    }
}

/// LQR with integral action on the model linearised at the initial trim: state
/// (u, w, q, θ, h) about the trim moved to the reference, plus ∫(h − h_r) and ∫(V − V_r);
/// inputs elevator and throttle directly. Integrators freeze while an actuator saturates.
pub struct LqrPilot {
    k: DMatrix<f64>,
    trim: Trim,
    limits: (f64, f64),
    zh: f64,
    zv: f64,
}

impl LqrPilot {
    /// Designs the regulator.
    pub fn new(af: &Airframe, trim: Trim, t: &LqrTuning) -> Result<LqrPilot, String> {
        let (a, b) = linearise(af, &trim);
        let n = 7;
        let mut aa = DMatrix::zeros(n, n);
        aa.view_mut((0, 0), (5, 5)).copy_from(&a);
        // ż_h = h − h_r, ż_V = V − V_r with V ≈ (u₀·u + w₀·w)/V₀
        let (u0, w0) = (trim.state.u, trim.state.w);
        let v0 = (u0 * u0 + w0 * w0).sqrt();
        aa[(5, 4)] = 1.0;
        aa[(6, 0)] = u0 / v0;
        aa[(6, 1)] = w0 / v0;
        let mut bb = DMatrix::zeros(n, 2);
        bb.view_mut((0, 0), (5, 2)).copy_from(&b);
        let bryson = |d: &[f64]| {
            DMatrix::from_diagonal(&DVector::from_iterator(
                d.len(),
                d.iter().map(|x| 1.0 / (x * x)),
            ))
        };
        let k = lqr(&aa, &bb, &bryson(&t.states), &bryson(&t.inputs)).map_err(|e| e.0)?;
        Ok(LqrPilot {
            k,
            trim,
            limits: (af.elevator_limit, 1.0),
            zh: 0.0,
            zv: 0.0,
        })
    }
}

impl Pilot for LqrPilot {
    fn name(&self) -> &str {
        "lqr"
    }

    fn step(&mut self, m: &Measured, r: &References, dt: f64) -> (Controls, Notes) {
        let s = self.trim.state;
        let v0 = (s.u * s.u + s.w * s.w).sqrt();
        let alpha0 = self.trim.alpha;
        // the trim moved to the reference airspeed along the trim's angle of attack
        let u_ref = s.u + (r.va - v0) * alpha0.cos();
        let w_ref = s.w + (r.va - v0) * alpha0.sin();
        let x = DVector::from_row_slice(&[
            m.uw.0 - u_ref,
            m.uw.1 - w_ref,
            m.q,
            m.theta - s.theta,
            m.h - r.h,
            self.zh,
            self.zv,
        ]);
        let du = -(&self.k * x);
        let raw_e = self.trim.controls.elevator + du[0];
        let raw_t = self.trim.controls.throttle + du[1];
        let elevator = raw_e.clamp(-self.limits.0, self.limits.0);
        let throttle = raw_t.clamp(0.0, self.limits.1);
        if elevator == raw_e && throttle == raw_t {
            self.zh += (m.h - r.h) * dt;
            self.zv += (m.va - r.va) * dt;
        }
        (Controls { elevator, throttle }, Notes::default())
    }
}
