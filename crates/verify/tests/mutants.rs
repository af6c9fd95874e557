//! Mutation test of the prover: broken variants of each aircraft spec must never be reported
//! proven, and every counterexample must be real.
//!
//! Mutants, generated here from `specs/energy_longitudinal.yaml` and `specs/energy_pitch.yaml`:
//! the sign of each term of each law flipped; each `ddt(...)` term of a law dropped; each gain
//! range widened to include negative values, and to start at 0; the altitude error box widened
//! until the `asin` argument can leave [−1, 1]. Each is checked in process, then
//! tests/python/check_verdicts.py (reference: SymPy, deriving V̇ from the mutated YAML on its
//! own, evaluated in exact rational arithmetic) (1) recomputes V̇ (or the `asin` argument) at
//! every counterexample and requires V̇ ≥ 0 (or |argument| > 1), and (2) searches each mutant
//! for a violation on its own, by sampling; any mutant it shows false must not be `proven`,
//! and must be `falsified`.
//!
//! Mutants of the laws with controller states (`specs/energy_adaptive.yaml`,
//! `specs/energy_integral.yaml`): an update law's sign flipped or a term of it dropped, the
//! estimate's term of a law dropped; each must be falsified, its counterexample confirmed.
//!
//! Limit mutants: an actuator that is saturation-free as written, its limit tightened below
//! its largest command over the box (elementary), must never be reported saturation-free.

use lawsmith_expr::{parse, Ast, AstKind};
use lawsmith_verify::{check, Budget, Settings, Verdict};
use serde_json::json;
use std::path::PathBuf;
use std::process::Command;
use std::time::Duration;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

struct Mutant {
    spec: &'static str,
    what: String,
    yaml: String,
}

/// The law lines of a spec: (line index, law name, formula).
fn law_lines(yaml: &str) -> Vec<(usize, String, String)> {
    let mut out = Vec::new();
    let mut in_laws = false;
    for (i, line) in yaml.lines().enumerate() {
        if !line.starts_with(' ') {
            in_laws = line.starts_with("laws:");
            continue;
        }
        if in_laws {
            if let Some((name, formula)) = line.trim().split_once(": ") {
                out.push((i, name.to_string(), formula.to_string()));
            }
        }
    }
    out
}

fn replace_line(yaml: &str, index: usize, new: &str) -> String {
    let mut lines: Vec<String> = yaml.lines().map(String::from).collect();
    lines[index] = new.to_string();
    lines.join("\n") + "\n"
}

/// Every sum in an AST, as its list of terms.
fn sums<'a>(a: &'a Ast, out: &mut Vec<&'a [Ast]>) {
    match &a.kind {
        AstKind::Add(ts) => {
            out.push(ts);
            ts.iter().for_each(|t| sums(t, out));
        }
        AstKind::Mul(xs) => xs.iter().for_each(|x| sums(x, out)),
        AstKind::Call { args, .. } => args.iter().for_each(|x| sums(x, out)),
        AstKind::Neg(x) => sums(x, out),
        AstKind::Div(x, y) | AstKind::Pow(x, y) => {
            sums(x, out);
            sums(y, out);
        }
        AstKind::Num(_) | AstKind::Sym(_) => {}
    }
}

/// The formula with term `i` of a sum sign-flipped: the first term wrapped in `-(…)`, a later
/// one by swapping the `+`/`-` before it.
fn flip(formula: &str, terms: &[Ast], i: usize) -> String {
    let t = &terms[i];
    let (s, e) = (t.span.start, t.span.end);
    if i == 0 {
        return format!("{}(-({})){}", &formula[..s], &formula[s..e], &formula[e..]);
    }
    if formula[s..].starts_with('-') {
        return format!("{}+{}", &formula[..s], &formula[s + 1..]);
    }
    let op = formula[..s].rfind('+').expect("a later term follows a `+`");
    format!("{}-{}", &formula[..op], &formula[op + 1..])
}

/// The formula with term `i` of a sum removed.
fn drop_term(formula: &str, terms: &[Ast], i: usize) -> String {
    if i == 0 {
        let next = terms[1].span.start;
        let rest = formula[next..].trim_start_matches('+').trim_start();
        return format!("{}{}", &formula[..terms[0].span.start], rest);
    }
    let prev_end = terms[i - 1].span.end;
    format!("{}{}", &formula[..prev_end], &formula[terms[i].span.end..])
}

fn is_ddt(t: &Ast) -> bool {
    let inner = match &t.kind {
        AstKind::Neg(x) => x,
        _ => t,
    };
    matches!(&inner.kind, AstKind::Call { name, .. } if name == "ddt")
}

fn mutants_of(spec: &'static str) -> Vec<Mutant> {
    let yaml = std::fs::read_to_string(root().join("specs").join(spec)).unwrap();
    let mut out = Vec::new();
    for (line, name, formula) in law_lines(&yaml) {
        let ast = parse(&formula).unwrap();
        let mut ss = Vec::new();
        sums(&ast, &mut ss);
        for terms in ss {
            for i in 0..terms.len() {
                let t = &formula[terms[i].span.start..terms[i].span.end];
                let m = flip(&formula, terms, i);
                parse(&m).unwrap_or_else(|e| panic!("mutant `{m}` does not parse: {e}"));
                out.push(Mutant {
                    spec,
                    what: format!("law {name}: sign of `{}` flipped", t.trim()),
                    yaml: replace_line(&yaml, line, &format!("  {name}: {m}")),
                });
                if is_ddt(&terms[i]) {
                    let m = drop_term(&formula, terms, i);
                    parse(&m).unwrap_or_else(|e| panic!("mutant `{m}` does not parse: {e}"));
                    out.push(Mutant {
                        spec,
                        what: format!("law {name}: `{}` dropped", t.trim()),
                        yaml: replace_line(&yaml, line, &format!("  {name}: {m}")),
                    });
                }
            }
        }
    }
    // gain ranges: to negative values, and to start at zero
    for (i, line) in yaml.lines().enumerate() {
        let Some(pos) = line.find("range: [") else {
            continue;
        };
        let name = line.trim().split(':').next().unwrap().to_string();
        if !name.starts_with("k_") {
            continue;
        }
        let rest = &line[pos + 8..];
        let (lo, tail) = rest.split_once(',').unwrap();
        let lo: f64 = lo.trim().parse().unwrap();
        for new_lo in [-lo, 0.0] {
            let new = format!("{}{new_lo},{tail}", &line[..pos + 8]);
            out.push(Mutant {
                spec,
                what: format!("gain {name} range starts at {new_lo}"),
                yaml: replace_line(&yaml, i, &new),
            });
        }
    }
    // the altitude error box, wide enough for the flight-path command to saturate asin
    let (i, line) = yaml
        .lines()
        .enumerate()
        .find(|(_, l)| l.trim_start().starts_with("h:") && l.contains("error:"))
        .unwrap();
    let at = line.find("error: [").unwrap();
    let new = format!("{}error: [-60, 60] }}", &line[..at]);
    out.push(Mutant {
        spec,
        what: "altitude error box widened to [-60, 60] m".into(),
        yaml: replace_line(&yaml, i, &new),
    });
    out
}

/// Mutants of the laws with controller states: an update law's sign flipped, a term of an
/// update law dropped, the estimate's term of a law dropped. Each leaves a cross term between
/// the energy errors and a controller state's error in dV/dt that takes both signs
/// (elementary), so each is false.
fn memory_mutants() -> Vec<Mutant> {
    let edits: [(&'static str, &str, &str, &str); 6] = [
        (
            "energy_adaptive.yaml",
            "update: gamma_d * va * drag * (et - eb)",
            "update: -gamma_d * va * drag * (et - eb)",
            "update law of dhat: sign flipped",
        ),
        (
            "energy_adaptive.yaml",
            "update: gamma_d * va * drag * (et - eb)",
            "update: gamma_d * va * drag * et",
            "update law of dhat: `- eb` dropped",
        ),
        (
            "energy_adaptive.yaml",
            "thrust: drag * (1 + dhat) + ",
            "thrust: drag + ",
            "law thrust: the estimate dhat dropped",
        ),
        (
            "energy_integral.yaml",
            "update: k_t * (et - eb)",
            "update: -k_t * (et - eb)",
            "update law of xi_t: sign flipped",
        ),
        (
            "energy_integral.yaml",
            "update: k_t * (et - eb)",
            "update: k_t * et",
            "update law of xi_t: `- eb` dropped",
        ),
        (
            "energy_integral.yaml",
            "update: k_b * eb,",
            "update: -k_b * eb,",
            "update law of xi_b: sign flipped",
        ),
    ];
    edits
        .iter()
        .map(|(spec, from, to, what)| {
            let yaml = std::fs::read_to_string(root().join("specs").join(spec)).unwrap();
            assert!(yaml.contains(from), "{spec}: `{from}`");
            Mutant {
                spec,
                what: what.to_string(),
                yaml: yaml.replacen(from, to, 1),
            }
        })
        .collect()
}

#[test]
fn no_false_mutant_is_proven_and_every_counterexample_is_real() {
    let settings = Settings {
        samples: 20_000,
        budget: Budget {
            // a mutant whose counterexamples have measure zero (a gain range starting at 0)
            // cannot be falsified by a point, only left undecided: keep its search short
            max_boxes: 60_000,
            time_limit: Duration::from_secs(60),
            max_queue: 1_000_000,
        },
        ..Settings::default()
    };
    let mut cases = Vec::new();
    let mut mutants = mutants_of("energy_longitudinal.yaml");
    mutants.extend(mutants_of("energy_pitch.yaml"));
    assert!(mutants.len() >= 30, "only {} mutants", mutants.len());
    mutants.extend(memory_mutants());
    // two falsified cases of tests/data/check whose counterexamples SymPy can judge too: a
    // semidefinite V̇ under a definite claim, and a candidate that is not positive definite
    for (file, what) in [
        (
            "pendulum_definite.yaml",
            "semidefinite V-dot claimed definite",
        ),
        (
            "indefinite_candidate.yaml",
            "candidate not positive definite",
        ),
    ] {
        mutants.push(Mutant {
            spec: file,
            what: what.into(),
            yaml: std::fs::read_to_string(root().join("tests/data/check").join(file)).unwrap(),
        });
    }
    for m in &mutants {
        let mut spec = lawsmith_spec::load(&m.yaml)
            .unwrap_or_else(|d| panic!("{}: {}: {d:?}", m.spec, m.what));
        let (report, _) = check(&mut spec, &settings, &|_, _, _| {}).unwrap();
        let cx = report.counterexample.as_ref().map(|c| {
            let kind = report
                .goals
                .iter()
                .find(|g| g.label == c.goal)
                .map(|g| g.kind)
                .unwrap();
            json!({
                "kind": kind.name(),
                "goal": c.goal,
                "coordinates": c.coordinates.iter().map(|(n, v)| (n.clone(), json!(v))).collect::<serde_json::Map<_, _>>(),
            })
        });
        println!(
            "{:<26} {:<60} {:<12} {:.2} s",
            m.spec,
            m.what,
            report.verdict.name(),
            report.seconds
        );
        cases.push(json!({
            "spec": m.spec, "what": m.what, "yaml": m.yaml,
            "verdict": report.verdict.name(),
            "well_posed": report.well_posed,
            "counterexample": cx,
        }));
        if report.verdict == Verdict::Falsified {
            assert!(
                cx.is_some(),
                "{}: falsified without a counterexample",
                m.what
            );
        }
    }
    let dir = std::env::temp_dir().join(format!("lawsmith-mutants-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("cases.json");
    std::fs::write(&file, serde_json::to_string(&cases).unwrap()).unwrap();
    let out = Command::new("python3")
        .arg(root().join("tests/python/check_verdicts.py"))
        .arg(&file)
        .output()
        .expect("python3 with sympy (see .ci/run)");
    let text =
        String::from_utf8_lossy(&out.stdout).to_string() + &String::from_utf8_lossy(&out.stderr);
    println!("{text}");
    std::fs::remove_dir_all(&dir).unwrap();
    assert!(out.status.success(), "{text}");
    // the mutation operators must produce false mutants in numbers, or the test means little
    let falsified = cases.iter().filter(|c| c["verdict"] == "falsified").count();
    assert!(falsified >= 20, "only {falsified} mutants falsified");
    let ill_posed = cases
        .iter()
        .filter(|c| c["well_posed"] == json!(false))
        .count();
    assert!(ill_posed >= 2, "the widened error boxes must be ill-posed");
    // every mutant of a law with controller states is false, and shown so
    for c in cases
        .iter()
        .filter(|c| c["spec"] == "energy_adaptive.yaml" || c["spec"] == "energy_integral.yaml")
    {
        assert_eq!(c["verdict"], "falsified", "{}: {}", c["spec"], c["what"]);
    }
}

/// A spec with one actuator's limits replaced by `[lo, hi]`.
fn with_limits(yaml: &str, actuator: &str, lo: f64, hi: f64) -> String {
    let (i, line) = yaml
        .lines()
        .enumerate()
        .find(|(_, l)| {
            l.trim_start().starts_with(&format!("{actuator}:")) && l.contains("limits: [")
        })
        .unwrap_or_else(|| panic!("no limits for {actuator}"));
    let at = line.find("limits: [").unwrap();
    let end = at + line[at..].find(']').unwrap();
    let new = format!("{}limits: [{lo}, {hi}]{}", &line[..at], &line[end + 1..]);
    replace_line(yaml, i, &new)
}

#[test]
fn a_limit_tightened_until_the_command_must_saturate_is_never_saturation_free() {
    // Each actuator below is saturation-free as written. Its largest command over the box is
    // elementary: |u| = k*|x| <= 3*2 = 6 m/s for u = -k*x (k in [0.5, 3], x's error in
    // [-2, 2]), |torque| = k_d*|omega| <= 0.5*4 = 2 N*m for the pendulum, each reached at two
    // corners of the box only, where sampling never lands. A limit tightened below it by a
    // part in 10^6, 10^3 or 10 must make the command leave its limits somewhere, so the
    // verdict must never be `saturation-free`: `saturates` with a point that recheck confirms
    // beyond the tightened limits, or `undecided`.
    let cases = [
        ("tests/data/check/saturation_free.yaml", "u_cmd", 6.0),
        ("specs/pendulum_damping.yaml", "torque_cmd", 2.0),
    ];
    let settings = Settings {
        budget: Budget {
            max_boxes: 20_000,
            ..Budget::default()
        },
        ..Settings::default()
    };
    let mut saturates = 0;
    for (file, actuator, largest) in cases {
        let yaml = std::fs::read_to_string(root().join(file)).unwrap();
        for part in [1e-6, 1e-3, 0.1] {
            let limit = largest * (1.0 - part);
            for (lo, hi) in [(-largest - 1.0, limit), (-limit, largest + 1.0)] {
                let text = with_limits(&yaml, actuator, lo, hi);
                let mut spec = lawsmith_spec::load(&text).unwrap();
                let (report, prepared) = check(&mut spec, &settings, &|_, _, _| {}).unwrap();
                let s = report
                    .saturation
                    .iter()
                    .find(|s| s.actuator == actuator)
                    .unwrap();
                println!("{file} {actuator} limits [{lo}, {hi}]: {}", s.verdict());
                assert_ne!(s.verdict(), "saturation-free", "{file}: [{lo}, {hi}]");
                if s.verdict() == "saturates" {
                    saturates += 1;
                    let cert = lawsmith_verify::certificate(
                        &report,
                        &prepared,
                        &lawsmith_verify::Origin {
                            file: "spec.yaml",
                            sha256: lawsmith_verify::sha256_hex(text.as_bytes()),
                            tool_version: "test",
                            settings: json!({}),
                        },
                    );
                    let mut again = lawsmith_spec::load(&text).unwrap();
                    let p = lawsmith_verify::prepare(&mut again).unwrap();
                    let ok = lawsmith_verify::recheck(
                        &cert,
                        &lawsmith_verify::sha256_hex(text.as_bytes()),
                        &p,
                    )
                    .unwrap_or_else(|e| panic!("{file}: [{lo}, {hi}]: {}", e.0));
                    assert!(ok.actuators.contains(&(actuator.to_string(), "saturates")));
                }
            }
        }
    }
    // a tenth below the largest command, sampling alone finds points beyond the limit
    assert!(
        saturates >= 4,
        "only {saturates} of 12 tightened limits shown saturating"
    );
}
