//! The generated C against MISRA C:2012 through cppcheck's MISRA addon (a general-purpose
//! checker, Debian's `cppcheck`): every finding must be a deviation listed in `docs/misra.md`.
//! Without cppcheck the rules the generator once broke are checked on the text instead:
//! every `else if` chain ends with an `else` (15.7) and `NAME_advance_references` has one `return` (15.5).

use std::path::PathBuf;
use std::process::Command;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

/// The rule numbers `docs/misra.md` lists as deviations (its table's first column).
fn deviations() -> Vec<String> {
    let text = std::fs::read_to_string(root().join("docs/misra.md")).unwrap();
    text.lines()
        .filter_map(|l| l.strip_prefix("| "))
        .filter_map(|l| l.split(" |").next())
        .filter(|r| r.chars().next().is_some_and(|c| c.is_ascii_digit()))
        .map(str::to_string)
        .collect()
}

#[test]
fn the_generated_c_meets_misra_but_for_the_recorded_deviations() {
    let allowed = deviations();
    assert!(allowed.contains(&"8.7".to_string()), "{allowed:?}");
    let have_cppcheck = Command::new("cppcheck").arg("--version").output().is_ok();
    let mut findings = 0;
    for &name in lawsmith_emitted::SPECS {
        let gen = root().join("generated").join(name);
        let src = gen.join(format!("{name}.c"));
        if have_cppcheck {
            let out = Command::new("cppcheck")
                .args(["--addon=misra", "--std=c99", "--enable=style", "-q", "-I"])
                .arg(&gen)
                .arg(&src)
                .output()
                .unwrap();
            let text = String::from_utf8_lossy(&out.stderr).to_string();
            for line in text.lines().filter(|l| l.ends_with(']')) {
                findings += 1;
                let id = line.rsplit('[').next().unwrap().trim_end_matches(']');
                let rule = id.strip_prefix("misra-c2012-").unwrap_or(id);
                assert!(
                    allowed.iter().any(|a| a == rule),
                    "{name}: a finding that is no recorded deviation: {line}"
                );
            }
        } else {
            let text = std::fs::read_to_string(&src).unwrap();
            let lines: Vec<&str> = text.lines().collect();
            for (i, l) in lines.iter().enumerate() {
                if l.trim_start().starts_with("} else if") {
                    // the chain goes on to an `else` at the same indentation
                    let ind = l.len() - l.trim_start().len();
                    let end = lines[i + 1..]
                        .iter()
                        .find(|m| m.len() - m.trim_start().len() == ind)
                        .unwrap();
                    assert!(
                        end.trim_start().starts_with("} else"),
                        "{name}:{}: an `else if` chain with no final `else`",
                        i + 1
                    );
                }
            }
            if let Some(at) = text.find(&format!("{name}_advance_references(")) {
                let body = &text[at..];
                let body = &body[..body.find("\n}\n").unwrap()];
                assert_eq!(body.matches("return").count(), 1, "{name}: update");
            }
        }
    }
    println!(
        "MISRA C:2012 by cppcheck: {}; {findings} findings, all recorded deviations",
        if have_cppcheck {
            "run"
        } else {
            "not installed, text checks instead"
        }
    );
}
