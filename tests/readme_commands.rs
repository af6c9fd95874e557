//! Every command the README and the tutorial show (`$ lawsmith …` in a text block, with the
//! commands around it) is run in a copy of the repository, and its output compared with the
//! text written under it: line for line, with runs of spaces counted as one, timings (`0.06
//! s`) masked, and a line `…` standing for any number of lines. A change of output without a
//! change of the documentation fails here.

mod common;

use common::{copy_dir, root};
use std::path::{Path, PathBuf};
use std::process::Command;

/// A documented command and the output written under it.
#[derive(Debug)]
struct Shown {
    line: usize,
    command: String,
    output: Vec<String>,
}

/// The `$ …` commands of the text blocks of a Markdown file.
fn shown(markdown: &str) -> Vec<Shown> {
    let mut out: Vec<Shown> = Vec::new();
    let (mut in_block, mut fence) = (false, false);
    // the commands of the current block start at this index of `out`
    let mut block_start = 0;
    for (i, l) in markdown.lines().enumerate() {
        if l.starts_with("```") {
            in_block = !fence && l == "```text";
            fence = !fence;
            block_start = out.len();
            continue;
        }
        if !in_block {
            continue;
        }
        if let Some(c) = l.strip_prefix("$ ") {
            out.push(Shown {
                line: i + 1,
                command: c.to_string(),
                output: Vec::new(),
            });
        } else if out.len() > block_start {
            out.last_mut()
                .expect("a command")
                .output
                .push(l.to_string());
        }
    }
    out
}

/// A line as compared: trailing space gone, runs of spaces as one, timings masked.
fn norm(line: &str) -> String {
    let mut s = String::new();
    let words: Vec<&str> = line.split_whitespace().collect();
    for (k, w) in words.iter().enumerate() {
        let timing = words
            .get(k + 1)
            .is_some_and(|n| n.starts_with("s") && n.len() <= 2)
            && w.chars().all(|c| c.is_ascii_digit() || c == '.')
            && w.contains('.');
        if k > 0 {
            s.push(' ');
        }
        // a rule of dashes under a table heading is as wide as its widest cell
        let rule = w.len() > 1 && w.chars().all(|c| c == '-');
        s.push_str(if timing {
            "T"
        } else if rule {
            "--"
        } else {
            w
        });
    }
    s
}

/// Does the actual output match the documented one (`…` for any lines)?
fn matches(doc: &[String], actual: &[String]) -> bool {
    match doc.split_first() {
        None => actual.iter().all(|l| l.trim().is_empty()),
        Some((d, rest)) if d.trim() == "…" => {
            (0..=actual.len()).any(|k| matches(rest, &actual[k..]))
        }
        Some((d, rest)) => actual
            .split_first()
            .is_some_and(|(a, more)| norm(a) == norm(d) && matches(rest, more)),
    }
}

/// Runs the commands of a file in `dir`, in order; the mismatches.
fn run_all(doc: &str, dir: &Path) -> Vec<String> {
    let bin_dir = Path::new(env!("CARGO_BIN_EXE_lawsmith")).parent().unwrap();
    let path = format!(
        "{}:{}",
        bin_dir.display(),
        std::env::var("PATH").unwrap_or_default()
    );
    let text = std::fs::read_to_string(root().join(doc)).unwrap();
    let mut bad = Vec::new();
    let commands = shown(&text);
    assert!(!commands.is_empty(), "{doc} shows no command");
    for s in commands {
        let out = Command::new("sh")
            .arg("-c")
            .arg(format!("{} 2>&1", s.command))
            .current_dir(dir)
            .env("PATH", &path)
            .output()
            .unwrap();
        let actual: Vec<String> = String::from_utf8_lossy(&out.stdout)
            .lines()
            .map(str::to_string)
            .collect();
        if !matches(&s.output, &actual) {
            bad.push(format!(
                "{doc}:{}: `{}` printed\n{}\n--- where the documentation shows\n{}",
                s.line,
                s.command,
                actual.join("\n"),
                s.output.join("\n")
            ));
        }
    }
    bad
}

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("lawsmith-docs-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

#[test]
fn every_command_the_readme_shows_prints_what_it_shows() {
    let dir = scratch("readme");
    for sub in ["specs", "tests/data", "tools", "generated", "report"] {
        copy_dir(&root().join(sub), &dir.join(sub));
    }
    let bad = run_all("README.md", &dir);
    assert!(bad.is_empty(), "{}", bad.join("\n\n"));
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn every_command_the_tutorial_shows_prints_what_it_shows() {
    let dir = scratch("tutorial");
    copy_dir(&root().join("specs"), &dir.join("specs"));
    let bad = run_all("docs/tutorial.md", &dir);
    assert!(bad.is_empty(), "{}", bad.join("\n\n"));
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_changed_output_is_noticed() {
    let doc: Vec<String> = ["verdict  PROVEN in 0.06 s (1209 boxes)", "…", "end"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    let same: Vec<String> = ["verdict PROVEN in 0.31 s (1209 boxes)", "a", "b", "end"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    assert!(matches(&doc, &same));
    let other: Vec<String> = ["verdict PROVEN in 0.31 s (1210 boxes)", "end"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    assert!(!matches(&doc, &other));
    assert!(!matches(&doc, &same[..2]));
    let md = "x\n```text\n$ lawsmith check a.yaml\nline\n```\n```sh\n$ not run\n```\n";
    let s = shown(md);
    assert_eq!(s.len(), 1);
    assert_eq!(s[0].output, vec!["line".to_string()]);
}
