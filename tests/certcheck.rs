//! The independent checker (`tools/certcheck/`, Python with SymPy and mpmath from PyPI, no
//! code shared with the Rust crates): every certificate `lawsmith check` writes for the
//! example and test specs is accepted with the verdict `check` gave, and every kind of edit of
//! a certificate below is rejected, each for its own stated reason.

use serde_json::{json, Value};
use std::path::{Path, PathBuf};
use std::process::Command;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// A fresh file name (the tests run in parallel and must not share files).
fn scratch(name: &str) -> PathBuf {
    static NEXT: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
    let n = NEXT.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let d = std::env::temp_dir().join(format!("lawsmith-certcheck-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d.join(format!("{n}-{name}"))
}

/// `lawsmith check SPEC --certificate …`: the certificate and the verdict's exit code.
fn certify(spec: &Path) -> (Value, i32) {
    certify_with(spec, &[])
}

/// [`certify`] with more options of `check`.
fn certify_with(spec: &Path, options: &[&str]) -> (Value, i32) {
    let out = scratch(&format!(
        "{}.cert.json",
        spec.file_stem().unwrap().to_string_lossy()
    ));
    let status = Command::new(env!("CARGO_BIN_EXE_lawsmith"))
        .arg("check")
        .arg(spec)
        .arg("--certificate")
        .arg(&out)
        .arg("--quiet")
        .args(options)
        .output()
        .unwrap();
    let text = std::fs::read_to_string(&out).unwrap();
    (
        serde_json::from_str(&text).unwrap(),
        status.status.code().unwrap(),
    )
}

/// Runs the checker on a certificate (written to a file) and a spec: exit code and output.
fn checker(cert: &Value, spec: &Path, tag: &str) -> (i32, String) {
    let path = scratch(&format!("{tag}.json"));
    std::fs::write(&path, serde_json::to_string(cert).unwrap()).unwrap();
    checker_file(&path, spec)
}

fn checker_file(cert: &Path, spec: &Path) -> (i32, String) {
    let out = Command::new("python3")
        .arg(root().join("tools/certcheck/certcheck.py"))
        .arg(cert)
        .arg(spec)
        .output()
        .expect("python3 with SymPy and mpmath (scripts/test installs them)");
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    (out.status.code().unwrap_or(-1), text)
}

fn specs() -> Vec<PathBuf> {
    let mut out = Vec::new();
    for dir in [
        "specs",
        "tests/data/check",
        "tests/data/bound",
        "tests/data/ok",
    ] {
        for e in std::fs::read_dir(root().join(dir)).unwrap() {
            let p = e.unwrap().path();
            if p.extension().is_some_and(|x| x == "yaml") {
                out.push(p);
            }
        }
    }
    out.sort();
    out
}

#[test]
fn every_certificate_of_the_examples_and_test_specs_is_accepted() {
    let mut verdicts = std::collections::BTreeMap::new();
    for spec in specs() {
        let (cert, code) = certify(&spec);
        let verdict = ["proven", "falsified", "inconclusive"][code as usize];
        assert_eq!(cert["verdict"], verdict, "{}", spec.display());
        let (c, text) = checker(&cert, &spec, "accepted");
        assert_eq!(c, 0, "{}: {text}", spec.display());
        assert!(
            text.starts_with(&format!("accepted: {verdict}")),
            "{}: {text}",
            spec.display()
        );
        *verdicts.entry(verdict).or_insert(0) += 1;
    }
    println!("accepted: {verdicts:?}");
    assert!(verdicts["proven"] >= 10 && verdicts["falsified"] >= 8);
}

type Edit = Box<dyn Fn(&mut Value)>;

fn claim(cert: &Value) -> usize {
    cert["goals"]
        .as_array()
        .unwrap()
        .iter()
        .position(|g| g["kind"] == "claim")
        .unwrap()
}

fn first_leaf(cert: &Value, goal: usize, evidence: &str) -> usize {
    cert["goals"][goal]["leaves"]
        .as_array()
        .unwrap()
        .iter()
        .position(|l| l.get(evidence).is_some())
        .unwrap()
}

/// Applies each edit to a fresh copy and asserts the checker rejects it with the reason.
fn rejects(spec: &str, edits: Vec<(&str, &str, Edit)>) -> usize {
    rejects_with(spec, &[], edits)
}

/// [`rejects`] for a certificate `check` writes with more options.
fn rejects_with(spec: &str, options: &[&str], edits: Vec<(&str, &str, Edit)>) -> usize {
    let path = root().join(spec);
    let (cert, _) = certify_with(&path, options);
    let (c, text) = checker(&cert, &path, "unedited");
    assert_eq!(c, 0, "{spec}: {text}");
    for (what, reason, edit) in &edits {
        let mut e = cert.clone();
        edit(&mut e);
        let (c, text) = checker(&e, &path, "edited");
        println!("{what}: {}", text.trim());
        assert_eq!(c, 1, "{what} was not rejected: {text}");
        assert!(
            text.contains(reason),
            "{what}: expected `{reason}`, got {text}"
        );
    }
    edits.len()
}

#[test]
fn edited_certificates_of_the_reference_law_are_rejected_each_for_its_reason() {
    let cert = certify(&root().join("specs/energy_longitudinal.yaml")).0;
    let (gi, bound) = (claim(&cert), first_leaf(&cert, claim(&cert), "bound"));
    let edits: Vec<(&str, &str, Edit)> = vec![
        (
            "a leaf removed",
            "the tree has",
            Box::new(move |c| {
                c["goals"][gi]["leaves"].as_array_mut().unwrap().pop();
            }),
        ),
        (
            "the tree cut short",
            "the tree ends before covering",
            Box::new(move |c| {
                c["goals"][gi]["tree"].as_array_mut().unwrap().truncate(3);
            }),
        ),
        (
            "a split moved to another coordinate",
            "is not the one its tree position gives",
            Box::new(move |c| {
                let t = c["goals"][gi]["tree"].as_array_mut().unwrap();
                let d = t[0].as_i64().unwrap();
                t[0] = json!((d + 1) % 5);
            }),
        ),
        (
            "a leaf box shrunk",
            "is not the one its tree position gives",
            Box::new(move |c| {
                let x = &mut c["goals"][gi]["leaves"][bound]["box"][0][0];
                *x = json!(x.as_f64().unwrap() + 0.5);
            }),
        ),
        (
            "the domain narrowed inside the declared range",
            "does not hold its declared range",
            Box::new(|c| c["domain"][0]["range"] = json!([-4.0, 5.0])),
        ),
        (
            "V-dot's expression edited",
            "its expression is not the spec's V-dot",
            Box::new(move |c| {
                let e = c["goals"][gi]["expr"]
                    .as_str()
                    .unwrap()
                    .replacen("56.25", "56", 1);
                c["goals"][gi]["expr"] = json!(e);
            }),
        ),
        (
            "the claim's test weakened to <= 0",
            "its test is not the spec's claim",
            Box::new(move |c| c["goals"][gi]["test"] = json!({"below": 0, "strict": false})),
        ),
        (
            "a bound tightened past the value at its box's midpoint",
            "misses the value",
            Box::new(move |c| {
                let b = &mut c["goals"][gi]["leaves"][bound]["bound"];
                // V-dot is negative here: the new lower end lies just below the upper
                let hi = b[1].as_f64().unwrap();
                b[0] = json!(hi * 1.001);
            }),
        ),
        (
            "a Hessian claim on a box where the Hessian is not negative definite",
            "is not negative definite",
            Box::new(move |c| {
                let l = c["goals"][gi]["leaves"][bound].as_object_mut().unwrap();
                l.remove("bound");
                l.insert(
                    "hessian".into(),
                    json!({"method": "gershgorin", "value": -1.0}),
                );
            }),
        ),
        (
            "a well-posedness goal removed (the asin argument's)",
            "no proven goal shows the unit condition",
            Box::new(|c| {
                let goals = c["goals"].as_array_mut().unwrap();
                goals.retain(|g| g["test"].get("within").is_none());
            }),
        ),
        (
            "the verdict changed",
            "but its goals give",
            Box::new(move |c| c["goals"][gi]["status"] = json!("inconclusive")),
        ),
        (
            "the version changed",
            "certificate version",
            Box::new(|c| c["version"] = json!(1)),
        ),
        (
            "the spec's hash changed",
            "SHA-256",
            Box::new(|c| c["spec"]["sha256"] = json!("0".repeat(64))),
        ),
    ];
    assert_eq!(rejects("specs/energy_longitudinal.yaml", edits), 13);
}

#[test]
fn edited_certificates_of_constraints_bounds_and_counterexamples_are_rejected() {
    let mut kinds = 0;
    // an exclusion that does not hold: the pitch law's constraint k_tot < k_bal on a box
    // where it holds
    let pitch = certify(&root().join("specs/energy_pitch.yaml")).0;
    let (gi, b) = (claim(&pitch), first_leaf(&pitch, claim(&pitch), "bound"));
    kinds += rejects(
        "specs/energy_pitch.yaml",
        vec![(
            "an exclusion that does not hold",
            "does not fail everywhere on the box",
            Box::new(move |c| {
                let l = c["goals"][gi]["leaves"][b].as_object_mut().unwrap();
                l.remove("bound");
                l.insert("excluded".into(), json!(0));
            }),
        )],
    );
    // ultimate bounds: the scalar disturbance (level 0.03125, bound 0.25)
    let scalar = certify(&root().join("tests/data/bound/scalar_disturbance.yaml")).0;
    let gi = claim(&scalar);
    let b = first_leaf(&scalar, gi, "bound");
    kinds += rejects(
        "tests/data/bound/scalar_disturbance.yaml",
        vec![
            (
                "a smaller level",
                "is not below the level",
                Box::new(move |c| {
                    let u = &mut c["goals"][gi]["ultimate_bound"]["level"];
                    *u = json!(u.as_f64().unwrap() * 0.5);
                }),
            ),
            (
                "a tighter error bound",
                "is not proved at level",
                Box::new(move |c| {
                    let e = &mut c["goals"][gi]["ultimate_bound"]["bounds"][0]["upper"];
                    *e = json!(e.as_f64().unwrap() * 0.9);
                }),
            ),
            (
                "a larger region of attraction",
                "no proof that V >",
                Box::new(move |c| {
                    let a = &mut c["goals"][gi]["ultimate_bound"]["attraction"];
                    *a = json!(a.as_f64().unwrap() * 1.5);
                }),
            ),
            (
                "a sublevel proof dropped",
                "is not proved at level",
                Box::new(move |c| {
                    c["goals"][gi]["ultimate_bound"]["sublevel"]
                        .as_array_mut()
                        .unwrap()
                        .pop();
                }),
            ),
            (
                "below the level where V is not",
                "is not below the level",
                Box::new(move |c| {
                    let l = c["goals"][gi]["leaves"][b].as_object_mut().unwrap();
                    l.remove("bound");
                    l.insert("below_level".into(), json!([0.0, 0.01]));
                }),
            ),
            (
                "a Hessian claim where V-dot does not vanish with its gradient",
                "does not vanish with its gradient",
                Box::new(move |c| {
                    let l = c["goals"][gi]["leaves"][b].as_object_mut().unwrap();
                    l.remove("bound");
                    l.insert("hessian".into(), json!({"method": "minors", "value": -1.0}));
                }),
            ),
        ],
    );
    // the audit's edit: the certificate of `auto` retargeted to a spec requiring |x| <= 0.2
    // (which `check` falsifies), its own required list emptied
    let strict_spec = scratch("scalar_strict.yaml");
    let text = std::fs::read_to_string(root().join("tests/data/bound/scalar_disturbance.yaml"))
        .unwrap()
        .replace("{ ultimate_bound: auto }", "{ ultimate_bound: [0.2] }");
    std::fs::write(&strict_spec, &text).unwrap();
    let mut c = scalar.clone();
    c["spec"]["sha256"] = json!(sha256(text.as_bytes()));
    c["goals"][gi]["ultimate_bound"]["required"] = json!([]);
    let (code, out) = checker(&c, &strict_spec, "retargeted");
    assert_eq!(code, 1, "{out}");
    assert!(out.contains("exceeds the spec's required 0.2"), "{out}");
    kinds += 1;
    // counterexamples: the pendulum's plane of zero rate
    let pend = certify(&root().join("tests/data/check/pendulum_definite.yaml")).0;
    let gi = claim(&pend);
    kinds += rejects(
        "tests/data/check/pendulum_definite.yaml",
        vec![
            (
                "a counterexample moved off the plane where V-dot = 0",
                "does not refute the goal",
                Box::new(move |c| {
                    let dims = c["goals"][gi]["dims"].clone();
                    let k = dims.as_array().unwrap().iter().position(|d| d == "Δomega");
                    c["goals"][gi]["counterexample"]["point"][k.unwrap()] = json!(0.5);
                }),
            ),
            (
                "a counterexample outside the declared range",
                "outside its declared range",
                Box::new(move |c| {
                    let dims = c["goals"][gi]["dims"].clone();
                    let k = dims.as_array().unwrap().iter().position(|d| d == "Δphi");
                    c["goals"][gi]["counterexample"]["point"][k.unwrap()] = json!(100.0);
                }),
            ),
        ],
    );
    // an undecided goal marked proven
    let corner = certify(&root().join("tests/data/check/declared_corner.yaml")).0;
    let gi = claim(&corner);
    kinds += rejects(
        "tests/data/check/declared_corner.yaml",
        vec![(
            "an undecided goal marked proven",
            "no proof tree",
            Box::new(move |c| {
                c["goals"][gi]["status"] = json!("proven");
                c["verdict"] = json!("proven");
            }),
        )],
    );
    // a certificate of another spec under this spec's hash
    let other = certify(&root().join("specs/energy_pitch.yaml")).0;
    let mut c = other.clone();
    let refspec = root().join("specs/energy_longitudinal.yaml");
    c["spec"]["sha256"] = json!(sha256(&std::fs::read(&refspec).unwrap()));
    let (code, out) = checker(&c, &refspec, "other");
    assert_eq!(code, 1, "{out}");
    assert!(out.contains("does not hold its declared range"), "{out}");
    kinds += 1;
    // with the 13 kinds of the reference law's test: 25
    assert_eq!(13 + kinds, 25);
}

/// The point of a refuted actuator goal, set to these values by coordinate name.
fn set_point(c: &mut Value, values: &[(&str, f64)]) {
    let dims = c["actuators"][0]["dims"].clone();
    for (name, v) in values {
        let k = dims.as_array().unwrap().iter().position(|d| d == name);
        c["actuators"][0]["counterexample"]["point"][k.unwrap()] = json!(v);
    }
}

#[test]
fn edited_actuator_sections_are_rejected_each_for_its_reason() {
    // u = -k*x with k in [0.5, 3], x in [-2, 2]: limits [-4, 4] are left where k*|x| > 4,
    // [-6.5, 6.5] never
    let free: Vec<(&str, &str, Edit)> = vec![
        (
            "the limits' test widened past the declared limits",
            "its test is not within the declared limits",
            Box::new(|c| c["actuators"][0]["test"] = json!({"within": [-7.0, 7.0]})),
        ),
        (
            "the command's expression edited",
            "its expression is not the spec's command",
            Box::new(|c| {
                let e = c["actuators"][0]["expr"]
                    .as_str()
                    .unwrap()
                    .replace('k', "0.5*k");
                c["actuators"][0]["expr"] = json!(e);
            }),
        ),
        (
            "the actuator dropped",
            "the certificate's actuators are not the spec's",
            Box::new(|c| c["actuators"] = json!([])),
        ),
    ];
    let saturates: Vec<(&str, &str, Edit)> = vec![
        (
            "a saturating command marked saturation-free",
            "no proof tree",
            Box::new(|c| c["actuators"][0]["status"] = json!("proven")),
        ),
        (
            "the point moved inside the limits",
            "does not refute the goal",
            Box::new(|c| set_point(c, &[("Δx", 1.0), ("k", 1.0)])),
        ),
        (
            "the test narrowed inside the limits, with a point between the two",
            "the recorded point is not outside the limits",
            Box::new(|c| {
                c["actuators"][0]["test"] = json!({"within": [-3.0, 3.0]});
                set_point(c, &[("Δx", 2.0), ("k", 1.75)]);
            }),
        ),
    ];
    let n = rejects("tests/data/check/saturation_free.yaml", free)
        + rejects("tests/data/check/saturation_unavoidable.yaml", saturates);
    // with the 25 kinds of the claim's certificates: 31 (README)
    assert_eq!(25 + n, 31);
}

fn goal_of(cert: &Value, kind: &str) -> usize {
    cert["goals"]
        .as_array()
        .unwrap()
        .iter()
        .position(|g| g["kind"] == kind)
        .unwrap()
}

#[test]
fn edited_certificates_of_a_law_with_controller_states_are_rejected() {
    // integral action against a constant push (tests/data/check/integral_push.yaml): the
    // claim is exempt at zero speed error only, and two goals show its integrator's limits
    // harmless
    let cert = certify(&root().join("tests/data/check/integral_push.yaml")).0;
    let (gi, gp) = (claim(&cert), goal_of(&cert, "projection"));
    let edits: Vec<(&str, &str, Edit)> = vec![
        (
            "the claim exempt at the integrator's zero error too",
            "it is not exempt at exactly the errors",
            Box::new(move |c| c["goals"][gi]["errors"] = json!(["Δv", "Δxi"])),
        ),
        (
            "the lower limit's goal dropped",
            "controller-state limit goals",
            Box::new(move |c| {
                c["goals"].as_array_mut().unwrap().remove(gp + 1);
            }),
        ),
        (
            "a limit goal's expression edited",
            "its expression is not -dV/dm",
            Box::new(move |c| {
                let e = c["goals"][gp]["expr"].as_str().unwrap().to_string();
                c["goals"][gp]["expr"] = json!(format!("({e}) - 1"));
            }),
        ),
        (
            "the integrator's error box narrowed",
            "does not hold its declared range",
            Box::new(|c| {
                let d = c["domain"].as_array_mut().unwrap();
                let k = d.iter().position(|x| x["name"] == "Δxi").unwrap();
                d[k]["range"] = json!([-4.0, 4.0]);
            }),
        ),
    ];
    assert_eq!(rejects("tests/data/check/integral_push.yaml", edits), 4);
}

#[test]
fn certificates_of_guidance_rates_are_accepted_and_edited_ones_rejected() {
    // the tracking loop proves |xdot_r| <= 2.5 on {V <= level} within |e| <= 0.5
    let spec = "tests/data/rates/tracking_rate.yaml";
    let options = ["--rates", "--within", "x=0.5"];
    let (cert, code) = certify_with(&root().join(spec), &options);
    assert_eq!(code, 0);
    let (c, text) = checker(&cert, &root().join(spec), "rates");
    assert_eq!(c, 0, "{text}");
    assert!(
        text.contains("guidance rates: xdot_r in [-2.5, 2.5]"),
        "{text}"
    );
    let edits: Vec<(&str, &str, Edit)> = vec![
        (
            "a proved rate widened",
            "is not the one its tree position gives",
            Box::new(|c| c["rate_limits"]["rates"][0]["proved"] = json!([-2.5, 3.0])),
        ),
        (
            "a face proof dropped",
            "no proof that V >",
            Box::new(|c| {
                c["rate_limits"]["faces"].as_array_mut().unwrap().pop();
            }),
        ),
        (
            "the level raised above its face proofs",
            "no proof that V > 0.2 on the face",
            Box::new(|c| c["rate_limits"]["level"] = json!(0.2)),
        ),
        (
            "the stated bounds widened",
            "no proof that V >",
            Box::new(|c| c["rate_limits"]["within"]["x"] = json!(0.6)),
        ),
    ];
    assert_eq!(rejects_with(spec, &options, edits), 4);
}

#[test]
fn certificates_of_the_saturated_law_are_accepted_and_edited_ones_rejected() {
    // x' = x + sat(-2x): the region of attraction with saturation is |x| < 1 exactly
    // (checkvalues.md §9); its proof rests on the claim where no command is clamped
    let spec = "tests/data/rates/unstable_saturated.yaml";
    let options = ["--rates", "--within", "x=0.4", "--saturated"];
    let (cert, code) = certify_with(&root().join(spec), &options);
    assert_eq!(code, 0);
    let (c, text) = checker(&cert, &root().join(spec), "saturated");
    assert_eq!(c, 0, "{text}");
    assert!(
        text.contains("region of attraction with saturation: V <= 0.49"),
        "{text}"
    );
    fn sat(c: &mut Value) -> &mut Value {
        &mut c["rate_limits"]["saturated"]
    }
    let leaves = cert["rate_limits"]["saturated"]["goal"]["leaves"]
        .as_array()
        .unwrap();
    let bound = leaves
        .iter()
        .position(|l| l.get("bound").is_some())
        .unwrap();
    assert!(leaves.iter().any(|l| l.get("unclamped").is_some()));
    let edits: Vec<(&str, &str, Edit)> = vec![
        (
            "the level raised above its face proofs",
            "no proof that V > 0.6 on the face",
            Box::new(|c| sat(c)["level"] = json!(0.6)),
        ),
        (
            "the saturation-free level lowered",
            "malformed levels",
            Box::new(|c| sat(c)["free_level"] = json!(0.01)),
        ),
        (
            "a proof that V exceeds the saturation-free level beyond the bounds dropped",
            "where Δx is beyond",
            Box::new(|c| {
                sat(c)["outside"].as_array_mut().unwrap().pop();
            }),
        ),
        (
            "the unsaturated dV/dt in place of the saturated one",
            "not the spec's dV/dt with the commands clamped",
            Box::new(|c| sat(c)["goal"]["expr"] = json!("-Δx^2")),
        ),
        (
            "a leaf where the command saturates rested on the claim",
            "a command may leave its limits on the box",
            Box::new(move |c| {
                let leaf = &mut sat(c)["goal"]["leaves"][bound];
                leaf.as_object_mut().unwrap().remove("bound");
                leaf["unclamped"] = json!(true);
            }),
        ),
        (
            "a bound on the error narrowed",
            "on `x` is not proved",
            Box::new(|c| sat(c)["bounds"][0]["upper"] = json!(0.9)),
        ),
    ];
    assert_eq!(rejects_with(spec, &options, edits), 6);
}

#[test]
fn unreadable_inputs_exit_3() {
    let spec = root().join("specs/pendulum_damping.yaml");
    let bad = scratch("not.json");
    std::fs::write(&bad, "{ not json").unwrap();
    assert_eq!(checker_file(&bad, &spec).0, 3);
    let (cert, _) = certify(&spec);
    let (code, _) = checker(&cert, &root().join("specs/no_such_spec.yaml"), "missing");
    assert_eq!(code, 3);
}

#[test]
fn the_checker_imports_nothing_from_the_project() {
    // only the standard library, the general-purpose libraries (numpy comes with SciPy) and
    // its own modules
    let allowed = [
        "argparse",
        "functools",
        "hashlib",
        "json",
        "math",
        "multiprocessing",
        "os",
        "re",
        "sys",
        "fractions",
        "sympy",
        "mpmath",
        "numpy",
        "yaml",
        "formula",
        "iv",
        "model",
        "roundoff",
    ];
    let dir = root().join("tools/certcheck");
    let mut lines = 0;
    for e in std::fs::read_dir(&dir).unwrap() {
        let p = e.unwrap().path();
        if p.extension().is_none_or(|x| x != "py") {
            continue;
        }
        let text = std::fs::read_to_string(&p).unwrap();
        lines += text.lines().count();
        for l in text.lines().map(str::trim) {
            let module = l
                .strip_prefix("import ")
                .or_else(|| l.strip_prefix("from "))
                .map(|r| r.split([' ', '.', ',']).next().unwrap_or(""));
            if let Some(m) = module {
                assert!(allowed.contains(&m), "{}: imports {m}", p.display());
            }
        }
        assert!(!text.contains("lawsmith_"), "{}", p.display());
    }
    println!("tools/certcheck: {lines} lines");
    // aim: small enough to read (under 1,500 lines before controller states and guidance
    // rates, which added 185, the saturated law's region, 132 more, and the round-off
    // bounds' own analysis, 538 more)
    assert!(lines < 2450, "{lines} lines");
    // the size the checker's README and the project's README state is the size it has
    for doc in ["tools/certcheck/README.md", "README.md"] {
        let text = std::fs::read_to_string(root().join(doc)).unwrap();
        let stated = format!("{},{:03} lines", lines / 1000, lines % 1000);
        assert!(text.contains(&stated), "{doc} does not state `{stated}`");
    }
}

fn sha256(bytes: &[u8]) -> String {
    lawsmith_verify::sha256_hex(bytes)
}

#[test]
fn certificates_of_round_off_bounds_are_accepted_and_edited_ones_rejected() {
    // the reference law's round-off in f64 and f32 (check --roundoff): both checkers accept
    // it, and reject each edit
    let spec = "specs/energy_longitudinal.yaml";
    let options = ["--roundoff"];
    let (cert, code) = certify_with(&root().join(spec), &options);
    assert_eq!(code, 0);
    let (c, text) = checker(&cert, &root().join(spec), "roundoff");
    assert_eq!(c, 0, "{text}");
    assert!(text.contains("round-off: pitch_cmd <= "), "{text}");
    let edits: Vec<(&str, &str, Edit)> = vec![
        (
            "a bound cut to a third",
            "has a round-off above the stated",
            Box::new(|c| {
                let b = &mut c["roundoff"]["precisions"][1]["bounds"][0]["bound"];
                *b = json!(b.as_f64().unwrap() / 3.0);
            }),
        ),
        (
            "a split tree cut short",
            "the split tree ends before its boxes do",
            Box::new(|c| {
                let t = c["roundoff"]["precisions"][0]["bounds"][1]["tree"]
                    .as_array_mut()
                    .unwrap();
                t.truncate(t.len() - 2);
            }),
        ),
        (
            "a rounded constant said to stand for another rational",
            "is not the double nearest to",
            Box::new(|c| c["roundoff"]["rounded"][0][1] = json!("0.5")),
        ),
        (
            "a gain's range narrowed in the box",
            "box does not hold every input the code accepts",
            Box::new(|c| {
                let b = c["roundoff"]["precisions"][1]["box"]
                    .as_array_mut()
                    .unwrap();
                let last = b.last_mut().unwrap();
                last[1] = json!(last[1].as_f64().unwrap() * 0.5);
            }),
        ),
        (
            "an input read from another coordinate",
            "input map is not how",
            Box::new(|c| c["roundoff"]["precisions"][0]["input_map"][0][1] = json!([1, 8])),
        ),
    ];
    // lawsmith's own re-check rejects them too
    for (what, _, edit) in &edits {
        let mut e = cert.clone();
        edit(&mut e);
        let path = scratch("roundoff-edited.json");
        std::fs::write(&path, serde_json::to_string(&e).unwrap()).unwrap();
        let out = Command::new(env!("CARGO_BIN_EXE_lawsmith"))
            .args(["recheck"])
            .arg(&path)
            .arg(root().join(spec))
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&out.stdout).to_string();
        assert!(
            text.contains("rejected") && text.contains("round-off"),
            "recheck accepted {what}: {text}"
        );
    }
    assert_eq!(rejects_with(spec, &options, edits), 5);
}
