//! The simulation flies the emitted law: along whole closed-loop trajectories, every step of
//! the energy law the simulation ran (the codegen interpreter) equals the committed generated
//! Rust, given the same inputs, bit for bit; and the guidance filters likewise.

use lawsmith_sim::pilots::{EnergyPilot, Measured, Notes, Pilot, References};
use lawsmith_sim::run::Setup;
use lawsmith_sim::scenario::Scenario;
use std::path::PathBuf;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

/// The simulation's energy pilot, recording each step's law inputs and outputs.
struct Recorder {
    inner: EnergyPilot,
    steps: Vec<(Vec<f64>, lawsmith_codegen::StepOutput)>,
}

impl Pilot for Recorder {
    fn name(&self) -> &'static str {
        "energy"
    }
    fn step(
        &mut self,
        m: &Measured,
        r: &References,
        dt: f64,
    ) -> (lawsmith_sim::airframe::Controls, Notes) {
        let out = self.inner.step(m, r, dt);
        self.steps.push((
            self.inner.last_inputs().to_vec(),
            self.inner.last_output().expect("a step").clone(),
        ));
        out
    }
}

#[test]
fn the_simulated_energy_law_is_the_emitted_rust_bit_for_bit() {
    let mut total = 0;
    for file in ["combined.yaml", "gusts.yaml", "drag_mismatch.yaml"] {
        let text = std::fs::read_to_string(root().join("specs/scenarios").join(file)).unwrap();
        let sc = Scenario::parse(&text).unwrap();
        let spec_name = sc
            .spec
            .trim_start_matches("../")
            .trim_end_matches(".yaml")
            .to_string();
        let spec = lawsmith_spec::load(
            &std::fs::read_to_string(root().join("specs").join(format!("{spec_name}.yaml")))
                .unwrap(),
        )
        .unwrap();
        let setup = Setup::new(sc, &spec).unwrap();
        let v = setup.nominal();
        let mut rec = Recorder {
            inner: setup.energy_pilot(&v).unwrap(),
            steps: Vec::new(),
        };
        let flight = setup.fly_with(&mut rec, &v).unwrap();
        assert_eq!(rec.steps.len(), flight.samples.len());
        let gains = rec.inner.gains().to_vec();
        for (inputs, want) in &rec.steps {
            let (cmds, limits, domain, _) = lawsmith_emitted::step(&spec_name, inputs, &gains)
                .expect("generated code for the spec");
            assert_eq!((limits, domain), (want.limits, want.domain), "{file}");
            for (a, b) in cmds.iter().zip(&want.commands) {
                assert_eq!(a.to_bits(), b.to_bits(), "{file}: {inputs:?}");
            }
        }
        // the guidance filters along the scenario's commands
        let law = &setup.law;
        let mut refs = vec![setup.scenario.initial.h, setup.scenario.initial.va];
        let mut rates = vec![0.0; 2];
        let mut state = vec![refs[0], 0.0, refs[1], 0.0];
        for s in &flight.samples {
            let cmds = [s.h_cmd, s.va_cmd];
            law.update(&mut refs, &mut rates, &cmds, &gains, 0.02);
            lawsmith_emitted::update(&spec_name, &mut state, &cmds, &gains, 0.02).unwrap();
            assert_eq!(state[0].to_bits(), refs[0].to_bits());
            assert_eq!(state[1].to_bits(), rates[0].to_bits());
            assert_eq!(state[2].to_bits(), refs[1].to_bits());
            assert_eq!(state[3].to_bits(), rates[1].to_bits());
        }
        total += rec.steps.len();
    }
    println!("{total} control steps of simulated flight: the interpreter equals the emitted Rust bit for bit");
}
