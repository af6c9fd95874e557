//! The proved round-off bounds against the compiled code and an exact evaluation: for each
//! example law, points of the envelope (as single-precision values, so both precisions read
//! the same inputs) are run through the committed C in double and in single precision, built
//! strict by `cc`; the exact law is evaluated at each point by mpmath at 50 significant
//! digits from the spec itself (`tests/python/roundoff_exact.py`, through the independent
//! checker's SymPy reader, sharing nothing with lawsmith's Rust). The largest error observed
//! must never exceed the bound `lawsmith_verify::law_roundoff` proves.

mod common;

use common::*;
use lawsmith_codegen::{Controller, Float};
use lawsmith_expr::random::Rng;
use std::io::Write as _;
use std::process::{Command, Stdio};

/// Leaves of the round-off analysis per output.
const LEAVES: usize = 4_000;

#[test]
fn sampled_errors_of_the_compiled_code_stay_within_the_proved_bounds() {
    let dir = std::env::temp_dir().join(format!("lawsmith-roundoff-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let mut rng = Rng(20261206);
    let cc = compilers()[0].clone();
    // the reference law at 10^5 points, the others at fewer (mpmath is slow)
    let runs = [
        ("energy_longitudinal", 100_000),
        ("energy_adaptive", 10_000),
        ("pendulum_damping", 10_000),
    ];
    for (name, n) in runs {
        let c = Controller::new(&load(name)).unwrap();
        let bounds = |f: Float| lawsmith_verify::law_roundoff(&c, f, LEAVES);
        let (b64, b32) = (bounds(Float::F64), bounds(Float::F32));
        // points both readers accept without a domain flag
        let mut cases: Vec<(Vec<f32>, Vec<f32>, Vec<f32>)> = Vec::new();
        while cases.len() < n {
            let (x, g) = inside(&c, &mut rng);
            let m: Vec<f64> = c
                .memory
                .iter()
                .map(|m| uniform(&mut rng, m.limits))
                .collect();
            let single = |v: &[f64]| v.iter().map(|&x| x as f32).collect::<Vec<f32>>();
            let (x, g, m) = (single(&x), single(&g), single(&m));
            let wide = |v: &[f32]| v.iter().map(|&x| f64::from(x)).collect::<Vec<f64>>();
            let accepted32 = !c.run(&x, &g, &mut m.clone(), 0.0).domain;
            let accepted64 = !c.run(&wide(&x), &wide(&g), &mut wide(&m), 0.0).domain;
            if accepted32 && accepted64 {
                cases.push((x, g, m));
            }
        }
        let mut input = vec![cases.len() as f64];
        let mut points = Vec::new();
        for (x, g, m) in &cases {
            let wide = |v: &[f32]| v.iter().map(|&x| f64::from(x)).collect::<Vec<f64>>();
            input.extend(case_values(&c, &wide(x), &wide(g), Some(&wide(m)), 0.0));
            let mut p = wide(x);
            p.extend(wide(m));
            p.extend(wide(g));
            points.push(p);
        }
        input.extend([0.0, 0.0, 0.0]); // no guidance points, no sequences
        let na = c.actuators.len();
        let mut runs_json = serde_json::Map::new();
        for (float, sub) in [(Float::F64, ""), (Float::F32, "f32")] {
            let gen = root().join("generated").join(name).join(sub);
            let exe = build_c(&cc, &dir, &gen, &c, &[]);
            let out = run_c(&exe, &input);
            let per = per_case(&c);
            let commands: Vec<Vec<f64>> = (0..cases.len())
                .map(|k| out[k * per..k * per + na].to_vec())
                .collect();
            let limits: Vec<(f64, f64)> =
                c.actuators.iter().map(|a| float.inward(a.limits)).collect();
            let key = if float == Float::F64 { "f64" } else { "f32" };
            runs_json.insert(
                key.into(),
                serde_json::json!({ "limits": limits, "commands": commands }),
            );
        }
        let mut names = c.input_names();
        names.extend(c.memory.iter().map(|m| m.name.clone()));
        names.extend(c.gains.iter().map(|g| g.name.clone()));
        let actuators: Vec<String> = c.actuators.iter().map(|a| a.name.clone()).collect();
        let job = serde_json::json!({
            "spec": root().join(format!("specs/{name}.yaml")),
            "inputs": names,
            "actuators": actuators,
            "points": points,
            "runs": runs_json,
        })
        .to_string();
        let mut child = Command::new("python3")
            .arg(root().join("tests/python/roundoff_exact.py"))
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .expect("python3 (see scripts/test)");
        child
            .stdin
            .take()
            .unwrap()
            .write_all(job.as_bytes())
            .unwrap();
        let out = child.wait_with_output().unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let worst: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        for (float, bounds) in [("f64", &b64), ("f32", &b32)] {
            for (j, a) in actuators.iter().enumerate() {
                let seen = worst[float][a].as_f64().expect("a worst error");
                let bound = bounds[j].bound;
                assert_eq!(bounds[j].output, *a);
                println!(
                    "{name} {float} {a}: proved |computed - exact| <= {bound:.3e}, worst of {} sampled points {seen:.3e} (bound / worst {:.1})",
                    cases.len(),
                    bound / seen.max(f64::MIN_POSITIVE)
                );
                assert!(seen <= bound, "{name} {float} {a}: {seen:e} > {bound:e}");
            }
        }
    }
    std::fs::remove_dir_all(&dir).unwrap();
}
