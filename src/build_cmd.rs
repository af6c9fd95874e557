//! `lawsmith build`: the main job on every example spec: prove, generate `generated/`, fly
//! the example scenarios into `report/` with a `report/index.md`, print a summary table.

use crate::certcheck_run;
use crate::emit_cmd::{emit_one, generated_dir, specs_in, status_of, write_files, BOTH};
use crate::progress::Progress;
use crate::sim_cmd::{bound_table, fly_all, load_setup, write_run};
use crate::{print_json, write_atomic, ReportFormat, EXIT_INVALID};
use lawsmith_codegen::Lang;
use lawsmith_verify::Settings;
use lawsmith_verify::{BoundReport, Verdict};
use serde_json::{json, Value};
use std::collections::HashMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Exit code when the independent checker rejects a certificate: as for an unproven law.
const EXIT_REJECTED: u8 = 1;

/// Dispersed runs of every scenario the report summarises by percentiles, and their seed.
const REPORT_RUNS: usize = 200;
const REPORT_SEED: u64 = 3;

/// Dispersed runs of each scenario whose spec claims an ultimate bound, and their seed.
pub const BOUND_RUNS: usize = 1000;
const BOUND_SEED: u64 = 1;
use std::process::ExitCode;

pub fn build_cmd(
    specs_dir: &Path,
    generated: &Path,
    report: &Path,
    settings: &Settings,
    format: ReportFormat,
) -> ExitCode {
    let specs = specs_in(specs_dir);
    if specs.is_empty() {
        eprintln!("error[usage]: no spec files in {}", specs_dir.display());
        return ExitCode::from(EXIT_INVALID);
    }
    let progress = Progress::new();
    let mut rows = Vec::new();
    let mut json_specs: Vec<Value> = Vec::new();
    let mut notes: Vec<String> = Vec::new();
    // what the proofs of the laws with controller states imply
    let mut follows: Vec<String> = Vec::new();
    // the guidance rates that keep every command within its limits, per spec with guidance
    let mut rate_notes: Vec<String> = Vec::new();
    let mut roundoff_notes: Vec<String> = Vec::new();
    let mut md = String::from("# lawsmith report\n\nWritten by `lawsmith build`. The airframe and the scenarios are the invented demo\nairframe and scenarios of lawsmith's examples, not a real aircraft.\n\n## Specs\n\n| spec | claim | verdict | boxes | worst sampled margin | ops/step | saturation (verdict over the envelope; share of sampled points beyond the limits) | independent checker |\n|---|---|---|---:|---:|---:|---|---|\n");
    let mut code = 0u8;
    // proved ultimate bounds, by spec file, for the scenarios' cross-checks
    let mut bounds: HashMap<PathBuf, BoundReport> = HashMap::new();
    let mut pending: Vec<(PathBuf, Vec<(String, String)>)> = Vec::new();
    for spec in &specs {
        let name = spec
            .file_stem()
            .unwrap_or_default()
            .to_string_lossy()
            .to_string();
        match emit_one(spec, settings, Lang::All, &BOTH, false, &progress) {
            Err(c) => {
                code = code.max(c);
                json_specs.push(json!({ "spec": name, "status": status_of(c) }));
                let _ = writeln!(md, "| {name} | - | not emitted | - | - | - | - | - |");
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
                // the proof certificate, re-checked by the independent checker (tools/certcheck)
                let checked = certcheck_run::run(&e.certificate, spec);
                match &checked {
                    certcheck_run::Outcome::Rejected(why) => {
                        eprintln!("error[certcheck]: {}: the independent checker rejects the certificate: {why}", spec.display());
                        code = code.max(EXIT_REJECTED);
                    }
                    certcheck_run::Outcome::NotRun(why) => {
                        eprintln!(
                            "warning: {}: the independent checker did not run: {why}",
                            spec.display()
                        );
                    }
                    certcheck_run::Outcome::Accepted(_) => {}
                }
                // written only once every spec is proved and generated, so an interrupted
                // build leaves the previous generated/ as it was
                let dir = generated_dir(generated, spec);
                let files = &e.files;
                let written = format!("{}/ ({} files)", dir.display(), files.len());
                json_specs.push(json!({
                    "spec": name,
                    "status": "generated",
                    "claim": e.report.claim.name(),
                    "verdict": e.report.verdict.name(),
                    "boxes": e.report.boxes,
                    "seconds": e.report.seconds,
                    "worst_sampled_margin": e.report.min_margin,
                    "ops_per_step": e.controller.op_count(),
                    "generated": dir.display().to_string(),
                    "files": files.iter().map(|(n, _)| n.as_str()).collect::<Vec<_>>(),
                    "saturation": e.report.saturation.iter().map(|a| json!({
                        "actuator": a.actuator, "verdict": a.verdict(), "share": a.share,
                    })).collect::<Vec<_>>(),
                    "independent_check": {"status": checked.name(), "detail": checked.detail()},
                }));
                pending.push((dir, e.files.clone()));
                let sat: Vec<String> = e
                    .report
                    .saturation
                    .iter()
                    .map(|a| format!("{} {} ({:.2}%)", a.actuator, a.verdict(), 100.0 * a.share))
                    .collect();
                if let (Some(b), Verdict::Proven, Ok(p)) =
                    (&e.report.bound, e.report.verdict, spec.canonicalize())
                {
                    bounds.insert(p, b.clone());
                }
                if let Some(line) = lawsmith_verify::report::roundoff_line(&e.report) {
                    roundoff_notes.push(format!("- **{name}**: {line}"));
                }
                if e.report.verdict == Verdict::Proven && e.report.bound.is_none() {
                    if let Some(note) = guidance_rates(spec, settings, &progress) {
                        rate_notes.push(format!("- **{name}**: {note}"));
                    }
                }
                if !e.report.follows.is_empty() {
                    follows.push(format!(
                        "- **{name}** ({}):\n{}",
                        e.report.claim.name(),
                        e.report
                            .follows
                            .iter()
                            .map(|f| format!("  - {f}\n"))
                            .collect::<String>()
                    ));
                }
                if e.report.bound.is_some() {
                    notes.push(format!(
                        "- **{name}**: {}",
                        lawsmith_verify::report::claim_summary(&e.report)
                    ));
                }
                let _ = writeln!(
                    md,
                    "| {name} | {} | {} | {} | {} | {} | {} | {}: {} |",
                    e.report.claim.name(),
                    e.report.verdict.name(),
                    e.report.boxes,
                    e.report
                        .min_margin
                        .map_or("-".into(), |m| format!("{:.4e}", m + 0.0)),
                    e.controller.op_count(),
                    sat.join(", "),
                    checked.name(),
                    checked.detail().trim_start_matches("accepted: ")
                );
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
                        .map_or("-".into(), |m| format!("{:.4e}", m + 0.0)),
                    e.controller.op_count().to_string(),
                    written,
                ]);
            }
        }
    }
    for (dir, files) in &pending {
        if let Err((c, msg)) = write_files(dir, files) {
            eprintln!("{msg}");
            code = code.max(c);
        }
    }
    if !notes.is_empty() {
        md.push_str("\nUltimate bounds (the law with wrong estimates; the errors are bounded, not driven to zero):\n\n");
        for n in &notes {
            md.push_str(n);
            md.push('\n');
        }
    }
    if !rate_notes.is_empty() {
        md.push_str("\nGuidance rates that keep every command within its limits (`lawsmith check SPEC --rates --within …`, with each error within a fiftieth of its proved box; a proof over the sublevel set of V inside those errors, which no trajectory leaves, so the law as flown is the law proved there):\n\n");
        for n in &rate_notes {
            md.push_str(n);
            md.push('\n');
        }
    }
    if !roundoff_notes.is_empty() {
        md.push_str("\nRound-off of the generated code, |computed − exact| for each command as sent and each update law, proved over every input the code accepts without its domain flag (a forward error analysis in the standard model of IEEE 754 arithmetic; in the certificate, re-checked by `recheck` and by the independent checker):\n\n");
        for n in &roundoff_notes {
            md.push_str(n);
            md.push('\n');
        }
    }
    if !follows.is_empty() {
        md.push_str("\nLaws with controller states (integral action, adaptive estimates): what each proof implies, and what it does not:\n\n");
        for f in &follows {
            md.push_str(f);
        }
    }
    // the example scenarios
    let scenarios = specs_in(&specs_dir.join("scenarios"));
    if !scenarios.is_empty() {
        md.push_str("\n## Scenarios\n\nEach scenario flies the energy law as generated (the interpreter of the emitted code)\nbeside the laws it compares (`compare:`, e.g. the adaptive and integral variants) and the\nPID and LQR baselines; metrics are reported as measured, not tuned to a\nranking. `-` marks a metric the scenario does not define (no such step) or a step that\nnever settled. CSV time series are written beside the plots (not committed).\n");
    }
    let mut sim_rows = Vec::new();
    for sc in &scenarios {
        let stem = sc
            .file_stem()
            .unwrap_or_default()
            .to_string_lossy()
            .to_string();
        let (setup, spec) = match load_setup(sc) {
            Ok(s) => s,
            Err(c) => {
                code = code.max(c);
                continue;
            }
        };
        match fly_all(&setup).and_then(|run| write_run(&report.join(&stem), &run).map(|_| run)) {
            Ok(run) => {
                let _ = writeln!(md, "\n### {}\n", run.name);
                if let Some(s) = &run.summary {
                    let _ = writeln!(md, "{s}\n");
                }
                md.push_str(&lawsmith_sim::output::markdown_table(&run));
                let links: Vec<String> = lawsmith_sim::output::plots(&run)
                    .iter()
                    .map(|(file, _)| {
                        let p = file.trim_end_matches(".svg");
                        format!("[{p}]({stem}/{file})")
                    })
                    .collect();
                let _ = writeln!(
                    md,
                    "\nPlots: {}\n\n![altitude]({stem}/altitude.svg)",
                    links.join(" · ")
                );
                // the scenario dispersed: what one nominal flight does not show
                match lawsmith_sim::montecarlo::campaign(&setup, REPORT_RUNS, REPORT_SEED) {
                    Ok(c) => {
                        let _ = write!(
                            md,
                            "\n{} runs with the scenario's dispersions (seed {REPORT_SEED}; `lawsmith sim {} --runs {REPORT_RUNS} --seed {REPORT_SEED}`):\n\n{}",
                            c.runs,
                            sc.display(),
                            c.markdown()
                        );
                    }
                    Err(e) => {
                        eprintln!("error[sim]: {}: {e}", sc.display());
                        code = EXIT_INVALID;
                    }
                }
                let spec_file = sc
                    .parent()
                    .unwrap_or(Path::new("."))
                    .join(&setup.scenario.spec)
                    .canonicalize();
                if let Some(b) = spec_file.ok().and_then(|p| bounds.get(&p)) {
                    match lawsmith_sim::bounded::cross_check(
                        &setup, &spec, b.level, BOUND_RUNS, BOUND_SEED,
                    ) {
                        Ok(c) => {
                            let _ = write!(md, "\n{}", bound_table(b, &c).0);
                        }
                        Err(e) => {
                            eprintln!("error[sim]: {}: {e}", sc.display());
                            code = EXIT_INVALID;
                        }
                    }
                }
                sim_rows.push(stem);
            }
            Err(e) => {
                eprintln!("error[sim]: {}: {e}", sc.display());
                code = EXIT_INVALID;
            }
        }
    }
    if let Err(e) = std::fs::create_dir_all(report)
        .and_then(|_| write_atomic(&report.join("index.md"), md.as_bytes()))
    {
        eprintln!(
            "error[io]: cannot write {}: {e}",
            report.join("index.md").display()
        );
        code = EXIT_INVALID;
    }
    if format == ReportFormat::Json {
        print_json(&json!({
            "exit_code": code,
            "specs": json_specs,
            "scenarios": sim_rows,
            "report": report.join("index.md").display().to_string(),
        }));
        return ExitCode::from(code);
    }
    let head = [
        "spec",
        "claim",
        "verdict",
        "worst sampled margin",
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
    if !sim_rows.is_empty() {
        println!(
            "\nflew {} scenario(s) into {}/: {}; see {}",
            sim_rows.len(),
            report.display(),
            sim_rows.join(", "),
            report.join("index.md").display()
        );
    }
    ExitCode::from(code)
}

/// Share of each state's error box the guidance-rate proofs of `build` keep the errors
/// within: the sublevel set they are over lies inside it.
pub const RATES_WITHIN: f64 = 1.0 / 50.0;

/// The proved guidance rates of a spec with guidance filters, as a line of the report (the
/// errors within [`RATES_WITHIN`] of their boxes); None for a spec without guidance.
fn guidance_rates(spec: &Path, settings: &Settings, progress: &Progress) -> Option<String> {
    let mut loaded = crate::read_spec(spec)?;
    let memory = loaded
        .spec
        .symbols_of(lawsmith_spec::SymbolKind::Memory)
        .count();
    if loaded.spec.guidance.is_empty() {
        return None;
    }
    if memory > 0 {
        // the sublevel set of a candidate with controller-state errors is thin in them (a
        // small gain divides their weight), and its proofs take minutes: `check --rates` for it
        return Some("not sought by build for a law with controller states (minutes of proofs: run `lawsmith check SPEC --rates`)".into());
    }
    let within: Vec<(String, f64)> = loaded
        .spec
        .symbols_of(lawsmith_spec::SymbolKind::State)
        .filter_map(|s| {
            let (lo, hi) = s.error()?.nearest();
            Some((s.name.clone(), RATES_WITHIN * lo.abs().max(hi.abs())))
        })
        .collect();
    let flags: Vec<String> = within
        .iter()
        .map(|(s, b)| format!("{s}={}", lawsmith_verify::report::short(*b)))
        .collect();
    let settings = Settings {
        rates: Some(within),
        roundoff: false,
        ..settings.clone()
    };
    let r = lawsmith_verify::check(&mut loaded.spec, &settings, &|l, b, o| {
        progress.boxes(l, b, o)
    });
    progress.finish();
    let text = match r.ok()?.0.rates? {
        Err(why) => why,
        Ok(rates) => match &rates.outcome {
            lawsmith_verify::RatesOutcome::Proven => {
                let each: Vec<String> = rates
                    .rates
                    .iter()
                    .map(|p| {
                        format!(
                            "{} in [{}, {}] (declared [{}, {}])",
                            p.name,
                            lawsmith_verify::report::sig_up(p.proved.0),
                            lawsmith_verify::report::sig_down(p.proved.1),
                            lawsmith_verify::report::short(p.declared.0),
                            lawsmith_verify::report::short(p.declared.1)
                        )
                    })
                    .collect();
                format!(
                    "{} (`--within {}`, V <= {}; {} proofs, {} boxes){}",
                    each.join(", "),
                    flags.join(","),
                    lawsmith_verify::report::sig_down(rates.level),
                    rates.steps,
                    rates.boxes,
                    if rates.warnings.is_empty() {
                        String::new()
                    } else {
                        "; the spec's guidance filters allow faster rates".into()
                    }
                )
            }
            lawsmith_verify::RatesOutcome::Refuted(a, cx) => format!(
                "none (`--within {}`): with every rate at zero, {a} leaves its limits ({a} = {})",
                flags.join(","),
                lawsmith_verify::report::short(cx.value)
            ),
            lawsmith_verify::RatesOutcome::Inconclusive(why) => format!("undecided: {why}"),
        },
    };
    Some(text)
}
