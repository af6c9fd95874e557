//! A scenario made ready to fly, and its three flights.

use crate::airframe::Airframe;
use crate::fly::{fly, Flight, Perturbation};
use crate::linear::{trim, Trim};
use crate::pilots::{EnergyPilot, LqrPilot, PidPilot, PitchLoop};
use crate::scenario::{Estimates, Scenario};
use lawsmith_codegen::Controller;

/// The controllers every scenario flies, in report order.
pub const PILOTS: [&str; 3] = ["energy", "pid", "lqr"];

/// A scenario with its law, airframe and trim.
#[derive(Clone, Debug)]
pub struct Setup {
    /// The scenario.
    pub scenario: Scenario,
    /// The energy law (the generated controller).
    pub law: Controller,
    /// Its gains.
    pub gains: Vec<f64>,
    /// The airframe the controllers' models assume.
    pub model: Airframe,
}

/// One flight's variations: the truth airframe and the estimate errors.
#[derive(Clone, Debug)]
pub struct Variant {
    /// The truth airframe.
    pub truth: Airframe,
    /// What the controllers' estimates get wrong.
    pub estimates: Estimates,
    /// Wind and seed changes.
    pub perturbation: Perturbation,
}

/// Why a scenario cannot be set up.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum SetupError {
    /// The scenario contradicts its spec (a gain it does not declare, gains outside the
    /// proved set).
    Invalid(String),
    /// The simulator cannot fly this spec (its states are not the airframe's).
    Unsupported(String),
}

impl std::fmt::Display for SetupError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            SetupError::Invalid(m) | SetupError::Unsupported(m) => f.write_str(m),
        }
    }
}

impl Setup {
    /// Prepares a scenario flying the law of `spec` on the demo airframe.
    pub fn new(scenario: Scenario, spec: &lawsmith_spec::Spec) -> Result<Setup, SetupError> {
        let law = Controller::new(spec).map_err(|e| SetupError::Unsupported(e.0))?;
        let mut gains: Vec<f64> = law.gains.iter().map(|g| g.default).collect();
        for (name, v) in &scenario.gains {
            let i = law
                .gains
                .iter()
                .position(|g| &g.name == name)
                .ok_or_else(|| {
                    SetupError::Invalid(format!(
                        "the scenario sets gain `{name}`, which the spec does not declare"
                    ))
                })?;
            gains[i] = *v;
        }
        if !law.gains_valid(&gains) {
            return Err(SetupError::Invalid(
                "the scenario's gains leave the spec's proved gain set".into(),
            ));
        }
        crate::fly::proved_box(&law).ok_or_else(|| {
            SetupError::Unsupported(
                "the spec must have states `h` and `va` for the simulation".into(),
            )
        })?;
        Ok(Setup {
            scenario,
            law,
            gains,
            model: Airframe::default(),
        })
    }

    /// The nominal variant: truth = model, the scenario's estimates.
    pub fn nominal(&self) -> Variant {
        Variant {
            truth: self.model.clone(),
            estimates: self.scenario.estimates,
            perturbation: Perturbation::default(),
        }
    }

    /// The trim of the truth airframe at the scenario's initial flight.
    pub fn trim(&self, truth: &Airframe) -> Result<Trim, String> {
        trim(
            truth,
            self.scenario.initial.va,
            self.scenario.initial.h,
            0.0,
        )
        .map_err(|e| e.0)
    }

    /// The controller `pilot` ("energy", "pid", "lqr") for a variant, designed on the model.
    pub fn pilot(&self, pilot: &str, v: &Variant) -> Result<Box<dyn crate::pilots::Pilot>, String> {
        if pilot == "energy" {
            return Ok(Box::new(self.energy_pilot(v)?));
        }
        // the controllers are designed on the model, not the (dispersed) truth
        let model_trim = self.trim(&self.model)?;
        let t = &self.scenario.tuning;
        let pitch = PitchLoop::new(
            t.pitch,
            model_trim.controls.elevator,
            self.model.elevator_limit,
        );
        let pitch_limits = self
            .law
            .actuators
            .iter()
            .find(|a| a.name == "pitch_cmd")
            .map(|a| a.limits)
            .unwrap_or((-0.35, 0.45));
        match pilot {
            "pid" => Ok(Box::new(PidPilot::new(
                t.pid,
                model_trim,
                pitch_limits,
                pitch,
            ))),
            "lqr" => Ok(Box::new(LqrPilot::new(&self.model, model_trim, &t.lqr)?)),
            other => Err(format!("unknown controller `{other}`")),
        }
    }

    /// The energy-law controller for a variant.
    pub fn energy_pilot(&self, v: &Variant) -> Result<EnergyPilot, String> {
        let model_trim = self.trim(&self.model)?;
        let pitch = PitchLoop::new(
            self.scenario.tuning.pitch,
            model_trim.controls.elevator,
            self.model.elevator_limit,
        );
        EnergyPilot::new(
            self.law.clone(),
            self.gains.clone(),
            self.model.clone(),
            v.estimates,
            pitch,
        )
    }

    /// Flies one controller.
    pub fn fly(&self, pilot: &str, v: &Variant) -> Result<Flight, String> {
        let mut p = self.pilot(pilot, v)?;
        self.fly_with(p.as_mut(), v)
    }

    /// Flies a given controller (e.g. one wrapped to record what it does).
    pub fn fly_with(
        &self,
        p: &mut dyn crate::pilots::Pilot,
        v: &Variant,
    ) -> Result<Flight, String> {
        let truth_trim = self.trim(&v.truth)?;
        Ok(fly(
            &self.scenario,
            &v.truth,
            &truth_trim,
            &self.law,
            &self.gains,
            p,
            v.perturbation,
        ))
    }
}
