//! End-to-end tests of the binary's outputs: generated code and its staleness check, the
//! simulation's files, the committed report, the margin curve, LaTeX, interrupted builds.

mod common;

use common::{copy_dir, lawsmith, lawsmith_in, root};
use std::path::{Path, PathBuf};
use std::process::Command;

const KNOWN_LATEX: &[&str] = &[
    "begin",
    "end",
    "frac",
    "cdot",
    "left",
    "right",
    "mathrm",
    "dot",
    "sqrt",
    "sin",
    "cos",
    "tan",
    "arcsin",
    "arccos",
    "arctan",
    "exp",
    "ln",
    "min",
    "max",
    "operatorname",
    "lvert",
    "rvert",
    "alpha",
    "beta",
    "gamma",
    "delta",
    "epsilon",
    "zeta",
    "eta",
    "theta",
    "iota",
    "kappa",
    "lambda",
    "mu",
    "nu",
    "xi",
    "pi",
    "rho",
    "sigma",
    "tau",
    "upsilon",
    "phi",
    "chi",
    "psi",
    "omega",
    "Omega",
    "_",
    "\\",
    ",",
    "quad",
    "text",
    "mathrm",
];

#[test]
fn committed_generated_code_is_up_to_date() {
    let out = lawsmith(&["emit", "--check"]);
    let text =
        String::from_utf8_lossy(&out.stdout).to_string() + &String::from_utf8_lossy(&out.stderr);
    assert_eq!(
        out.status.code(),
        Some(0),
        "generated/ is stale; run `lawsmith build`:\n{text}"
    );
    assert!(text.contains("up to date"), "{text}");
}

#[test]
fn generated_headers_name_the_certificate_that_check_writes() {
    let dir = std::env::temp_dir().join(format!("lawsmith-certsha-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let cert = dir.join("cert.json");
    let c = cert.to_str().unwrap();
    // the header names the command that writes it: `check --roundoff`, as emit and build
    // bound the code's round-off
    let out = lawsmith(&[
        "check",
        "specs/energy_longitudinal.yaml",
        "--roundoff",
        "--certificate",
        c,
    ]);
    assert_eq!(out.status.code(), Some(0));
    let sha = lawsmith_verify::sha256_hex(&std::fs::read(&cert).unwrap());
    let gen = root().join("generated/energy_longitudinal");
    for file in [
        "energy_longitudinal.h",
        "energy_longitudinal.c",
        "energy_longitudinal.rs",
    ] {
        let text = std::fs::read_to_string(gen.join(file)).unwrap();
        assert!(
            text.contains(&format!("certificate SHA-256: {sha}")),
            "{file} does not name the certificate {sha}"
        );
        // 12% of the sampled envelope commands negative thrust (README), so both saturate
        assert!(
            text.contains("unsaturated law): pitch_cmd saturates, thrust_cmd saturates"),
            "{file}"
        );
    }
    let out = lawsmith(&["recheck", c, "specs/energy_longitudinal.yaml"]);
    assert_eq!(out.status.code(), Some(0));
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn an_edited_spec_makes_the_generated_code_stale() {
    let dir = std::env::temp_dir().join(format!("lawsmith-stale-{}", std::process::id()));
    copy_dir(&root().join("specs"), &dir.join("specs"));
    copy_dir(&root().join("generated"), &dir.join("generated"));
    // an untouched copy is up to date
    let out = lawsmith_in(&dir, &["emit", "--check"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let spec = dir.join("specs/energy_pitch.yaml");
    let text = std::fs::read_to_string(&spec).unwrap();
    std::fs::write(&spec, text.replace("default: 0.2 }", "default: 0.21 }")).unwrap();
    let out = lawsmith_in(&dir, &["emit", "--check"]);
    let stdout = String::from_utf8_lossy(&out.stdout).to_string();
    assert_eq!(out.status.code(), Some(1), "{stdout}");
    // a unified diff of the default gain and the spec hash
    assert!(
        stdout.contains("--- generated/energy_pitch/energy_pitch.c"),
        "{stdout}"
    );
    assert!(
        stdout.contains("+    g.k_tot = 0.21;") && stdout.contains("-    g.k_tot = 0.2;"),
        "{stdout}"
    );
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn emit_refuses_reserved_words_unproven_laws_and_foreign_files() {
    let dir = std::env::temp_dir().join(format!("lawsmith-emit-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let d = dir.to_str().unwrap();
    // names that are reserved words of C or Rust: a located error, nothing written
    let out = lawsmith(&[
        "emit",
        "tests/data/err/reserved-word.yaml",
        "--out",
        d,
        "--force",
    ]);
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert_eq!(out.status.code(), Some(3), "{err}");
    for word in ["int", "fn", "struct", "default"] {
        assert!(err.contains(&format!("`{word}`")), "{word}: {err}");
    }
    assert!(err.contains("reserved-word.yaml:"), "{err}");
    assert_eq!(std::fs::read_dir(&dir).unwrap().count(), 0);
    // an unproven law is refused, and emitted with --allow-unproven marked in capitals
    let out = lawsmith(&[
        "emit",
        "tests/data/check/pendulum_definite.yaml",
        "--out",
        d,
        "--force",
    ]);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("error[unproven]"));
    assert_eq!(std::fs::read_dir(&dir).unwrap().count(), 0);
    let out = lawsmith(&[
        "emit",
        "tests/data/check/pendulum_definite.yaml",
        "--out",
        d,
        "--force",
        "--allow-unproven",
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let c = std::fs::read_to_string(dir.join("pendulum_definite.c")).unwrap();
    assert!(
        c.contains("THIS LAW IS NOT PROVEN") && c.contains("proof: FALSIFIED"),
        "{c}"
    );
    // a file lawsmith did not write is never overwritten
    let mine = dir.join("energy_pitch.h");
    std::fs::write(&mine, "/* my own header */\n").unwrap();
    let out = lawsmith(&["emit", "specs/energy_pitch.yaml", "--out", d, "--force"]);
    assert_eq!(out.status.code(), Some(4), "a refusal");
    assert!(String::from_utf8_lossy(&out.stderr).contains("not overwriting"));
    assert_eq!(
        std::fs::read_to_string(&mine).unwrap(),
        "/* my own header */\n"
    );
    // two emits give the same bytes
    std::fs::remove_file(&mine).unwrap();
    let read = |n: &str| std::fs::read(dir.join(n)).unwrap();
    assert_eq!(
        lawsmith(&["emit", "specs/energy_pitch.yaml", "--out", d, "--force"])
            .status
            .code(),
        Some(0)
    );
    let first: Vec<Vec<u8>> = ["energy_pitch.rs", "energy_pitch.h", "energy_pitch.c"]
        .iter()
        .map(|n| read(n))
        .collect();
    assert_eq!(
        lawsmith(&["emit", "specs/energy_pitch.yaml", "--out", d, "--force"])
            .status
            .code(),
        Some(0)
    );
    let second: Vec<Vec<u8>> = ["energy_pitch.rs", "energy_pitch.h", "energy_pitch.c"]
        .iter()
        .map(|n| read(n))
        .collect();
    assert_eq!(first, second);
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn sim_writes_series_plots_and_the_metrics() {
    let dir = std::env::temp_dir().join(format!("lawsmith-sim-{}", std::process::id()));
    let d = dir.to_str().unwrap();
    let out = lawsmith(&[
        "sim",
        "specs/scenarios/altitude_step_up.yaml",
        "--out",
        d,
        "--force",
        "--format",
        "json",
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["scenario"], "altitude_step_up");
    for c in ["energy", "pid", "lqr"] {
        let m = &v["controllers"][c];
        assert!(m["altitude_overshoot"].is_number(), "{c}: {m}");
        assert!(
            m["peak_airspeed_deviation_in_altitude_change"].is_number(),
            "{c}: {m}"
        );
        // no airspeed step in this scenario: undefined, not zero
        assert!(m["airspeed_settling_time"].is_null(), "{c}: {m}");
        let csv = std::fs::read_to_string(dir.join(format!("{c}.csv"))).unwrap();
        assert!(csv.starts_with("t,h,va,") && csv.lines().count() > 4000);
    }
    for p in [
        "altitude",
        "airspeed",
        "pitch",
        "throttle",
        "energy_error",
        "balance_error",
    ] {
        let svg = std::fs::read_to_string(dir.join(format!("{p}.svg"))).unwrap();
        assert!(
            svg.starts_with("<svg") && svg.matches("<polyline").count() >= 3,
            "{p}"
        );
    }
    // a short Monte Carlo campaign: percentiles and histograms
    let out = lawsmith(&[
        "sim",
        "specs/scenarios/altitude_step_up.yaml",
        "--out",
        d,
        "--force",
        "--runs",
        "4",
        "--seed",
        "9",
        "--format",
        "json",
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["runs"], 4);
    assert!(
        v["controllers"]["energy"]["energy_error_rms"]["p95"].is_number(),
        "{v}"
    );
    assert!(dir.join("histogram_altitude_overshoot.svg").exists());
    // a scenario error names the file and is exit code 3
    let bad = dir.join("bad.yaml");
    std::fs::write(
        &bad,
        "name: x\nspec: nowhere.yaml\nduration: 10\ninitial: { h: 1, va: 2 }\n",
    )
    .unwrap();
    let out = lawsmith(&["sim", bad.to_str().unwrap(), "--out", d, "--force"]);
    assert_eq!(out.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&out.stderr).contains("cannot read"));
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn the_committed_report_is_what_build_writes() {
    // report/ is committed (the README quotes it): a fresh build must give the same bytes
    let dir = std::env::temp_dir().join(format!("lawsmith-report-{}", std::process::id()));
    let (gen, rep) = (dir.join("generated"), dir.join("report"));
    let out = lawsmith(&[
        "build",
        "--generated",
        gen.to_str().unwrap(),
        "--report",
        rep.to_str().unwrap(),
        "--force",
        "--format",
        "json",
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // the summary as JSON: every spec generated and proven, every scenario flown
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let specs = j["specs"].as_array().unwrap();
    assert_eq!(
        specs.len(),
        std::fs::read_dir(root().join("specs"))
            .unwrap()
            .filter(|e| e.as_ref().unwrap().path().is_file())
            .count()
    );
    for s in specs {
        assert_eq!(s["status"], "generated", "{s}");
        assert_eq!(s["verdict"], "proven", "{s}");
        assert!(gen.join(s["spec"].as_str().unwrap()).is_dir(), "{s}");
    }
    assert!(j["scenarios"].as_array().unwrap().len() >= 3, "{j}");
    assert_eq!(j["exit_code"], 0);
    let mut compared = 0;
    for e in std::fs::read_dir(root().join("report")).unwrap() {
        let p = e.unwrap().path();
        let files: Vec<PathBuf> = if p.is_dir() {
            std::fs::read_dir(&p)
                .unwrap()
                .map(|f| f.unwrap().path())
                .collect()
        } else {
            vec![p.clone()]
        };
        for f in files
            .into_iter()
            .filter(|f| f.extension().is_some_and(|x| x == "svg" || x == "md"))
        {
            let rel = f.strip_prefix(root().join("report")).unwrap();
            let fresh = std::fs::read(rep.join(rel)).unwrap_or_default();
            assert!(
                fresh == std::fs::read(&f).unwrap(),
                "report/{} is stale: run `lawsmith build`",
                rel.display()
            );
            compared += 1;
        }
    }
    assert!(compared >= 30, "{compared} files");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn margin_finds_the_textbook_margin_and_its_exit_codes_follow_the_outcome() {
    // x' = -k x + d, |d| <= 0.5 t, k >= 2: the guaranteed bound is 0.25 t (delta/k, a
    // standard result of Lyapunov analysis, e.g. Khalil, Nonlinear Systems; from memory), so
    // |x| <= 0.2 holds up to t = 0.8
    let dir = std::env::temp_dir().join(format!("lawsmith-margin-{}", std::process::id()));
    let out = lawsmith(&[
        "margin",
        "tests/data/bound/scalar_disturbance.yaml",
        "--uncertain",
        "u_true",
        "--bound",
        "x=0.2",
        "--format",
        "json",
        "--out",
        dir.to_str().unwrap(),
        "--force",
    ]);
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{text}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: serde_json::Value = serde_json::from_str(&text).unwrap();
    let largest = j["largest"]["factor"].as_f64().unwrap();
    assert!(
        (largest - 0.8).abs() < 0.8 * 0.01,
        "largest factor {largest}, exact 0.8"
    );
    // the curve is monotone: a larger error never gets a smaller guaranteed bound
    let bounds: Vec<f64> = j["curve"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|p| p["bounds"]["x"]["upper"].as_f64())
        .collect();
    assert!(
        bounds.len() >= 5 && bounds.windows(2).all(|w| w[0] <= w[1]),
        "{bounds:?}"
    );
    for f in ["margin_u_true.svg", "margin_u_true.csv"] {
        assert!(dir.join(f).is_file(), "{f} not written");
    }
    // not met even with this error at zero: the other disturbance alone gives |x| <= 0.25
    let out = lawsmith(&[
        "margin",
        "tests/data/bound/two_disturbances.yaml",
        "--uncertain",
        "u_true",
        "--bound",
        "x=0.1",
        "--points",
        "2",
    ]);
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    assert_eq!(out.status.code(), Some(1), "{text}");
    assert!(text.contains("not met even without this error"), "{text}");
    // invalid requests name what is wrong
    for (q, b, says) in [
        ("nope", "x=0.2", "`nope` is not an uncertain quantity"),
        ("u_true", "y=0.2", "`y` is not a state"),
    ] {
        let out = lawsmith(&[
            "margin",
            "tests/data/bound/scalar_disturbance.yaml",
            "--uncertain",
            q,
            "--bound",
            b,
        ]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(3), "{err}");
        assert!(err.contains(says) && !err.contains("panicked"), "{err}");
    }
}

/// The LaTeX commands `derive --format latex` may use: LaTeX2e and amsmath (`align*`).
#[test]
fn derive_latex_compiles_in_a_standalone_document() {
    let engine = ["pdflatex", "lualatex", "xelatex", "tectonic"]
        .into_iter()
        .find(|e| {
            Command::new(e)
                .arg("--version")
                .output()
                .is_ok_and(|o| o.status.success())
        });
    let dir = std::env::temp_dir().join(format!("lawsmith-latex-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let mut specs: Vec<PathBuf> = ["specs", "tests/data/ok", "tests/data/bound"]
        .iter()
        .flat_map(|d| std::fs::read_dir(root().join(d)).unwrap())
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "yaml"))
        .collect();
    specs.sort();
    for spec in &specs {
        let out = lawsmith(&["derive", spec.to_str().unwrap(), "--format", "latex"]);
        assert_eq!(out.status.code(), Some(0), "{}", spec.display());
        let body = String::from_utf8(out.stdout).unwrap();
        let doc = format!(
            "\\documentclass{{article}}\n\\usepackage{{amsmath}}\n\\begin{{document}}\n{body}\n\\end{{document}}\n"
        );
        if let Some(engine) = engine {
            let tex = dir.join("derive.tex");
            std::fs::write(&tex, &doc).unwrap();
            let run = Command::new(engine)
                .args(["-interaction=nonstopmode", "-halt-on-error", "derive.tex"])
                .current_dir(&dir)
                .output()
                .unwrap();
            assert!(
                run.status.success(),
                "{}: {engine} failed:\n{}",
                spec.display(),
                String::from_utf8_lossy(&run.stdout)
            );
            continue;
        }
        // no TeX engine here: the document must be ASCII, its braces and \left/\right
        // balanced, its environments closed, and every command a known LaTeX/amsmath one
        assert!(doc.is_ascii(), "{}: non-ASCII LaTeX", spec.display());
        let mut depth = 0i64;
        let mut prev = ' ';
        for c in doc.chars() {
            if prev != '\\' {
                depth += match c {
                    '{' => 1,
                    '}' => -1,
                    _ => 0,
                };
            }
            assert!(depth >= 0, "{}: a `}}` closes nothing", spec.display());
            prev = if prev == '\\' && c == '\\' { ' ' } else { c };
        }
        assert_eq!(depth, 0, "{}: unbalanced braces", spec.display());
        assert_eq!(
            doc.matches("\\left").count(),
            doc.matches("\\right").count(),
            "{}",
            spec.display()
        );
        assert_eq!(
            doc.matches("\\begin{").count(),
            doc.matches("\\end{").count()
        );
        let bytes = doc.as_bytes();
        let mut i = 0;
        while i < bytes.len() {
            if bytes[i] == b'\\' {
                let start = i + 1;
                let mut j = start;
                while j < bytes.len() && bytes[j].is_ascii_alphabetic() {
                    j += 1;
                }
                let word = if j == start {
                    &doc[start..(start + 1).min(doc.len())]
                } else {
                    &doc[start..j]
                };
                assert!(
                    KNOWN_LATEX.contains(&word)
                        || ["documentclass", "usepackage", "document"].contains(&word),
                    "{}: unknown command \\{word}",
                    spec.display()
                );
                i = j.max(start + 1);
            } else {
                i += 1;
            }
        }
    }
    println!(
        "{} specs: LaTeX {}",
        specs.len(),
        engine.map_or(
            "checked structurally (no TeX engine installed)".to_string(),
            |e| { format!("compiled with {e}") }
        )
    );
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn an_interrupted_build_leaves_generated_as_it_was() {
    // a copy of the checkout's specs and generated code, with one spec edited so that a
    // finished build would change generated/; the build is killed while it proves
    let dir = std::env::temp_dir().join(format!("lawsmith-kill-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    copy_dir(&root().join("specs"), &dir.join("specs"));
    copy_dir(&root().join("generated"), &dir.join("generated"));
    // the first spec in build order: without staging, its files would be rewritten before
    // the slow proof that follows it
    let edited = dir.join("specs/energy_longitudinal.yaml");
    let text = std::fs::read_to_string(&edited).unwrap();
    std::fs::write(&edited, format!("# edited\n{text}")).unwrap();
    // every file under generated/ (each spec's directory and its f32/)
    fn files(d: &Path, v: &mut Vec<(PathBuf, Vec<u8>)>) {
        for e in std::fs::read_dir(d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                files(&p, v);
            } else {
                v.push((p.clone(), std::fs::read(&p).unwrap()));
            }
        }
    }
    let snapshot = |d: &Path| -> Vec<(PathBuf, Vec<u8>)> {
        let mut v = Vec::new();
        files(d, &mut v);
        v.sort();
        v
    };
    let before = snapshot(&dir.join("generated"));
    let mut child = Command::new(env!("CARGO_BIN_EXE_lawsmith"))
        .args(["build", "--report", "report"])
        .current_dir(&dir)
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    // the uncertain spec alone takes seconds to prove: the build is still running
    std::thread::sleep(std::time::Duration::from_millis(1500));
    assert!(
        child.try_wait().unwrap().is_none(),
        "the build finished before it could be interrupted"
    );
    // SIGKILL: nothing runs after it, the hardest interruption
    child.kill().unwrap();
    child.wait().unwrap();
    assert_eq!(snapshot(&dir.join("generated")), before);
    // no temporary files left behind either
    for (p, _) in &before {
        for e in std::fs::read_dir(p.parent().unwrap()).unwrap() {
            let name = e.unwrap().file_name().to_string_lossy().to_string();
            assert!(!name.ends_with(".tmp"), "{name}");
        }
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn the_descent_flown_with_proved_rates_uses_rates_check_proves() {
    // specs/scenarios/descent_proved_rates.yaml limits its guidance filters to the rates
    // `check --rates --within h=0.1,va=0.04` proves for its spec: each scenario limit must lie
    // within what is proved now, so the scenario stays honest when the law changes
    let out = lawsmith(&[
        "check",
        "specs/energy_longitudinal.yaml",
        "--rates",
        "--within",
        "h=0.1,va=0.04",
        "--format",
        "json",
    ]);
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let r = &v["rate_limits"];
    assert_eq!(r["outcome"], "proven");
    let scenario =
        std::fs::read_to_string(root().join("specs/scenarios/descent_proved_rates.yaml")).unwrap();
    for (reference, rate) in [("h_r", "hdot_r"), ("va_r", "vadot_r")] {
        let line = scenario
            .lines()
            .find(|l| l.trim_start().starts_with(&format!("{reference}:")))
            .unwrap();
        let inner = line.split('[').nth(1).unwrap().split(']').next().unwrap();
        let ends: Vec<f64> = inner
            .split(',')
            .map(|x| x.trim().parse().unwrap())
            .collect();
        let proved = r["rates"]
            .as_array()
            .unwrap()
            .iter()
            .find(|p| p["name"] == rate)
            .unwrap()["proved"]
            .clone();
        let (lo, hi) = (proved[0].as_f64().unwrap(), proved[1].as_f64().unwrap());
        assert!(
            ends[0] >= lo && ends[1] <= hi,
            "{reference}: scenario {ends:?}, proved [{lo}, {hi}]"
        );
    }
}
