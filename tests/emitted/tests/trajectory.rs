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

/// A generated law's pilot, recording each step's inputs, the controller states it started
/// from, its output and the controller states it ended with.
struct Recorder {
    inner: EnergyPilot,
    steps: Vec<Step>,
}

struct Step {
    inputs: Vec<f64>,
    memory: Vec<f64>,
    out: lawsmith_codegen::StepOutput,
    memory_after: Vec<f64>,
}

impl Pilot for Recorder {
    fn name(&self) -> &str {
        self.inner.name()
    }
    fn step(
        &mut self,
        m: &Measured,
        r: &References,
        dt: f64,
    ) -> (lawsmith_sim::airframe::Controls, Notes) {
        let out = self.inner.step(m, r, dt);
        self.steps.push(Step {
            inputs: self.inner.last_inputs().to_vec(),
            memory: self.inner.last_memory().to_vec(),
            out: self.inner.last_output().expect("a step").clone(),
            memory_after: self.inner.memory().to_vec(),
        });
        out
    }
}

#[test]
fn the_simulated_energy_law_is_the_emitted_rust_bit_for_bit() {
    let mut total = 0;
    let mut with_memory = 0;
    for file in ["combined.yaml", "gusts.yaml", "drag_mismatch.yaml"] {
        let text = std::fs::read_to_string(root().join("specs/scenarios").join(file)).unwrap();
        let sc = Scenario::parse(&text).unwrap();
        let spec_of = |path: &str| {
            let text = std::fs::read_to_string(root().join("specs/scenarios").join(path)).unwrap();
            lawsmith_spec::load(&text).unwrap()
        };
        let spec = spec_of(&sc.spec);
        let compared: Vec<lawsmith_spec::Spec> = sc.compare.iter().map(|c| spec_of(c)).collect();
        let refs: Vec<&lawsmith_spec::Spec> = compared.iter().collect();
        let setup = Setup::new(sc, &spec).unwrap().comparing(&refs).unwrap();
        let v = setup.nominal();
        // every generated law the scenario flies, its controller states carried from step to
        // step: the emitted Rust, given the same inputs and states, computes the same
        // commands and the same next states
        for pilot in setup.pilots() {
            let Some(p) = setup.law_pilot_named(&pilot, &v) else {
                continue;
            };
            let mut rec = Recorder {
                inner: p.unwrap(),
                steps: Vec::new(),
            };
            let flight = setup.fly_with(&mut rec, &v).unwrap();
            assert_eq!(rec.steps.len(), flight.samples.len());
            let gains = rec.inner.gains().to_vec();
            let name = rec.inner.law().name.clone();
            let dt = 1.0 / setup.scenario.rates.control;
            for st in &rec.steps {
                let mut memory = st.memory.clone();
                let (cmds, limits, domain, _, memory_limits) =
                    lawsmith_emitted::step(&name, &st.inputs, &gains, &mut memory, dt)
                        .expect("generated code for the spec");
                assert_eq!((limits, domain), (st.out.limits, st.out.domain), "{file}");
                assert_eq!(memory_limits, st.out.memory_limits, "{file}");
                for (a, b) in cmds.iter().zip(&st.out.commands) {
                    assert_eq!(a.to_bits(), b.to_bits(), "{file} {name}: {:?}", st.inputs);
                }
                for (a, b) in memory.iter().zip(&st.memory_after) {
                    assert_eq!(a.to_bits(), b.to_bits(), "{file} {name}: controller states");
                }
            }
            if !rec.inner.memory().is_empty() {
                with_memory += rec.steps.len();
            }
            total += rec.steps.len();
        }
        // the guidance filters along the scenario's commands
        let law = &setup.law;
        let spec_name = law.name.clone();
        let gains = setup.gains.clone();
        let flight = setup.fly("energy", &v).unwrap();
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
    }
    // the adaptive and integral laws of drag_mismatch fly with their states
    assert!(
        with_memory >= 2 * 4500,
        "{with_memory} steps with controller states"
    );
    println!("{total} control steps of simulated flight ({with_memory} with controller states): the interpreter equals the emitted Rust bit for bit");
}

#[test]
fn a_flight_in_single_precision_is_the_emitted_f32_rust_bit_for_bit() {
    // the combined scenario (climb, speed change, gusts) with the law in f32: every step the
    // simulation ran equals the committed f32 Rust given the same inputs (as f32); and the
    // flight stays within millimetres of the double-precision one
    let mut total = 0;
    for file in ["combined.yaml", "drag_mismatch.yaml"] {
        let text = std::fs::read_to_string(root().join("specs/scenarios").join(file)).unwrap();
        let spec_of = |path: &str| {
            let text = std::fs::read_to_string(root().join("specs/scenarios").join(path)).unwrap();
            lawsmith_spec::load(&text).unwrap()
        };
        let double = Scenario::parse(&text).unwrap();
        let mut single = double.clone();
        single.arithmetic = lawsmith_sim::scenario::Arithmetic::Single;
        let spec = spec_of(&double.spec);
        let compared: Vec<lawsmith_spec::Spec> =
            double.compare.iter().map(|c| spec_of(c)).collect();
        let refs: Vec<&lawsmith_spec::Spec> = compared.iter().collect();
        let s64 = Setup::new(double, &spec).unwrap().comparing(&refs).unwrap();
        let s32 = Setup::new(single, &spec).unwrap().comparing(&refs).unwrap();
        let v = s32.nominal();
        for pilot in s32.pilots() {
            let Some(p) = s32.law_pilot_named(&pilot, &v) else {
                continue;
            };
            let mut rec = Recorder {
                inner: p.unwrap(),
                steps: Vec::new(),
            };
            let flight = s32.fly_with(&mut rec, &v).unwrap();
            let single = |v: &[f64]| v.iter().map(|&x| x as f32).collect::<Vec<f32>>();
            let gains = single(rec.inner.gains());
            let name = rec.inner.law().name.clone();
            let dt = (1.0 / s32.scenario.rates.control) as f32;
            for st in &rec.steps {
                let mut memory = single(&st.memory);
                let (cmds, limits, domain, _, _) =
                    lawsmith_emitted::step_f32(&name, &single(&st.inputs), &gains, &mut memory, dt)
                        .expect("f32 code for the spec");
                assert_eq!((limits, domain), (st.out.limits, st.out.domain), "{file}");
                for (a, b) in cmds.iter().zip(&st.out.commands) {
                    assert_eq!(f64::from(*a).to_bits(), b.to_bits(), "{file} {name} f32");
                }
                for (a, b) in memory.iter().zip(&st.memory_after) {
                    assert_eq!(
                        f64::from(*a).to_bits(),
                        b.to_bits(),
                        "{file} {name}: f32 states"
                    );
                }
            }
            total += rec.steps.len();
            let other = s64.fly(&pilot, &s64.nominal()).unwrap();
            let dh = flight
                .samples
                .iter()
                .zip(&other.samples)
                .map(|(a, b)| (a.h - b.h).abs())
                .fold(0.0, f64::max);
            println!("{file} {pilot}: f32 law vs f64 law, largest altitude difference {dh:.2e} m");
            assert!(dh > 0.0 && dh < 0.05, "{file} {pilot}: {dh}");
        }
    }
    println!("{total} control steps in single precision equal the emitted f32 Rust bit for bit");
}
