//! End-to-end tests of the `lawsmith` binary: exit codes, output formats, bad input.

mod common;

use common::{lawsmith, lawsmith_in, root};
use std::path::{Path, PathBuf};
use std::process::Command;

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
    // |torque| = k_d*|omega| <= 0.5*4 = 2 over the box: it touches its limits [-2, 2] N*m
    // at two corners and never leaves them (elementary bound)
    let torque = &v["saturation"]["torque_cmd"];
    assert_eq!(torque["verdict"], "saturation-free", "{torque}");
    assert_eq!(torque["share"], 0.0, "{torque}");
    assert!(torque["point"].is_null(), "{torque}");
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
    assert_eq!(
        out.status.code(),
        Some(4),
        "a refusal has its own exit code"
    );
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
fn outputs_go_where_they_are_told_but_never_into_specs_or_among_a_users_files() {
    let base = std::env::temp_dir().join(format!("lawsmith-outpath-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&base);
    let fresh = base.join("new");
    let f = fresh.to_str().unwrap();
    // a directory that does not exist yet, anywhere: written, and again on a second run
    for _ in 0..2 {
        let out = lawsmith(&[
            "emit",
            "specs/pendulum_damping.yaml",
            "--lang",
            "c",
            "--out",
            f,
        ]);
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    assert!(fresh.join("pendulum_damping.c").exists());
    // twice: the CSV and SVG files carry no marker, and the manifest lets the second run in
    let sim = base.join("flight");
    for _ in 0..2 {
        let out = lawsmith(&[
            "sim",
            "specs/scenarios/speed_step.yaml",
            "--out",
            sim.to_str().unwrap(),
        ]);
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    // a directory holding a file of the user's: refused, nothing written
    let mixed = base.join("mixed");
    std::fs::create_dir_all(&mixed).unwrap();
    std::fs::write(mixed.join("notes.txt"), "mine\n").unwrap();
    let refused = [
        vec![
            "emit",
            "specs/pendulum_damping.yaml",
            "--out",
            mixed.to_str().unwrap(),
        ],
        vec![
            "emit",
            "specs/pendulum_damping.yaml",
            "--out",
            "specs/generated_here",
        ],
        vec![
            "sim",
            "specs/scenarios/speed_step.yaml",
            "--out",
            "specs/scenarios/out",
        ],
        vec!["build", "--generated", "specs/gen"],
    ];
    for args in refused {
        let out = lawsmith(&args);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(4), "{args:?}: {err}");
        assert!(
            err.contains("error[out-path]") && err.contains("--force"),
            "{err}"
        );
    }
    assert_eq!(std::fs::read_dir(&mixed).unwrap().count(), 1);
    assert!(!root().join("specs/generated_here").exists() && !root().join("specs/gen").exists());
    // a file of the user's where emit would write: refused with the hint, kept as it was
    std::fs::write(fresh.join("pendulum_damping.h"), "mine\n").unwrap();
    let out = lawsmith(&[
        "emit",
        "specs/pendulum_damping.yaml",
        "--lang",
        "c",
        "--out",
        f,
    ]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(4), "{err}");
    assert!(err.contains("not generated by lawsmith"), "{err}");
    assert_eq!(
        std::fs::read_to_string(fresh.join("pendulum_damping.h")).unwrap(),
        "mine\n"
    );
    std::fs::remove_dir_all(&base).unwrap();
}

#[test]
fn a_closed_pipe_ends_the_output_not_the_command() {
    // `lawsmith check bad.yaml 2>&1 | head -1`: the reader goes away after one line; the
    // command must still end with exit code 3, every time
    use std::io::{BufRead, BufReader};
    let mut text =
        std::fs::read_to_string(root().join("tests/data/err/unknown-symbol.yaml")).unwrap();
    text = text.replace(
        "frictoin",
        "frictoin + a1 + a2 + a3 + a4 + a5 + a6 + a7 + a8 + a9",
    );
    let spec = std::env::temp_dir().join(format!("lawsmith-pipe-{}.yaml", std::process::id()));
    std::fs::write(&spec, text).unwrap();
    for _ in 0..20 {
        let mut child = Command::new(env!("CARGO_BIN_EXE_lawsmith"))
            .arg("check")
            .arg(&spec)
            .stdout(std::process::Stdio::piped())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .unwrap();
        let mut first = String::new();
        BufReader::new(child.stderr.take().unwrap())
            .read_line(&mut first)
            .unwrap();
        drop(child.stdout.take());
        assert!(first.starts_with("error["), "{first}");
        assert_eq!(child.wait().unwrap().code(), Some(3));
    }
    std::fs::remove_file(&spec).unwrap();
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
