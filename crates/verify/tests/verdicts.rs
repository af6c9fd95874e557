//! Verdicts as data, certificates, determinism.
//!
//! Every spec in `specs/` must be proven; every file in `tests/data/check` states its expected
//! verdict in its first line (`# expect: proven`), with the reason beside it (textbook results
//! such as V̇ = −k·x² for ẋ = −k·x, common practice). Each report (without timings) is locked
//! in an insta snapshot. Every certificate written is accepted by `recheck`, and edited ones
//! are rejected.

use lawsmith_verify::{
    certificate, check, prepare, recheck, report, sha256_hex, CheckReport, GoalKind, Origin,
    Prepared, Settings, Status, Verdict,
};
use serde_json::{json, Value};
use std::path::{Path, PathBuf};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn run(path: &Path) -> (CheckReport, Prepared, Vec<u8>) {
    let bytes = std::fs::read(path).unwrap();
    let mut spec = lawsmith_spec::load(std::str::from_utf8(&bytes).unwrap()).unwrap();
    let (r, p) = check(&mut spec, &Settings::default(), &|_, _, _| {}).unwrap();
    (r, p, bytes)
}

fn cert_of(r: &CheckReport, p: &Prepared, bytes: &[u8]) -> Value {
    let origin = Origin {
        file: "spec.yaml",
        sha256: sha256_hex(bytes),
        tool_version: "test",
        settings: json!({}),
    };
    // through text, as a reader gets it
    let text = serde_json::to_string(&certificate(r, p, &origin)).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn recheck_ok(cert: &Value, bytes: &[u8]) -> Result<lawsmith_verify::Rechecked, String> {
    let mut spec = lawsmith_spec::load(std::str::from_utf8(bytes).unwrap()).unwrap();
    let p = prepare(&mut spec).unwrap();
    recheck(cert, &sha256_hex(bytes), &p).map_err(|e| e.0)
}

fn expected(path: &Path) -> Verdict {
    let text = std::fs::read_to_string(path).unwrap();
    match text
        .lines()
        .next()
        .and_then(|l| l.strip_prefix("# expect: "))
    {
        Some("proven") => Verdict::Proven,
        Some("falsified") => Verdict::Falsified,
        Some("inconclusive") => Verdict::Inconclusive,
        Some(other) => panic!("{}: unknown expectation {other}", path.display()),
        // the product's own examples must all be proven
        None => Verdict::Proven,
    }
}

/// The `# actuators: NAME VERDICT` lines of a check case: each command's expected verdict
/// against its limits.
fn expected_actuators(path: &Path) -> Vec<(String, String)> {
    let text = std::fs::read_to_string(path).unwrap();
    text.lines()
        .take_while(|l| l.starts_with('#'))
        .filter_map(|l| l.strip_prefix("# actuators: "))
        .map(|l| {
            let (name, verdict) = l.split_once(' ').unwrap();
            (name.to_string(), verdict.to_string())
        })
        .collect()
}

fn check_one(path: &Path, dir: &str) {
    let (r, p, bytes) = run(path);
    assert_eq!(r.verdict, expected(path), "{}", report::text(&r, "", false));
    let got: Vec<(String, String)> = r
        .saturation
        .iter()
        .map(|s| (s.actuator.clone(), s.verdict().to_string()))
        .collect();
    for want in expected_actuators(path) {
        assert!(
            got.contains(&want),
            "{}: {want:?} not in {got:?}",
            path.display()
        );
    }
    if r.verdict == Verdict::Falsified {
        let cx = r.counterexample.as_ref().expect("a counterexample");
        assert!(cx.point.len() >= p.problem.variables.len());
    }
    let cert = cert_of(&r, &p, &bytes);
    let ok = recheck_ok(&cert, &bytes).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    assert_eq!(ok.verdict, r.verdict);
    let rechecked: Vec<(String, String)> = ok
        .actuators
        .iter()
        .map(|(a, w)| (a.clone(), w.to_string()))
        .collect();
    assert_eq!(rechecked, got, "{}", path.display());
    let name = format!("{dir}/{}", path.file_name().unwrap().to_string_lossy());
    insta::assert_snapshot!(report::text(&r, &name, false));
}

#[test]
fn every_example_spec_is_proven_with_a_certificate_that_rechecks() {
    insta::glob!("../../../specs", "*.yaml", |path| check_one(path, "specs"));
}

#[test]
fn every_check_case_gets_its_expected_verdict_and_a_certificate_that_rechecks() {
    insta::glob!("../../../tests/data/check", "*.yaml", |path| {
        check_one(path, "tests/data/check")
    });
}

#[test]
fn every_proof_box_holds_the_declared_range() {
    // each end rounded outward from the decimal written (0.05 is above 1/20 as a double, so
    // its nearest double alone would leave 1/20 out; IEEE 754 binary64, common practice)
    let dirs = [
        "specs",
        "tests/data/check",
        "tests/data/bound",
        "tests/data/ok",
    ];
    let mut widened = 0;
    for dir in dirs {
        for entry in std::fs::read_dir(root().join(dir)).unwrap() {
            let path = entry.unwrap().path();
            if path.extension().is_none_or(|e| e != "yaml") {
                continue;
            }
            let text = std::fs::read_to_string(&path).unwrap();
            let mut spec = lawsmith_spec::load(&text).unwrap();
            let p = prepare(&mut spec).unwrap();
            for v in &p.problem.variables {
                let exact = |x: f64| lawsmith_expr::BigRational::from_float(x).unwrap();
                let (lo, hi) = (v.declared.lo.exact(), v.declared.hi.exact());
                assert!(
                    &exact(v.lo) <= lo && &exact(v.hi) >= hi,
                    "{}: {}",
                    path.display(),
                    v.name
                );
                // and not wider than it must be: the next double inward is inside the range
                assert!(&exact(v.lo.next_up()) > lo && &exact(v.hi.next_down()) < hi);
                widened += usize::from(&exact(v.lo) != lo) + usize::from(&exact(v.hi) != hi);
            }
        }
    }
    assert!(
        widened > 0,
        "some declared end (0.05, 0.2, ...) is not a double"
    );
}

#[test]
fn the_semidefinite_example_fails_as_definite_on_the_plane_of_zero_rate() {
    // V̇ = −k_d·ω² vanishes wherever ω = 0: the counterexample must have Δω = 0, Δφ ≠ 0 and
    // V̇ = 0 exactly (enclosure [0, 0])
    let (r, _, _) = run(&root().join("tests/data/check/pendulum_definite.yaml"));
    let cx = r.counterexample.unwrap();
    let get = |n: &str| cx.coordinates.iter().find(|(m, _)| m == n).unwrap().1;
    assert_eq!(get("Δomega"), 0.0);
    assert_ne!(get("Δphi"), 0.0);
    assert_eq!(cx.quantity, "dV/dt");
    assert!(cx.enclosure.lo() >= 0.0 && cx.enclosure.hi() <= 0.0);
    let (r, _, _) = run(&root().join("specs/pendulum_damping.yaml"));
    assert_eq!(r.verdict, Verdict::Proven);
}

#[test]
fn a_denominator_that_changes_sign_is_ill_posed() {
    let (r, _, _) = run(&root().join("tests/data/check/denominator_sign_change.yaml"));
    assert_eq!(r.well_posed, Some(false));
    let cx = r.counterexample.unwrap();
    assert!(cx.sign_change && cx.vdot.is_none(), "{cx:?}");
    // the later goals are not attempted: V̇ was derived assuming the condition
    assert!(r
        .goals
        .iter()
        .filter(|g| g.kind != GoalKind::Condition)
        .all(|g| matches!(g.status, Status::Skipped)));
}

#[test]
fn edited_certificates_are_rejected() {
    let path = root().join("specs/energy_longitudinal.yaml");
    let (r, p, bytes) = run(&path);
    let cert = cert_of(&r, &p, &bytes);
    recheck_ok(&cert, &bytes).unwrap();
    let claim = cert["goals"].as_array().unwrap().len() - 1;
    let leaves = cert["goals"][claim]["leaves"].as_array().unwrap();
    let bound_leaf = leaves
        .iter()
        .position(|l| l.get("bound").is_some())
        .unwrap();
    let hessian_leaf = leaves
        .iter()
        .position(|l| l.get("hessian").is_some())
        .unwrap();

    let mut edits: Vec<(&str, Value)> = Vec::new();
    let mut c = cert.clone();
    let b = &mut c["goals"][claim]["leaves"][bound_leaf]["bound"];
    b[1] = json!(b[1].as_f64().unwrap() * 2.0);
    edits.push(("a bound made tighter", c));
    let mut c = cert.clone();
    let b = &mut c["goals"][claim]["leaves"][bound_leaf]["bound"];
    b[1] = json!(b[1].as_f64().unwrap() * 0.5);
    edits.push(("a bound made looser", c));
    let mut c = cert.clone();
    let bx = &mut c["goals"][claim]["leaves"][bound_leaf]["box"][0];
    bx[1] = json!(bx[1].as_f64().unwrap() + 0.125);
    edits.push(("a leaf box widened", c));
    let mut c = cert.clone();
    let v = &mut c["goals"][claim]["leaves"][hessian_leaf]["hessian"]["value"];
    *v = json!(v.as_f64().unwrap() * 2.0);
    edits.push(("a Hessian value changed", c));
    let mut c = cert.clone();
    c["goals"][claim]["tree"].as_array_mut().unwrap().pop();
    edits.push(("the tree cut short", c));
    let mut c = cert.clone();
    c["goals"][claim]["leaves"]
        .as_array_mut()
        .unwrap()
        .remove(0);
    c["goals"][claim]["tree"].as_array_mut().unwrap().remove(0);
    edits.push(("a leaf dropped", c));
    let mut c = cert.clone();
    c["domain"][0]["range"] = json!([-1.0, 1.0]);
    edits.push(("the domain narrowed", c));
    let mut c = cert.clone();
    c["goals"][claim]["status"] = json!("inconclusive");
    edits.push(("a goal's status changed (the verdict then disagrees)", c));
    // the actuators: thrust_cmd saturates at a recorded point
    let act = cert["actuators"]
        .as_array()
        .unwrap()
        .iter()
        .position(|a| a["actuator"] == "thrust_cmd" && a["status"] == "refuted")
        .expect("thrust_cmd saturates (12% of the sampled domain commands beyond its limits)");
    let mut c = cert.clone();
    c["actuators"][act]["status"] = json!("proven");
    edits.push(("a saturating actuator called saturation-free", c));
    let mut c = cert.clone();
    let pt = c["actuators"][act]["counterexample"]["point"].clone();
    let dims = c["actuators"][act]["dims"].clone();
    let mut moved = pt.clone();
    // the domain's centre: the command there is the trim thrust, inside [0, 45] N
    for (i, d) in dims.as_array().unwrap().iter().enumerate() {
        if let Some(v) = cert["domain"]
            .as_array()
            .unwrap()
            .iter()
            .find(|v| v["name"] == *d)
        {
            let r = v["range"].as_array().unwrap();
            moved[i] = json!((r[0].as_f64().unwrap() + r[1].as_f64().unwrap()) / 2.0);
        }
    }
    assert_ne!(moved, pt);
    c["actuators"][act]["counterexample"]["point"] = moved;
    edits.push(("a saturation point moved inside the limits", c));
    let mut c = cert.clone();
    c["actuators"][act]["actuator"] = json!("elevator");
    edits.push(("an actuator renamed", c));
    let mut c = cert.clone();
    c["actuators"][act]["limits"][1] = json!("60");
    edits.push(("an actuator's limits widened", c));
    let mut c = cert.clone();
    c["actuators"].as_array_mut().unwrap().remove(act);
    edits.push(("an actuator dropped", c));
    for (what, c) in edits {
        let e = recheck_ok(&c, &bytes).expect_err(what);
        println!("{what}: rejected: {e}");
    }
    // a certificate for another spec
    let other = std::fs::read(root().join("specs/energy_pitch.yaml")).unwrap();
    let mut spec = lawsmith_spec::load(std::str::from_utf8(&other).unwrap()).unwrap();
    let p2 = prepare(&mut spec).unwrap();
    let e = recheck(&cert, &sha256_hex(&other), &p2).unwrap_err();
    assert!(e.0.contains("SHA-256"), "{e}");
}

#[test]
fn the_search_gives_the_same_tree_on_one_thread_and_on_all() {
    let path = root().join("specs/energy_pitch.yaml");
    let (r, p, bytes) = run(&path);
    let all = cert_of(&r, &p, &bytes);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let (r1, p1, _) = pool.install(|| run(&path));
    let one = cert_of(&r1, &p1, &bytes);
    assert_eq!(all, one);
    assert_eq!(r.boxes, r1.boxes);
}
