//! Runs the independent SymPy derivation (tests/python/crosscheck_derive.py; references:
//! SymPy and mpmath from PyPI) against `lawsmith derive --format json` for every spec in
//! specs/, tests/data/ok and tests/data/bound, at 1,000 random points each, tolerance 1e-12 relative.

use std::path::Path;
use std::process::Command;

fn specs() -> Vec<String> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut out = Vec::new();
    for dir in ["specs", "tests/data/ok", "tests/data/bound"] {
        for e in std::fs::read_dir(root.join(dir)).unwrap() {
            let p = e.unwrap().path();
            if p.extension().is_some_and(|x| x == "yaml") {
                out.push(p.display().to_string());
            }
        }
    }
    out.sort();
    out
}

fn run(extra: &[&str]) -> (bool, String) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let out = Command::new("python3")
        .arg(root.join("tests/python/crosscheck_derive.py"))
        .args(["--bin", env!("CARGO_BIN_EXE_lawsmith")])
        .args(extra)
        .args(specs())
        .output()
        .expect(
            "python3 must be installed (see .ci/run: pip install -r tests/python/requirements.txt)",
        );
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    (out.status.success(), text)
}

#[test]
fn derive_agrees_with_an_independent_sympy_derivation() {
    let (ok, text) = run(&["--points", "1000"]);
    println!("{text}");
    assert!(ok, "{text}");
    assert!(text.contains("max rel diff"), "{text}");
}

#[test]
fn the_cross_check_notices_a_relative_error_of_1e_10() {
    let (ok, text) = run(&["--points", "20", "--perturb", "1e-10"]);
    assert!(!ok, "a perturbed V-dot must be reported:\n{text}");
    assert!(text.contains("MISMATCH"), "{text}");
}
