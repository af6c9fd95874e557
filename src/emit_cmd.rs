//! `lawsmith emit`, `lawsmith emit --check` and `lawsmith build`: prove, generate, write,
//! compare with what is committed.

use crate::progress::Progress;
use crate::{print_json, read_spec, write_atomic, ReportFormat, EXIT_INVALID, EXIT_REFUSED};
use lawsmith_codegen::{generate, Controller, Float, Lang, Provenance, MARKER};
use lawsmith_verify::{check, sha256_hex, CheckReport, Settings, Verdict};
use serde_json::json;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Exit code of `emit` when a law is not proven, or of `emit --check` when generated code is
/// stale.
const EXIT_UNPROVEN: u8 = 1;

/// A spec proved and generated in memory.
pub struct Emitted {
    pub report: CheckReport,
    /// The proof certificate (JSON text), as `check --certificate` writes it.
    pub certificate: String,
    pub controller: Controller,
    /// Each file's path relative to the output directory, and its text.
    pub files: Vec<(String, String)>,
}

/// What `build` writes and `emit --check` compares for a spec (and `emit` writes by default):
/// the code in double precision, and in single precision under `f32/`.
pub const BOTH: [(Float, &str); 2] = [(Float::F64, ""), (Float::F32, "f32/")];

/// The files under a generated directory, as relative paths (`f32/NAME.c`), sorted.
pub fn files_under(dir: &Path) -> Vec<(String, PathBuf)> {
    let mut v = Vec::new();
    let Ok(rd) = std::fs::read_dir(dir) else {
        return v;
    };
    for e in rd.flatten() {
        let n = e.file_name().to_string_lossy().to_string();
        if e.path().is_dir() {
            for (m, p) in files_under(&e.path()) {
                v.push((format!("{n}/{m}"), p));
            }
        } else {
            v.push((n, e.path()));
        }
    }
    v.sort();
    v
}

/// The spec path as the header names it: relative to the working directory when it lies
/// inside it, so the same checkout gives the same bytes wherever it is.
fn display_path(path: &Path) -> String {
    let cwd = std::env::current_dir().ok();
    let rel = match (&cwd, path.canonicalize().ok()) {
        (Some(c), Some(p)) => p.strip_prefix(c).map(Path::to_path_buf).ok(),
        _ => None,
    };
    rel.unwrap_or_else(|| path.to_path_buf())
        .display()
        .to_string()
        .replace('\\', "/")
}

/// Proves a spec and generates its files, in each float type of `floats` with its
/// subdirectory (`""`, `"f32/"`); errors are printed and mapped to exit codes.
pub fn emit_one(
    path: &Path,
    settings: &Settings,
    lang: Lang,
    floats: &[(Float, &str)],
    allow_unproven: bool,
    progress: &Progress,
) -> Result<Emitted, u8> {
    let mut loaded = read_spec(path).ok_or(EXIT_INVALID)?;
    let r = check(&mut loaded.spec, settings, &|l, b, o| {
        progress.boxes(l, b, o)
    });
    progress.finish();
    let (report, prepared) = r.map_err(|e| {
        crate::print_check_error(path, &loaded.bytes, &e);
        EXIT_INVALID
    })?;
    let origin = lawsmith_verify::Origin {
        file: &display_path(path),
        sha256: sha256_hex(&loaded.bytes),
        tool_version: env!("CARGO_PKG_VERSION"),
        settings: crate::check_cmd::settings_json(settings),
    };
    let certificate = lawsmith_verify::certificate(&report, &prepared, &origin).to_string() + "\n";
    if report.verdict != Verdict::Proven && !allow_unproven {
        eprintln!(
            "error[unproven]: {}: the claim is {}; no code is emitted for an unproven law (run `lawsmith check {}` for the report, or pass --allow-unproven to emit it marked as unproven)",
            path.display(),
            report.verdict.name(),
            path.display()
        );
        return Err(EXIT_UNPROVEN);
    }
    let mut controller = Controller::new(&loaded.spec).map_err(|e| {
        eprintln!("error[emit]: {}: {e}", path.display());
        EXIT_INVALID
    })?;
    // with --rates: the guidance filters limited to the proved rates
    if let Some(r) = &report.rates {
        let rates = match r {
            Ok(r) if matches!(r.outcome, lawsmith_verify::RatesOutcome::Proven) => r,
            Ok(_) => {
                eprintln!(
                    "error[rates]: {}: no guidance rates are proved (see `lawsmith check {} --rates`); no code is emitted with --rates",
                    path.display(),
                    path.display()
                );
                return Err(EXIT_UNPROVEN);
            }
            Err(why) => {
                eprintln!("error[rates]: {}: {why}", path.display());
                return Err(EXIT_UNPROVEN);
            }
        };
        let limits: Vec<(String, (f64, f64))> = rates
            .rates
            .iter()
            .map(|p| (p.name.clone(), p.proved))
            .collect();
        controller = controller.with_rate_limits(&limits).map_err(|e| {
            eprintln!("error[rates]: {}: {e}", path.display());
            EXIT_INVALID
        })?;
    }
    let prov = Provenance {
        spec_file: display_path(path),
        spec_sha256: sha256_hex(&loaded.bytes),
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        claim: lawsmith_verify::report::claim_summary(&report),
        verdict: report.verdict.name().to_string(),
        figures: lawsmith_verify::report::proof_figures(
            &report,
            &sha256_hex(certificate.as_bytes()),
        ),
    };
    let mut files = Vec::new();
    for (float, sub) in floats {
        let f = generate(&controller, &prov, lang, *float).map_err(|e| {
            eprintln!("error[emit]: {}: {e}", path.display());
            EXIT_INVALID
        })?;
        files.extend(f.into_iter().map(|(n, t)| (format!("{sub}{n}"), t)));
    }
    Ok(Emitted {
        report,
        certificate,
        controller,
        files,
    })
}

/// Writes generated files into `dir`, refusing (exit code and the diagnostic) to overwrite a
/// file that lawsmith did not generate (it lacks the marker line).
pub fn write_files(dir: &Path, files: &[(String, String)]) -> Result<Vec<PathBuf>, (u8, String)> {
    // every file is checked before any is written, so a refusal changes nothing
    for (name, _) in files {
        let p = dir.join(name);
        let foreign = match std::fs::read_to_string(&p) {
            Ok(old) => !old.lines().take(3).any(|l| l.contains(MARKER)),
            Err(_) => p.exists(),
        };
        if foreign {
            return Err((
                EXIT_REFUSED,
                format!(
                    "error[overwrite]: {} exists and was not generated by lawsmith (no marker line); not overwriting it (move it away, or choose another --out)",
                    p.display()
                ),
            ));
        }
    }
    let io = |e: std::io::Error, what: &Path| {
        (
            EXIT_INVALID,
            format!("error[io]: cannot write {}: {e}", what.display()),
        )
    };
    let mut written = Vec::new();
    for (name, text) in files {
        let p = dir.join(name);
        let parent = p.parent().unwrap_or(dir);
        std::fs::create_dir_all(parent).map_err(|e| io(e, parent))?;
        write_atomic(&p, text.as_bytes()).map_err(|e| io(e, &p))?;
        written.push(p);
    }
    Ok(written)
}

pub fn emit_cmd(
    specs: &[PathBuf],
    lang: Lang,
    floats: &[(Float, &str)],
    out: &Path,
    allow_unproven: bool,
    settings: &Settings,
    format: ReportFormat,
) -> ExitCode {
    let progress = Progress::new();
    let mut code = 0u8;
    let mut json_out = Vec::new();
    for path in specs {
        let spec = path.display().to_string();
        match emit_one(path, settings, lang, floats, allow_unproven, &progress) {
            Err(c) => {
                code = code.max(c);
                json_out.push(json!({ "spec": spec, "status": status_of(c) }));
            }
            Ok(e) => match write_files(out, &e.files) {
                Ok(written) => {
                    let names: Vec<String> =
                        written.iter().map(|p| p.display().to_string()).collect();
                    if format == ReportFormat::Json {
                        json_out.push(json!({
                            "spec": spec,
                            "status": "written",
                            "name": e.controller.name,
                            "claim": e.report.claim.name(),
                            "verdict": e.report.verdict.name(),
                            "ops_per_step": e.controller.op_count(),
                            "boxes": e.report.boxes,
                            "certificate_sha256": sha256_hex(e.certificate.as_bytes()),
                            "saturation": e.report.saturation.iter().map(|a| (a.actuator.clone(), json!(a.verdict()))).collect::<serde_json::Map<_, _>>(),
                            "files": names,
                        }));
                    } else {
                        println!(
                            "{}: {} ({}), {} arithmetic operations per step; wrote {}",
                            e.controller.name,
                            e.report.verdict.name(),
                            e.report.claim.name(),
                            e.controller.op_count(),
                            names.join(", ")
                        );
                    }
                }
                Err((c, msg)) => {
                    eprintln!("{msg}");
                    code = code.max(c);
                    json_out.push(json!({ "spec": spec, "status": "not-written", "error": msg }));
                }
            },
        }
    }
    if format == ReportFormat::Json {
        print_json(&json!({ "exit_code": code, "specs": json_out }));
    }
    ExitCode::from(code)
}

/// What became of a spec that was not emitted, by the exit code `emit_one` gave.
pub fn status_of(code: u8) -> &'static str {
    if code == EXIT_UNPROVEN {
        "refused-unproven"
    } else {
        "invalid"
    }
}

/// The spec files of a directory, sorted.
pub fn specs_in(dir: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .map(|rd| {
            rd.filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|p| p.extension().is_some_and(|x| x == "yaml" || x == "yml"))
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}

/// The directory of a spec's generated files.
pub fn generated_dir(root: &Path, spec: &Path) -> PathBuf {
    root.join(spec.file_stem().unwrap_or_default())
}

/// `emit --check`: every spec of `specs_dir` regenerated in memory and compared with
/// `generated_dir`; a unified diff for each difference.
pub fn check_cmd(
    specs_dir: &Path,
    generated: &Path,
    settings: &Settings,
    format: ReportFormat,
) -> ExitCode {
    let progress = Progress::new();
    let specs = specs_in(specs_dir);
    if specs.is_empty() {
        eprintln!("error[usage]: no spec files in {}", specs_dir.display());
        return ExitCode::from(EXIT_INVALID);
    }
    let mut stale = 0;
    let mut code = 0u8;
    let json = format == ReportFormat::Json;
    let mut differences = Vec::new();
    let mut failed = Vec::new();
    for spec in &specs {
        let e = match emit_one(spec, settings, Lang::All, &BOTH, false, &progress) {
            Ok(e) => e,
            Err(c) => {
                code = code.max(c);
                failed.push(json!({ "spec": spec.display().to_string(), "status": status_of(c) }));
                continue;
            }
        };
        let dir = generated_dir(generated, spec);
        let files = &e.files;
        for (name, want) in files {
            let p = dir.join(name);
            let have = std::fs::read_to_string(&p).unwrap_or_default();
            if have != *want {
                stale += 1;
                let diff = similar::TextDiff::from_lines(&have, want);
                let text = diff
                    .unified_diff()
                    .context_radius(3)
                    .header(
                        &p.display().to_string(),
                        &format!("{} (regenerated)", p.display()),
                    )
                    .to_string();
                if json {
                    differences.push(json!({ "file": p.display().to_string(), "diff": text }));
                } else {
                    print!("{text}");
                }
            }
        }
        for (n, path) in files_under(&dir) {
            if !files.iter().any(|(m, _)| *m == n) {
                stale += 1;
                if json {
                    differences.push(json!({
                        "file": path.display().to_string(),
                        "not_generated_from": spec.display().to_string(),
                    }));
                } else {
                    println!(
                        "{}: not generated from {} any more",
                        path.display(),
                        spec.display()
                    );
                }
            }
        }
    }
    if stale > 0 {
        code = code.max(EXIT_UNPROVEN);
    }
    if json {
        print_json(&json!({
            "exit_code": code,
            "generated": generated.display().to_string(),
            "specs_dir": specs_dir.display().to_string(),
            "specs": specs.len(),
            "up_to_date": stale == 0 && code == 0,
            "stale": differences,
            "failed": failed,
        }));
    } else if stale > 0 {
        eprintln!(
            "{stale} generated file(s) stale under {}; run `lawsmith build` (or `lawsmith emit`) and commit the result",
            generated.display()
        );
    } else if code == 0 {
        println!(
            "{}: up to date with {} ({} specs)",
            generated.display(),
            specs_dir.display(),
            specs.len()
        );
    }
    ExitCode::from(code)
}
