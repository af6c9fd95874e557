//! Runs the independent checker (`tools/certcheck/`, Python) on a certificate, for
//! `lawsmith build`'s report. Its sources are embedded in the binary and written to a
//! temporary directory, so the report does not depend on where `build` runs; it needs
//! `python3` with SymPy, mpmath, numpy and PyYAML (README), and says so when they are missing.

use std::path::Path;
use std::process::Command;

const SOURCES: [(&str, &str); 5] = [
    (
        "certcheck.py",
        include_str!("../tools/certcheck/certcheck.py"),
    ),
    ("formula.py", include_str!("../tools/certcheck/formula.py")),
    ("iv.py", include_str!("../tools/certcheck/iv.py")),
    ("model.py", include_str!("../tools/certcheck/model.py")),
    (
        "roundoff.py",
        include_str!("../tools/certcheck/roundoff.py"),
    ),
];

/// What the independent checker said of one certificate.
pub enum Outcome {
    /// Exit 0: its first line (`accepted: proven (…)`).
    Accepted(String),
    /// Exit 1: the reason.
    Rejected(String),
    /// It could not run (no python3, a missing library, an unreadable input).
    NotRun(String),
}

impl Outcome {
    pub fn name(&self) -> &'static str {
        match self {
            Outcome::Accepted(_) => "accepted",
            Outcome::Rejected(_) => "rejected",
            Outcome::NotRun(_) => "not run",
        }
    }

    pub fn detail(&self) -> &str {
        match self {
            Outcome::Accepted(s) | Outcome::Rejected(s) | Outcome::NotRun(s) => s,
        }
    }
}

/// Checks `cert` (JSON text) against the spec file.
pub fn run(cert: &str, spec: &Path) -> Outcome {
    // a directory of its own per run, so runs in parallel do not share one
    static RUNS: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
    let n = RUNS.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let dir =
        std::env::temp_dir().join(format!("lawsmith-certcheck-run-{}-{n}", std::process::id()));
    let written = std::fs::create_dir_all(&dir).and_then(|_| {
        for (name, text) in SOURCES {
            std::fs::write(dir.join(name), text)?;
        }
        std::fs::write(dir.join("certificate.json"), cert)
    });
    if let Err(e) = written {
        return Outcome::NotRun(format!(
            "cannot write the checker to {}: {e}",
            dir.display()
        ));
    }
    let out = Command::new("python3")
        .arg(dir.join("certcheck.py"))
        .arg(dir.join("certificate.json"))
        .arg(spec)
        .output();
    let _ = std::fs::remove_dir_all(&dir);
    let out = match out {
        Ok(o) => o,
        Err(e) => return Outcome::NotRun(format!("python3 could not be started: {e}")),
    };
    let text = String::from_utf8_lossy(&out.stdout).trim().to_string();
    let err = String::from_utf8_lossy(&out.stderr);
    match out.status.code() {
        Some(0) => Outcome::Accepted(text),
        Some(1) => Outcome::Rejected(text.trim_start_matches("rejected: ").to_string()),
        _ => Outcome::NotRun(
            err.lines()
                .last()
                .unwrap_or("python3 with SymPy, mpmath, numpy and PyYAML is needed")
                .to_string(),
        ),
    }
}
