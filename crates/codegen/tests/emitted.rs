//! The emitted Rust and C of every spec in `specs/`, locked in insta snapshots; and two emits
//! of the same spec give the same bytes.

use lawsmith_codegen::{generate, Controller, Float, Lang, Provenance};
use lawsmith_verify::{check, sha256_hex, Settings};

fn emit(path: &std::path::Path, float: Float) -> Vec<(String, String)> {
    let bytes = std::fs::read(path).unwrap();
    let mut spec = lawsmith_spec::load(std::str::from_utf8(&bytes).unwrap()).unwrap();
    let (report, _) = check(&mut spec, &Settings::default(), &|_, _, _| {}).unwrap();
    let c = Controller::new(&spec).unwrap();
    let prov = Provenance {
        spec_file: format!("specs/{}", path.file_name().unwrap().to_string_lossy()),
        spec_sha256: sha256_hex(&bytes),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        claim: report.claim.name(),
        verdict: report.verdict.name().into(),
        figures: lawsmith_verify::report::proof_figures(&report, &"0".repeat(64)),
    };
    generate(&c, &prov, Lang::All, float).unwrap()
}

#[test]
fn emitted_code_of_every_spec_is_locked() {
    insta::glob!("../../../specs", "*.yaml", |path| {
        let files = emit(path, Float::F64);
        assert_eq!(files.len(), 3);
        for (name, text) in &files {
            insta::assert_snapshot!(name.clone(), text);
        }
    });
}

#[test]
fn single_precision_code_of_every_spec_is_locked() {
    insta::glob!("../../../specs", "*.yaml", |path| {
        let files = emit(path, Float::F32);
        assert_eq!(files.len(), 3);
        for (name, text) in &files {
            insta::assert_snapshot!(format!("f32_{name}"), text);
        }
    });
}

#[test]
fn two_emits_give_the_same_bytes() {
    let path =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../specs/energy_pitch.yaml");
    let a = emit(&path, Float::F64);
    let b = emit(&path, Float::F64);
    assert_eq!(a, b);
}

/// A fixed header for generated code under test.
fn test_provenance() -> Provenance {
    Provenance {
        spec_file: "spec.yaml".into(),
        spec_sha256: "0".repeat(64),
        tool_version: "test".into(),
        claim: "negative_definite".into(),
        verdict: "proven".into(),
        figures: Vec::new(),
    }
}

/// The generated files of a spec's text, under a fixed header.
fn generated_from(text: &str) -> Vec<(String, String)> {
    let spec = lawsmith_spec::load(text).unwrap();
    let c = Controller::new(&spec).unwrap();
    let prov = test_provenance();
    generate(&c, &prov, Lang::All, Float::F64).unwrap()
}

/// The lines of `a` not in `b`, counted as a multiset.
fn lines_only_in<'a>(a: &'a str, b: &str) -> Vec<&'a str> {
    let mut rest: std::collections::HashMap<&str, usize> = std::collections::HashMap::new();
    for l in b.lines() {
        *rest.entry(l).or_default() += 1;
    }
    a.lines()
        .filter(|l| match rest.get_mut(l) {
            Some(n) if *n > 0 => {
                *n -= 1;
                false
            }
            _ => true,
        })
        .collect()
}

#[test]
fn a_change_inside_one_law_changes_only_that_law_s_lines() {
    // one term of the flight-path law of the reference spec changed (k_bal * eb doubled):
    // every changed line of the generated Rust and C must be the flight-path law's own
    // (its values are named gamma_*), or the operation count
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../specs/energy_longitudinal.yaml");
    let text = std::fs::read_to_string(path).unwrap();
    let edited = text.replace("+ k_bal * eb)", "+ 2 * k_bal * eb)");
    assert_ne!(edited, text);
    let before = generated_from(&text);
    let after = generated_from(&edited);
    let mut changed = 0;
    for ((name, a), (_, b)) in before.iter().zip(&after) {
        for l in lines_only_in(a, b).into_iter().chain(lines_only_in(b, a)) {
            changed += 1;
            assert!(
                l.contains("gamma_") || l.contains("arithmetic operations per step"),
                "{name}: a line outside the changed law changed: {l}"
            );
        }
    }
    // the edit is visible: the doubled term is one more multiplication in each of Rust and C
    assert!(changed >= 4, "{changed} lines changed");
}

#[test]
fn a_declared_safe_command_is_what_a_non_finite_command_becomes() {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../tests/data/check/saturation_free.yaml");
    let text = std::fs::read_to_string(path).unwrap();
    let with_safe = text.replace("limits: [-6.5, 6.5] }", "limits: [-6.5, 6.5], safe: 1.25 }");
    assert_ne!(with_safe, text);
    for (yaml, safe) in [(&text, "0.0"), (&with_safe, "1.25")] {
        let c = Controller::new(&lawsmith_spec::load(yaml).unwrap()).unwrap();
        assert_eq!(c.actuators[0].safe, safe.parse::<f64>().unwrap());
        let files = generated_from(yaml);
        let src = &files.iter().find(|(n, _)| n.ends_with(".c")).unwrap().1;
        let want = format!("c0 = {safe};");
        assert!(src.contains(&want), "no `{want}` in\n{src}");
        let rs = &files.iter().find(|(n, _)| n.ends_with(".rs")).unwrap().1;
        assert!(rs.contains(&format!("c0 = {safe};")), "{rs}");
    }
}

#[test]
fn a_range_holding_no_float_is_refused_in_single_precision() {
    // 0.2 lies strictly between two binary32 numbers (IEEE 754, common practice), so a
    // signal range [0.2, 0.2] holds none: f32 code could accept no input at all
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../specs/energy_longitudinal.yaml");
    let text = std::fs::read_to_string(path)
        .unwrap()
        .replace("range: [-0.05, 0.2] }", "range: [0.2, 0.2] }");
    let c = Controller::new(&lawsmith_spec::load(&text).unwrap()).unwrap();
    let prov = test_provenance();
    assert!(generate(&c, &prov, Lang::All, Float::F64).is_ok());
    let e = generate(&c, &prov, Lang::All, Float::F32).unwrap_err();
    assert!(
        e.0.contains("`alpha` holds no single-precision number"),
        "{e}"
    );
}
