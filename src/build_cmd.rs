//! `lawsmith build`: the main job on every example spec: prove, generate `generated/`, print
//! a summary table.

use crate::emit_cmd::{emit_one, generated_dir, specs_in, write_files};
use crate::progress::Progress;
use crate::EXIT_INVALID;
use lawsmith_codegen::{Float, Lang};
use lawsmith_verify::Settings;
use std::path::Path;
use std::process::ExitCode;

pub fn build_cmd(specs_dir: &Path, generated: &Path, settings: &Settings) -> ExitCode {
    let specs = specs_in(specs_dir);
    if specs.is_empty() {
        eprintln!("error[usage]: no spec files in {}", specs_dir.display());
        return ExitCode::from(EXIT_INVALID);
    }
    let progress = Progress::new();
    let mut rows = Vec::new();
    let mut code = 0u8;
    for spec in &specs {
        let name = spec
            .file_stem()
            .unwrap_or_default()
            .to_string_lossy()
            .to_string();
        match emit_one(spec, settings, Lang::All, Float::F64, false, &progress) {
            Err(c) => {
                code = code.max(c);
                rows.push(vec![
                    name,
                    "-".into(),
                    "not emitted".into(),
                    "-".into(),
                    "-".into(),
                    "-".into(),
                ]);
            }
            Ok(e) => {
                let dir = generated_dir(generated, spec);
                let written = match write_files(&dir, &e.files) {
                    Ok(w) => format!("{}/ ({} files)", dir.display(), w.len()),
                    Err(msg) => {
                        eprintln!("error[io]: {msg}");
                        code = EXIT_INVALID;
                        "write failed".into()
                    }
                };
                rows.push(vec![
                    name,
                    e.report.claim.name(),
                    format!(
                        "{} ({} boxes, {:.2} s)",
                        e.report.verdict.name(),
                        e.report.boxes,
                        e.report.seconds
                    ),
                    e.report
                        .min_margin
                        .map_or("-".into(), |m| format!("{m:.4e}")),
                    e.controller.op_count().to_string(),
                    written,
                ]);
            }
        }
    }
    let head = [
        "spec",
        "claim",
        "verdict",
        "worst margin",
        "ops/step",
        "generated",
    ];
    let mut widths: Vec<usize> = head.iter().map(|h| h.len()).collect();
    for r in &rows {
        for (w, c) in widths.iter_mut().zip(r) {
            *w = (*w).max(c.chars().count());
        }
    }
    let line = |cells: Vec<String>| {
        let parts: Vec<String> = cells
            .iter()
            .zip(&widths)
            .map(|(c, w)| format!("{c:<w$}"))
            .collect();
        println!("{}", parts.join("  ").trim_end());
    };
    line(head.iter().map(|s| s.to_string()).collect());
    line(widths.iter().map(|w| "-".repeat(*w)).collect());
    for r in rows {
        line(r);
    }
    ExitCode::from(code)
}
