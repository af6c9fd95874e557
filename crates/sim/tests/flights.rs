//! Properties of the flights themselves: convergence of the integration, the metrics on a
//! known response, determinism of Monte Carlo campaigns, the scenario format's errors.

use lawsmith_sim::fly::{metrics, Flight, Sample};
use lawsmith_sim::montecarlo::campaign;
use lawsmith_sim::run::{Setup, PILOTS};
use lawsmith_sim::scenario::Scenario;
use std::path::PathBuf;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn setup(file: &str, edit: impl FnOnce(&mut Scenario)) -> Setup {
    let text = std::fs::read_to_string(root().join("specs/scenarios").join(file)).unwrap();
    let mut sc = Scenario::parse(&text).unwrap();
    edit(&mut sc);
    let spec_text = std::fs::read_to_string(root().join("specs/scenarios").join(&sc.spec)).unwrap();
    let spec = lawsmith_spec::load(&spec_text).unwrap();
    Setup::new(sc, &spec).unwrap()
}

#[test]
fn the_default_plant_rate_is_converged() {
    // RK4 at the default rate against 8 times finer, on a deterministic scenario: the
    // difference must be far below anything a metric reports (common practice: halve the
    // step until the answer stops changing)
    let coarse = setup("combined.yaml", |_| {});
    let fine = setup("combined.yaml", |s| s.rates.plant *= 8.0);
    for p in PILOTS {
        let a = coarse.fly(p, &coarse.nominal()).unwrap();
        let b = fine.fly(p, &fine.nominal()).unwrap();
        let dh = a
            .samples
            .iter()
            .zip(&b.samples)
            .map(|(x, y)| (x.h - y.h).abs())
            .fold(0.0, f64::max);
        let dv = a
            .samples
            .iter()
            .zip(&b.samples)
            .map(|(x, y)| (x.va - y.va).abs())
            .fold(0.0, f64::max);
        println!("{p}: default vs 8x rate: max |dh| {dh:.2e} m, max |dV| {dv:.2e} m/s");
        assert!(dh < 1e-3 && dv < 1e-3, "{p}: {dh} {dv}");
    }
}

fn synthetic(values: &[(f64, f64, f64)]) -> Flight {
    // (t, h, h_cmd) with airspeed on its command
    Flight {
        pilot: "test".into(),
        samples: values
            .iter()
            .map(|&(t, h, c)| Sample {
                t,
                h,
                h_cmd: c,
                h_r: c,
                va: 20.0,
                va_cmd: 20.0,
                va_r: 20.0,
                ..Sample::default()
            })
            .collect(),
    }
}

#[test]
fn step_metrics_follow_their_definitions() {
    // a 10 m step at t = 1 reaching 11.5 m above (15% overshoot), inside ±0.5 m from t = 6
    let mut v = vec![(0.0, 0.0, 0.0)];
    let shape = [0.0, 4.0, 9.0, 11.5, 11.0, 10.6, 10.4, 10.2, 10.1, 10.0];
    for (i, h) in shape.iter().enumerate() {
        v.push((1.0 + i as f64, *h, 10.0));
    }
    let m = metrics(&synthetic(&v));
    assert!((m["altitude_overshoot"] - 15.0).abs() < 1e-9, "{m:?}");
    // last sample outside the 5% band (0.5 m) is t = 6 (10.6): settled from t = 7, 6 s after
    assert!((m["altitude_settling_time"] - 6.0).abs() < 1e-9, "{m:?}");
    assert!(
        m["airspeed_overshoot"].is_nan(),
        "no airspeed step: undefined"
    );
    // the first peak only: 11 m (10%), back below the target, then a gust to 13 m later
    let mut v = vec![(0.0, 0.0, 0.0)];
    let shape = [0.0, 6.0, 11.0, 10.2, 9.8, 10.0, 13.0, 10.0];
    for (i, h) in shape.iter().enumerate() {
        v.push((1.0 + i as f64, *h, 10.0));
    }
    let m = metrics(&synthetic(&v));
    assert!((m["altitude_overshoot"] - 10.0).abs() < 1e-9, "{m:?}");
    // a step that never settles
    let v = vec![
        (0.0, 0.0, 0.0),
        (1.0, 0.0, 10.0),
        (2.0, 3.0, 10.0),
        (3.0, 20.0, 10.0),
    ];
    assert!(metrics(&synthetic(&v))["altitude_settling_time"].is_nan());
}

#[test]
fn campaigns_do_not_depend_on_the_thread_count() {
    let s = setup("gusts.yaml", |sc| sc.duration = 20.0);
    let all = campaign(&s, 6, 3).unwrap();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let one = pool.install(|| campaign(&s, 6, 3).unwrap());
    for (p, m) in &all.values {
        for (k, v) in m {
            let w = &one.values[p][k];
            assert!(
                v.iter().zip(w).all(|(a, b)| a.to_bits() == b.to_bits()),
                "{p} {k}"
            );
        }
    }
    // and the dispersions do change the runs
    let e = &all.values["energy"]["energy_error_rms"];
    assert!(e.windows(2).any(|w| w[0] != w[1]));
}

#[test]
fn bad_scenarios_are_explained() {
    for (text, want) in [
        ("name: x\nspec: a.yaml\nduration: 10\ninitial: { h: 1, va: 2 }\nwind: { turbulence: stormy }\n", "unknown turbulence"),
        ("name: x\nspec: a.yaml\nduration: -1\ninitial: { h: 1, va: 2 }\n", "duration"),
        ("name: x\nspec: a.yaml\nduration: 10\ninitial: { h: 1, va: 2 }\nrates: { plant: 50, control: 40 }\n", "divide"),
        ("name: x\nspec: a.yaml\nduration: 10\ninitial: { h: 1, va: 2 }\ncommands:\n  - { at: 5, h: 3 }\n  - { at: 2, h: 4 }\n", "in order"),
        ("name: x\nspec: a.yaml\nduration: 10\ninitial: { h: 1, va: 2 }\nwindd: {}\n", "windd"),
    ] {
        let e = Scenario::parse(text).unwrap_err();
        assert!(e.0.contains(want), "{want}: {e}");
    }
    // an unknown key is located: serde-saphyr names line and column
    let e = Scenario::parse(
        "name: x\nspec: a.yaml\nduration: 10\ninitial: { h: 1, va: 2 }\nwindd: {}\n",
    )
    .unwrap_err();
    assert!(e.0.contains("line 5"), "{e}");
}

#[test]
fn a_spec_whose_model_is_not_the_airframe_is_flown_with_a_warning() {
    // the demo spec matches the demo airframe; a copy declaring an 18 kg aircraft does not,
    // and the setup says so with both values (common practice: a law's model parameters are
    // checked against the plant it is flown on)
    assert!(setup("altitude_step_up.yaml", |_| {}).mismatches.is_empty());
    let text = std::fs::read_to_string(root().join("specs/energy_longitudinal.yaml")).unwrap();
    let heavy =
        lawsmith_spec::load(&text.replace("value: 7.5, unit: kg", "value: 18, unit: kg")).unwrap();
    let sc_text =
        std::fs::read_to_string(root().join("specs/scenarios/altitude_step_up.yaml")).unwrap();
    let s = Setup::new(Scenario::parse(&sc_text).unwrap(), &heavy).unwrap();
    assert_eq!(s.mismatches.len(), 1, "{:?}", s.mismatches);
    assert!(
        s.mismatches[0].contains("mass = 18 kg") && s.mismatches[0].contains("7.5 kg"),
        "{}",
        s.mismatches[0]
    );
}
