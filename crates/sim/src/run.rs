//! A scenario made ready to fly, and its three flights.

use crate::airframe::Airframe;
use crate::fly::{fly, Flight, Perturbation};
use crate::linear::{trim, Trim};
use crate::pilots::{EnergyPilot, LqrPilot, PidPilot, PitchLoop};
use crate::scenario::Arithmetic;
use crate::scenario::{Estimates, Scenario};
use lawsmith_codegen::Controller;

/// The controllers every scenario flies, in report order: the scenario's energy law, then
/// the laws it compares ([`Setup::pilots`] lists them between), then the baselines.
pub const PILOTS: [&str; 3] = ["energy", "pid", "lqr"];

/// A further law a scenario flies beside its own (the scenario's `compare:`).
#[derive(Clone, Debug)]
pub struct Compared {
    /// Its name in reports: the spec's name.
    pub name: String,
    /// The generated controller.
    pub law: Controller,
    /// Its gains (the spec's defaults).
    pub gains: Vec<f64>,
    /// The controller state that estimates the relative drag error, if one does.
    pub drag_error_state: Option<usize>,
}

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
    /// The controller state of the scenario's law that estimates the relative drag error.
    pub drag_error_state: Option<usize>,
    /// The laws flown beside it.
    pub compare: Vec<Compared>,
    /// Where a spec's model and the simulated airframe disagree, in words with both values:
    /// the proof is about the spec's model, the flight about the airframe.
    pub mismatches: Vec<String>,
}

/// The parameters of a spec (by the demo's names) that the simulated airframe fixes, and its
/// values of them: `mass` in kg, `g` in m/s².
fn model_mismatches(spec: &lawsmith_spec::Spec, airframe: &Airframe) -> Vec<String> {
    use lawsmith_spec::Decl;
    let plant = [
        ("mass", airframe.mass, "kg", "the airframe's mass"),
        ("g", crate::atmosphere::G0, "m/s^2", "standard gravity"),
    ];
    let mut out = Vec::new();
    for (name, value, unit, what) in plant {
        let Some(Decl::Parameter { value: v }) = spec
            .symbols
            .iter()
            .find(|s| s.name == name)
            .map(|s| &s.decl)
        else {
            continue;
        };
        let v = v.value();
        if (v - value).abs() > 1e-9 * value.abs() {
            out.push(format!(
                "spec `{}` declares {name} = {v} {unit}, but the simulated plant uses {what} {value} {unit}: the proof covers the spec's model, not this flight",
                spec.name
            ));
        }
    }
    out
}

/// The controller state of a spec that estimates the relative error of the drag estimate
/// (`estimates:` an error of an uncertain quantity `relative` to the signal `drag`), by its
/// index among the controller states.
fn drag_error_state(spec: &lawsmith_spec::Spec) -> Option<usize> {
    use lawsmith_spec::{Decl, ErrorForm, Settle, SymbolKind};
    spec.symbols_of(SymbolKind::Memory).position(|m| {
        let Decl::Memory {
            settle: Settle::Unknown(u),
            ..
        } = &m.decl
        else {
            return false;
        };
        spec.symbols.iter().any(|q| {
            matches!(&q.decl, Decl::Uncertain { estimate, form: ErrorForm::Relative, delta, .. }
                if estimate == "drag" && delta == u)
        })
    })
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
        let mut law = Controller::new(spec).map_err(|e| SetupError::Unsupported(e.0))?;
        // the guidance filters' rate limits the scenario sets
        let mut limits = Vec::new();
        for (reference, [lo, hi]) in &scenario.rate_limits {
            let f = law
                .filters
                .iter()
                .find(|f| &law.references[f.reference].name == reference)
                .ok_or_else(|| {
                    SetupError::Invalid(format!(
                        "the scenario limits the rate of `{reference}`, which no guidance filter of the spec produces"
                    ))
                })?;
            limits.push((f.rate.clone(), (*lo, *hi)));
        }
        if !limits.is_empty() {
            law = law
                .with_rate_limits(&limits)
                .map_err(|e| SetupError::Invalid(e.0))?;
        }
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
        let model = Airframe::default();
        Ok(Setup {
            scenario,
            law,
            gains,
            mismatches: model_mismatches(spec, &model),
            model,
            drag_error_state: drag_error_state(spec),
            compare: Vec::new(),
        })
    }

    /// The setup with the laws of `specs` flown beside the scenario's own (its `compare:`,
    /// read by the caller), each with its spec's default gains.
    pub fn comparing(mut self, specs: &[&lawsmith_spec::Spec]) -> Result<Setup, SetupError> {
        for spec in specs {
            let law = Controller::new(spec).map_err(|e| SetupError::Unsupported(e.0))?;
            let name = spec.name.clone();
            if self.pilots().contains(&name) {
                return Err(SetupError::Invalid(format!(
                    "`{name}` is flown twice (a compared spec has the name of another controller)"
                )));
            }
            crate::fly::proved_box(&law).ok_or_else(|| {
                SetupError::Unsupported(format!(
                    "the compared spec `{name}` must have states `h` and `va` for the simulation"
                ))
            })?;
            self.mismatches.extend(model_mismatches(spec, &self.model));
            self.compare.push(Compared {
                name,
                gains: law.gains.iter().map(|g| g.default).collect(),
                drag_error_state: drag_error_state(spec),
                law,
            });
        }
        Ok(self)
    }

    /// The controllers this scenario flies, in report order: `energy` (its own law), each
    /// compared law, `pid`, `lqr`.
    pub fn pilots(&self) -> Vec<String> {
        let mut out = vec![PILOTS[0].to_string()];
        out.extend(self.compare.iter().map(|c| c.name.clone()));
        out.extend(PILOTS[1..].iter().map(|p| p.to_string()));
        out
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

    /// The controller `pilot` (one of [`Setup::pilots`]) for a variant, designed on the
    /// model.
    pub fn pilot(&self, pilot: &str, v: &Variant) -> Result<Box<dyn crate::pilots::Pilot>, String> {
        if let Some(p) = self.law_pilot_named(pilot, v) {
            return Ok(Box::new(p?));
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

    /// The generated law `pilot` flies (`energy` or a compared law's name) as a controller
    /// for a variant; None for a baseline.
    pub fn law_pilot_named(&self, pilot: &str, v: &Variant) -> Option<Result<EnergyPilot, String>> {
        if pilot == PILOTS[0] {
            return Some(self.energy_pilot(v));
        }
        let c = self.compare.iter().find(|c| c.name == pilot)?;
        Some(self.law_pilot(&c.name, c.drag_error_state, &c.law, &c.gains, v))
    }

    /// The energy-law controller for a variant.
    pub fn energy_pilot(&self, v: &Variant) -> Result<EnergyPilot, String> {
        self.law_pilot(PILOTS[0], self.drag_error_state, &self.law, &self.gains, v)
    }

    /// A generated law as a controller for a variant.
    fn law_pilot(
        &self,
        name: &str,
        drag_error_state: Option<usize>,
        law: &Controller,
        gains: &[f64],
        v: &Variant,
    ) -> Result<EnergyPilot, String> {
        let model_trim = self.trim(&self.model)?;
        let pitch = PitchLoop::new(
            self.scenario.tuning.pitch,
            model_trim.controls.elevator,
            self.model.elevator_limit,
        );
        let pilot = EnergyPilot::new(
            name,
            drag_error_state,
            law.clone(),
            gains.to_vec(),
            self.model.clone(),
            v.estimates,
            pitch,
        )?;
        Ok(match self.scenario.arithmetic {
            Arithmetic::Double => pilot,
            Arithmetic::Single => pilot.in_single_precision(),
        })
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
