//! The JSON Schema of the spec format: committed under schema/, regenerated from the Rust
//! types and compared (staleness), and checked with a general-purpose validator (Python's
//! `jsonschema` from PyPI, see tests/python/requirements.txt): every spec lawsmith accepts is
//! valid, and every bad input whose error is a schema error is invalid.

use std::path::{Path, PathBuf};
use std::process::Command;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn yaml_in(dir: &str) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(root().join(dir))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "yaml"))
        .collect();
    v.sort();
    v
}

/// The bad inputs that are schema errors: wrong keys, wrong shapes, unknown claims, names
/// that are not identifiers. (The others are errors of meaning: units, symbols, order.)
const SCHEMA_ERRORS: &[&str] = &["schema", "bad-range", "bad-claim", "bad-name"];

#[test]
fn the_committed_schema_is_current() {
    let out = Command::new(env!("CARGO_BIN_EXE_lawsmith"))
        .arg("schema")
        .output()
        .unwrap();
    assert!(out.status.success());
    let committed = std::fs::read(root().join("schema/spec.schema.json")).unwrap();
    assert!(
        committed == out.stdout,
        "schema/spec.schema.json is stale: run `lawsmith schema > schema/spec.schema.json`"
    );
}

#[test]
fn a_general_purpose_validator_accepts_every_spec_and_rejects_schema_errors() {
    let mut files = Vec::new();
    for d in [
        "specs",
        "tests/data/ok",
        "tests/data/check",
        "tests/data/bound",
        "tests/data/err",
    ] {
        files.extend(yaml_in(d));
    }
    // the alias bomb is a YAML-level budget, not a schema question, and PyYAML would expand
    // it in full
    files.retain(|f| {
        !f.file_stem()
            .unwrap()
            .to_string_lossy()
            .starts_with("yaml-budget")
    });
    let out = Command::new("python3")
        .arg(root().join("tests/python/validate_schema.py"))
        .arg(root().join("schema/spec.schema.json"))
        .args(&files)
        .output()
        .expect("python3 with jsonschema and pyyaml (see .ci/run)");
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    assert!(
        out.status.success(),
        "{text}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let verdict = |p: &Path| -> &str {
        let key = format!(" {}", p.display());
        text.lines()
            .find(|l| l.split(':').next().is_some_and(|h| h.ends_with(&key)))
            .map(|l| l.split(' ').next().unwrap())
            .unwrap_or("missing")
    };
    let (mut valid, mut rejected) = (0, 0);
    for f in &files {
        let stem = f.file_stem().unwrap().to_string_lossy().to_string();
        let in_err = f.parent().unwrap().ends_with("err");
        if !in_err {
            assert_eq!(verdict(f), "valid", "{}: {text}", f.display());
            valid += 1;
        } else if SCHEMA_ERRORS.iter().any(|c| stem.starts_with(c)) {
            assert_eq!(verdict(f), "invalid", "{}: {text}", f.display());
            rejected += 1;
        }
    }
    println!("{valid} specs valid, {rejected} schema errors rejected");
    assert!(valid >= 10 && rejected == SCHEMA_ERRORS.len());
}

#[test]
fn the_scenario_schema_is_current_and_accepts_every_scenario() {
    let out = Command::new(env!("CARGO_BIN_EXE_lawsmith"))
        .args(["schema", "--scenario"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let committed = std::fs::read(root().join("schema/scenario.schema.json")).unwrap();
    assert!(
        committed == out.stdout,
        "schema/scenario.schema.json is stale: run `lawsmith schema --scenario > schema/scenario.schema.json`"
    );
    let scenarios = yaml_in("specs/scenarios");
    let bad =
        std::env::temp_dir().join(format!("lawsmith-bad-scenario-{}.yaml", std::process::id()));
    std::fs::write(
        &bad,
        "name: x\nspec: a.yaml\nduration: 10\ninitial: { h: 100, va: 20 }\nwinds: {}\n",
    )
    .unwrap();
    let out = Command::new("python3")
        .arg(root().join("tests/python/validate_schema.py"))
        .arg(root().join("schema/scenario.schema.json"))
        .args(&scenarios)
        .arg(&bad)
        .output()
        .expect("python3 with jsonschema and pyyaml");
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    for s in &scenarios {
        let line = format!("valid {}", s.display());
        assert!(text.lines().any(|l| l == line), "{text}");
    }
    let line = format!("invalid {}:", bad.display());
    assert!(
        text.lines().any(|l| l.starts_with(&line)),
        "an unknown key: {text}"
    );
    std::fs::remove_file(&bad).unwrap();
}
