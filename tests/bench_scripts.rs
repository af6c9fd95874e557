//! Every benchmark script under `bench/` runs to its figures (a smoke run with tiny
//! settings), so a change that breaks one cannot go unnoticed. The scripts compare with
//! SymPy (PyPI) and, for instructions, valgrind's callgrind.

use std::path::{Path, PathBuf};
use std::process::Command;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Runs `python3 bench/SCRIPT args…` from the repository root; its output.
fn script(name: &str, args: &[&str], env: &[(&str, &Path)]) -> String {
    let mut c = Command::new("python3");
    c.arg(root().join("bench").join(name))
        .args(args)
        .current_dir(root());
    for (k, v) in env {
        c.env(k, v);
    }
    let out = c.output().expect("python3 (scripts/test installs SymPy)");
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.status.success(), "bench/{name}: {text}");
    text
}

#[test]
fn every_benchmark_script_runs_to_its_figures() {
    let bin = env!("CARGO_BIN_EXE_lawsmith");
    let mut covered = Vec::new();
    let out = script(
        "codegen_vs_sympy.py",
        &["--bin", bin, "specs/pendulum_damping.yaml"],
        &[],
    );
    assert!(
        out.contains("pendulum_damping.yaml") && out.contains("worst ratio"),
        "{out}"
    );
    covered.push("codegen_vs_sympy.py");
    let out = script(
        "step_instructions.py",
        &["--bin", bin, "--steps", "20"],
        &[],
    );
    assert!(out.contains("20 steps") && out.contains("ratio"), "{out}");
    covered.push("step_instructions.py");
    // the derive bench is built by its own cargo, in a target directory of its own (the one
    // running these tests is locked)
    let target = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("bench-smoke");
    let out = script(
        "derive_vs_sympy.py",
        &[
            "specs/pendulum_damping.yaml",
            "--runs",
            "3",
            "--sympy-runs",
            "1",
        ],
        &[("CARGO_TARGET_DIR", &target)],
    );
    assert!(
        out.contains("median of 3") && out.contains("ratio SymPy / lawsmith"),
        "{out}"
    );
    covered.push("derive_vs_sympy.py");
    // the round-off bench, in the same target directory as the derive bench's
    let out = script(
        "roundoff_vs_published.py",
        &["--samples", "50", "--leaves", "200"],
        &[("CARGO_TARGET_DIR", &target)],
    );
    assert!(
        out.contains("predatorPrey") && out.contains("worst ratio to the best published bound"),
        "{out}"
    );
    covered.push("roundoff_vs_published.py");
    // and nothing under bench/ is left out
    for e in std::fs::read_dir(root().join("bench")).unwrap() {
        let name = e.unwrap().file_name().to_string_lossy().to_string();
        if name.ends_with(".py") {
            assert!(
                covered.contains(&name.as_str()),
                "bench/{name} has no smoke run"
            );
        }
    }
}
