//! End-to-end tests of the `lawsmith` binary: exit codes, output formats, bad input.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn lawsmith(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_lawsmith"))
        .args(args)
        .current_dir(root())
        .output()
        .unwrap()
}

/// Runs `derive` on a bad input: exit 3, no panic, a `file:line:col` location, and the peak
/// resident set the binary reports (KiB).
fn bad_input(p: &Path) -> u64 {
    let out = Command::new(env!("CARGO_BIN_EXE_lawsmith"))
        .args(["derive", p.to_str().unwrap()])
        .env("LAWSMITH_PEAK_RSS", "1")
        .current_dir(root())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(3), "{}: {err}", p.display());
    assert!(!err.contains("panicked"), "{}: {err}", p.display());
    let name = p.file_name().unwrap().to_string_lossy().to_string();
    // `name:LINE:COL` somewhere in the message
    let located = err.match_indices(&format!("{name}:")).any(|(i, m)| {
        let rest = &err[i + m.len()..];
        let line: String = rest.chars().take_while(char::is_ascii_digit).collect();
        let after = &rest[line.len()..];
        !line.is_empty()
            && after.starts_with(':')
            && after[1..].starts_with(|c: char| c.is_ascii_digit())
    });
    assert!(located, "{}: no file:line:col in\n{err}", p.display());
    err.lines()
        .find_map(|l| l.strip_prefix("peak-rss-kib: "))
        .and_then(|v| v.trim().parse().ok())
        .expect("the binary reports its peak RSS")
}

#[test]
fn every_bad_input_exits_3_without_a_panic_in_bounded_memory() {
    let mut cases: Vec<PathBuf> = std::fs::read_dir(root().join("tests/data/err"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    cases.sort();
    assert!(cases.len() >= 25, "{} classes", cases.len());
    // inputs too large or too odd to commit, made here
    let dir = std::env::temp_dir().join(format!("lawsmith-bad-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let base = std::fs::read_to_string(root().join("tests/data/ok/spring_tracking.yaml")).unwrap();
    let big = dir.join("ten-megabytes.yaml");
    let filler = "# padding\n".repeat(10 * 1024 * 1024 / 10 + 1);
    std::fs::write(&big, format!("{base}{filler}")).unwrap();
    let latin1 = dir.join("non-utf8.yaml");
    std::fs::write(&latin1, [base.as_bytes(), b"# caf\xe9\n"].concat()).unwrap();
    let deep = dir.join("deep-formula.yaml");
    std::fs::write(
        &deep,
        base.replace("  x: v\n", &format!("  x: {}v\n", "(".repeat(100_000))),
    )
    .unwrap();
    cases.extend([big, latin1, deep]);
    let mut worst = (0, String::new());
    for p in &cases {
        let kib = bad_input(p);
        if kib > worst.0 {
            worst = (kib, p.file_name().unwrap().to_string_lossy().to_string());
        }
    }
    println!(
        "{} bad inputs, peak RSS at most {} KiB ({})",
        cases.len(),
        worst.0,
        worst.1
    );
    assert!(worst.0 < 1 << 20, "peak RSS {} KiB on {}", worst.0, worst.1);
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn example_specs_derive_in_every_format() {
    let specs: Vec<String> = ["energy_longitudinal", "energy_pitch", "pendulum_damping"]
        .iter()
        .map(|s| format!("specs/{s}.yaml"))
        .collect();
    for fmt in ["text", "latex", "json"] {
        let mut args = vec!["derive", "--format", fmt];
        args.extend(specs.iter().map(String::as_str));
        let out = lawsmith(&args);
        assert!(
            out.status.success(),
            "{fmt}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let text = String::from_utf8_lossy(&out.stdout);
        match fmt {
            "json" => {
                let v: serde_json::Value = serde_json::from_str(&text).unwrap();
                let arr = v.as_array().unwrap();
                assert_eq!(arr.len(), 3);
                for s in arr {
                    for key in ["name", "candidate", "vdot", "laws", "symbols"] {
                        assert!(s.get(key).is_some(), "missing {key}");
                    }
                }
                assert_eq!(arr[2]["vdot"], "-k_d*omega^2");
                assert_eq!(arr[0]["symbols"]["k_tot"]["kind"], "gain");
                assert_eq!(
                    arr[0]["symbols"]["h"]["range"],
                    serde_json::json!([25.0, 605.0])
                );
            }
            "latex" => {
                assert_eq!(text.matches("\\begin{align*}").count(), 3);
                assert_eq!(text.matches('{').count(), text.matches('}').count());
            }
            _ => assert!(text.contains("dV/dt = -k_d*omega^2")),
        }
    }
}

#[test]
fn unreadable_and_non_utf8_files_are_reported() {
    let out = lawsmith(&["derive", "specs/does_not_exist.yaml"]);
    assert_eq!(out.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&out.stderr).contains("cannot read"));
    let dir = std::env::temp_dir().join(format!("lawsmith-cli-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let bad = dir.join("latin1.yaml");
    std::fs::write(&bad, b"name: caf\xe9\n").unwrap();
    let out = lawsmith(&["derive", bad.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(3));
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert!(
        err.contains("latin1.yaml:1:10") && err.contains("UTF-8"),
        "{err}"
    );
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_100000_deep_formula_through_the_binary_is_a_located_error() {
    let base = std::fs::read_to_string(root().join("tests/data/ok/spring_tracking.yaml")).unwrap();
    let deep = format!("{}v{}", "-".repeat(100_000), "");
    let source = base.replace("  x: v\n", &format!("  x: {deep}\n"));
    let dir = std::env::temp_dir().join(format!("lawsmith-deep-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let p = dir.join("deep.yaml");
    std::fs::write(&p, source).unwrap();
    let out = lawsmith(&["derive", p.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert_eq!(out.status.code(), Some(3), "{err}");
    assert!(err.contains("deeper than 256 levels"), "{err}");
    assert!(Path::new(&p).exists());
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn check_exit_codes_follow_the_verdict() {
    // 0 proven, 1 falsified, 2 inconclusive, 3 invalid spec
    let cases: [(&[&str], i32); 4] = [
        (&["check", "specs/energy_longitudinal.yaml"], 0),
        (&["check", "tests/data/check/pendulum_definite.yaml"], 1),
        (
            &[
                "check",
                "tests/data/check/exponential_rate.yaml",
                "--max-boxes",
                "50",
            ],
            2,
        ),
        (&["check", "tests/data/err/unknown-symbol.yaml"], 3),
    ];
    for (args, code) in cases {
        let out = lawsmith(args);
        let text = String::from_utf8_lossy(&out.stdout).to_string()
            + &String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(code), "{args:?}: {text}");
        assert!(!text.contains("panicked"), "{text}");
        if code == 2 {
            assert!(text.contains("raise --max-boxes"), "{text}");
        }
    }
}

#[test]
fn check_json_has_the_documented_keys() {
    let out = lawsmith(&[
        "check",
        "--format",
        "json",
        "tests/data/check/pendulum_definite.yaml",
    ]);
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    for key in [
        "verdict",
        "claim",
        "well_posed",
        "saturation",
        "counterexample",
        "boxes",
        "min_margin",
        "seconds",
    ] {
        assert!(v.get(key).is_some(), "missing {key}: {v}");
    }
    assert_eq!(v["verdict"], "falsified");
    assert_eq!(v["claim"], "negative_definite");
    assert_eq!(v["counterexample"]["point"]["omega"], 0.0);
    assert_eq!(v["counterexample"]["vdot"], 0.0);
    assert!(v["saturation"]["torque_cmd"].is_number());
}

#[test]
fn a_written_certificate_rechecks_and_an_edited_one_does_not() {
    let dir = std::env::temp_dir().join(format!("lawsmith-cert-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let cert = dir.join("energy.cert.json");
    let c = cert.to_str().unwrap();
    let out = lawsmith(&["check", "specs/energy_pitch.yaml", "--certificate", c]);
    assert_eq!(out.status.code(), Some(0));
    let out = lawsmith(&["recheck", c, "specs/energy_pitch.yaml"]);
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    assert_eq!(out.status.code(), Some(0), "{text}");
    assert!(text.starts_with("accepted"), "{text}");
    // against another spec: the SHA-256 differs
    let out = lawsmith(&["recheck", c, "specs/energy_longitudinal.yaml"]);
    assert_eq!(out.status.code(), Some(1));
    // one bound edited
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&cert).unwrap()).unwrap();
    let goals = v["goals"].as_array_mut().unwrap();
    let last = goals.last_mut().unwrap();
    let leaf = last["leaves"]
        .as_array_mut()
        .unwrap()
        .iter_mut()
        .find(|l| l.get("bound").is_some())
        .unwrap();
    let hi = leaf["bound"][1].as_f64().unwrap();
    leaf["bound"][1] = serde_json::json!(hi - 1.0);
    std::fs::write(&cert, serde_json::to_string(&v).unwrap()).unwrap();
    let out = lawsmith(&["recheck", c, "specs/energy_pitch.yaml"]);
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    assert_eq!(out.status.code(), Some(1), "{text}");
    assert!(
        text.starts_with("rejected") && text.contains("recorded bound"),
        "{text}"
    );
    std::fs::remove_dir_all(&dir).unwrap();
}

fn lawsmith_in(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_lawsmith"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap()
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        let dest = to.join(e.file_name());
        if e.path().is_dir() {
            copy_dir(&e.path(), &dest);
        } else {
            std::fs::copy(e.path(), dest).unwrap();
        }
    }
}

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
    assert_eq!(out.status.code(), Some(3));
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
            m["peak_airspeed_deviation_in_climb"].is_number(),
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
fn new_writes_a_starter_spec_that_proves_and_never_overwrites() {
    let dir = std::env::temp_dir().join(format!("lawsmith-new-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    let d = dir.to_str().unwrap();
    let out = lawsmith(&["new", "speed_hold", "--dir", d]);
    assert_eq!(out.status.code(), Some(0));
    let spec = dir.join("speed_hold.yaml");
    let text = std::fs::read_to_string(&spec).unwrap();
    assert!(text.contains("name: speed_hold") && text.contains("flight-test"));
    let out = lawsmith(&["check", spec.to_str().unwrap(), "--format", "json"]);
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(j["verdict"], "proven", "{j}");
    // an existing file is kept unless --force
    std::fs::write(&spec, "mine\n").unwrap();
    let out = lawsmith(&["new", "speed_hold", "--dir", d]);
    assert_eq!(out.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--force"));
    assert_eq!(std::fs::read_to_string(&spec).unwrap(), "mine\n");
    assert_eq!(
        lawsmith(&["new", "speed_hold", "--dir", d, "--force"])
            .status
            .code(),
        Some(0)
    );
    assert_eq!(std::fs::read_to_string(&spec).unwrap(), text);
    // names must be identifiers valid in Rust and C
    for bad in ["fn", "2fast", "spëed"] {
        let out = lawsmith(&["new", bad, "--dir", d]);
        assert_eq!(out.status.code(), Some(3), "{bad}");
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn output_paths_inside_specs_or_outside_the_tree_need_force() {
    let dir = std::env::temp_dir().join(format!("lawsmith-outpath-{}", std::process::id()));
    let d = dir.to_str().unwrap();
    for args in [
        vec![
            "emit",
            "specs/pendulum_damping.yaml",
            "--out",
            "specs/generated_here",
        ],
        vec!["emit", "specs/pendulum_damping.yaml", "--out", d],
        vec![
            "sim",
            "specs/scenarios/speed_step.yaml",
            "--out",
            "specs/scenarios/out",
        ],
        vec!["build", "--generated", "specs/gen"],
    ] {
        let out = lawsmith(&args);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(3), "{args:?}: {err}");
        assert!(
            err.contains("error[out-path]") && err.contains("--force"),
            "{err}"
        );
    }
    assert!(!root().join("specs/generated_here").exists() && !dir.exists());
    assert!(!root().join("specs/gen").exists());
}

#[test]
fn completions_and_quiet() {
    for shell in ["bash", "zsh", "fish"] {
        let out = lawsmith(&["completions", shell]);
        assert_eq!(out.status.code(), Some(0));
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(
            text.contains("lawsmith") && text.contains("margin"),
            "{shell}"
        );
    }
    // --quiet keeps the answer and drops the rest; --verbose adds what was read
    let quiet = lawsmith(&["--quiet", "check", "specs/pendulum_damping.yaml"]);
    assert_eq!(quiet.status.code(), Some(0));
    assert!(String::from_utf8_lossy(&quiet.stdout).contains("PROVEN"));
    assert!(quiet.stderr.is_empty());
    let verbose = lawsmith(&["--verbose", "check", "specs/pendulum_damping.yaml"]);
    assert!(String::from_utf8_lossy(&verbose.stderr)
        .contains("lawsmith: read specs/pendulum_damping.yaml"));
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
    let snapshot = |d: &Path| -> Vec<(PathBuf, Vec<u8>)> {
        let mut v = Vec::new();
        for e in std::fs::read_dir(d).unwrap() {
            let p = e.unwrap().path();
            for f in std::fs::read_dir(&p).unwrap() {
                let f = f.unwrap().path();
                v.push((f.clone(), std::fs::read(&f).unwrap()));
            }
        }
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
fn every_reporting_command_speaks_json() {
    // every command that reports has --format json (schema prints JSON already; completions
    // print a shell script)
    for cmd in [
        "derive", "check", "emit", "build", "sim", "margin", "new", "recheck",
    ] {
        let out = lawsmith(&[cmd, "--help"]);
        let help = String::from_utf8_lossy(&out.stdout).to_string();
        assert!(help.contains("--format"), "{cmd}: {help}");
    }
    let dir = std::env::temp_dir().join(format!("lawsmith-json-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(dir.join("specs")).unwrap();
    let json = |args: &[&str], code: i32| -> serde_json::Value {
        let out = lawsmith_in(&dir, args);
        assert_eq!(
            out.status.code(),
            Some(code),
            "{args:?}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        serde_json::from_slice(&out.stdout)
            .unwrap_or_else(|e| panic!("{args:?}: {e}: {}", String::from_utf8_lossy(&out.stdout)))
    };
    let j = json(&["new", "hold", "--dir", "specs", "--format", "json"], 0);
    assert_eq!(j["name"], "hold");
    assert!(dir.join(j["wrote"].as_str().unwrap()).is_file(), "{j}");
    let j = json(
        &[
            "emit",
            "specs/hold.yaml",
            "--out",
            "generated/hold",
            "--format",
            "json",
        ],
        0,
    );
    let s = &j["specs"][0];
    assert_eq!(
        (&s["status"], &s["verdict"]),
        (&"written".into(), &"proven".into()),
        "{j}"
    );
    let files = s["files"].as_array().unwrap();
    assert!(files.len() >= 3, "{j}");
    for f in files {
        assert!(dir.join(f.as_str().unwrap()).is_file(), "{f}");
    }
    let j = json(&["emit", "--check", "--format", "json"], 0);
    assert_eq!(
        (&j["up_to_date"], &j["specs"]),
        (&true.into(), &1.into()),
        "{j}"
    );
    // a hand edit makes it stale, and the diff is in the document
    let c_file = dir.join("generated/hold/hold.c");
    let text = std::fs::read_to_string(&c_file).unwrap();
    std::fs::write(&c_file, text + "/* edited */\n").unwrap();
    let j = json(&["emit", "--check", "--format", "json"], 1);
    assert_eq!(j["up_to_date"], false, "{j}");
    let diff = j["stale"][0]["diff"].as_str().unwrap();
    assert!(diff.contains("-/* edited */"), "{diff}");
    // a certificate: accepted as written, rejected against another spec
    let out = lawsmith_in(
        &dir,
        &[
            "check",
            "specs/hold.yaml",
            "--certificate",
            "hold.cert.json",
        ],
    );
    assert_eq!(out.status.code(), Some(0));
    let j = json(
        &[
            "recheck",
            "hold.cert.json",
            "specs/hold.yaml",
            "--format",
            "json",
        ],
        0,
    );
    assert_eq!(
        (&j["accepted"], &j["verdict"]),
        (&true.into(), &"proven".into()),
        "{j}"
    );
    assert!(j["leaf_boxes"].as_u64().unwrap() > 0, "{j}");
    std::fs::write(
        dir.join("specs/other.yaml"),
        std::fs::read_to_string(dir.join("specs/hold.yaml")).unwrap() + "# edited\n",
    )
    .unwrap();
    let j = json(
        &[
            "recheck",
            "hold.cert.json",
            "specs/other.yaml",
            "--format",
            "json",
        ],
        1,
    );
    assert_eq!(j["accepted"], false, "{j}");
    assert!(j["reason"].as_str().unwrap().contains("SHA-256"), "{j}");
    std::fs::remove_dir_all(&dir).unwrap();
}
