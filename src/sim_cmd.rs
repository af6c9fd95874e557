//! `lawsmith sim`: fly a scenario (or a Monte Carlo campaign of it) and write CSV, SVG and the
//! metrics.

use crate::progress::Progress;
use crate::{read_spec, write_atomic, ReportFormat, EXIT_INVALID, EXIT_REFUSED};
use lawsmith_sim::bounded::{cross_check, BoundCheck};
use lawsmith_sim::montecarlo::campaign;
use lawsmith_sim::output::{csv, json, plots, table, ScenarioRun};
use lawsmith_sim::run::{Setup, SetupError};
use lawsmith_sim::scenario::Scenario;
use lawsmith_spec::{Claim, Spec};
use lawsmith_verify::{check, BoundReport, Settings, Verdict};
use serde_json::{json, Map, Value};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Reads a scenario, the spec it names and the specs it compares (relative to the scenario
/// file).
pub fn load_setup(path: &Path) -> Result<(Setup, Spec), u8> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        eprintln!("error[io]: cannot read {}: {e}", path.display());
        EXIT_INVALID
    })?;
    let scenario = Scenario::parse(&text).map_err(|e| {
        eprintln!("error[scenario]: {}: {e}", path.display());
        EXIT_INVALID
    })?;
    let dir = path.parent().unwrap_or(Path::new("."));
    let loaded = read_spec(&dir.join(&scenario.spec)).ok_or(EXIT_INVALID)?;
    let compared = scenario
        .compare
        .iter()
        .map(|c| read_spec(&dir.join(c)).map(|l| l.spec).ok_or(EXIT_INVALID))
        .collect::<Result<Vec<_>, u8>>()?;
    let refs: Vec<&Spec> = compared.iter().collect();
    let setup = Setup::new(scenario, &loaded.spec).and_then(|s| s.comparing(&refs));
    let setup = setup.map_err(|e| match e {
        SetupError::Invalid(m) => {
            eprintln!("error[scenario]: {}: {m}", path.display());
            EXIT_INVALID
        }
        SetupError::Unsupported(m) => {
            eprintln!("error[unsupported]: {}: {m}", path.display());
            EXIT_REFUSED
        }
    })?;
    for m in &setup.mismatches {
        eprintln!("warning: {}: {m}", path.display());
    }
    Ok((setup, loaded.spec))
}

/// The guaranteed bounds beside the worst errors the runs showed, as a Markdown table (it
/// reads as plain text too) and as JSON.
pub fn bound_table(bound: &BoundReport, c: &BoundCheck) -> (String, Value) {
    let mut md = format!(
        "Ultimate bound against {} dispersed runs: V ≤ c = {:.4e} proved; {} of {} runs entered {{V ≤ c}}, {} left it after entering; the largest V/c after entering was {:.4}.\n\n| error | guaranteed by the proof | worst observed after entering |\n|---|---|---|\n",
        c.runs.len(),
        c.level,
        c.entered(),
        c.runs.len(),
        c.left(),
        c.worst_ratio()
    );
    let mut errors = Map::new();
    for b in &bound.bounds {
        let observed = match b.state.as_str() {
            "h" => c.h_error(),
            "va" => c.va_error(),
            _ => continue,
        };
        let _ = writeln!(
            md,
            "| {} − ref ({}) | [{}, {}] | [{:.3}, {:.3}] |",
            b.state,
            b.unit,
            lawsmith_verify::report::sig_down(b.lower),
            lawsmith_verify::report::sig_up(b.upper),
            observed.0,
            observed.1
        );
        errors.insert(
            b.state.clone(),
            json!({"unit": b.unit, "guaranteed": [b.lower, b.upper], "observed": [observed.0, observed.1]}),
        );
    }
    let j = json!({
        "level": c.level,
        "runs": c.runs.len(),
        "entered": c.entered(),
        "left_after_entering": c.left(),
        "worst_level_ratio": c.worst_ratio(),
        "errors": errors,
    });
    (md, j)
}

/// For a scenario whose spec claims an ultimate bound: prove it, fly the runs and compare.
fn bound_check(
    path: &Path,
    setup: &Setup,
    mut spec: Spec,
    runs: usize,
    seed: u64,
) -> Result<Option<(String, Value)>, u8> {
    if !matches!(spec.claim, Claim::UltimateBound { .. }) {
        return Ok(None);
    }
    let progress = Progress::new();
    let r = check(&mut spec, &Settings::default(), &|l, b, o| {
        progress.boxes(l, b, o)
    });
    progress.finish();
    let report = r
        .map_err(|e| {
            eprintln!("error[check]: {}: {e}", path.display());
            EXIT_INVALID
        })?
        .0;
    let Some(bound) = report
        .bound
        .as_ref()
        .filter(|_| report.verdict == Verdict::Proven)
    else {
        eprintln!(
            "note: {}: the ultimate bound of its spec is {}; no cross-check",
            path.display(),
            report.verdict.name()
        );
        return Ok(None);
    };
    let c = cross_check(setup, &spec, bound.level, runs, seed).map_err(|e| {
        eprintln!("error[sim]: {}: {e}", path.display());
        EXIT_INVALID
    })?;
    Ok(Some(bound_table(bound, &c)))
}

/// Flies every controller of a scenario.
pub fn fly_all(setup: &Setup) -> Result<ScenarioRun, String> {
    let nominal = setup.nominal();
    let flights = setup
        .pilots()
        .iter()
        .map(|p| setup.fly(p, &nominal))
        .collect::<Result<Vec<_>, _>>()?;
    Ok(ScenarioRun::new(
        &setup.scenario.name,
        setup.scenario.summary.clone(),
        flights,
    ))
}

/// Writes the CSV of every flight and the plots into `dir`.
pub fn write_run(dir: &Path, run: &ScenarioRun) -> Result<Vec<PathBuf>, String> {
    std::fs::create_dir_all(dir).map_err(|e| format!("cannot create {}: {e}", dir.display()))?;
    let mut files: Vec<(String, String)> = run
        .flights
        .iter()
        .map(|(f, _)| (format!("{}.csv", f.pilot), csv(f)))
        .collect();
    files.extend(plots(run));
    let mut written = Vec::new();
    for (name, text) in files {
        let p = dir.join(name);
        write_atomic(&p, text.as_bytes())
            .map_err(|e| format!("cannot write {}: {e}", p.display()))?;
        written.push(p);
    }
    Ok(written)
}

pub fn sim_cmd(
    path: &Path,
    out: &Path,
    format: ReportFormat,
    runs: Option<usize>,
    seed: u64,
) -> ExitCode {
    let (setup, spec) = match load_setup(path) {
        Ok(s) => s,
        Err(c) => return ExitCode::from(c),
    };
    if let Some(n) = runs {
        let bound = match bound_check(path, &setup, spec, n, seed) {
            Ok(b) => b,
            Err(c) => return ExitCode::from(c),
        };
        let c = match campaign(&setup, n, seed) {
            Ok(c) => c,
            Err(e) => {
                eprintln!("error[sim]: {}: {e}", path.display());
                return ExitCode::from(EXIT_INVALID);
            }
        };
        if let Err(e) = std::fs::create_dir_all(out) {
            eprintln!("error[io]: cannot create {}: {e}", out.display());
            return ExitCode::from(EXIT_INVALID);
        }
        let mut summary = c.json();
        if let Some((_, j)) = &bound {
            summary["ultimate_bound"] = j.clone();
        }
        let mut files = c.histograms();
        files.push((
            "campaign.json".into(),
            serde_json::to_string_pretty(&summary).expect("json") + "\n",
        ));
        for (name, text) in files {
            if let Err(e) = write_atomic(&out.join(&name), text.as_bytes()) {
                eprintln!("error[io]: cannot write {}: {e}", out.join(name).display());
                return ExitCode::from(EXIT_INVALID);
            }
        }
        match format {
            ReportFormat::Text => {
                print!("{}", c.table());
                if let Some((md, _)) = &bound {
                    print!("\n{md}");
                }
            }
            ReportFormat::Json => crate::print_json(&summary),
        }
        return ExitCode::SUCCESS;
    }
    let run = match fly_all(&setup) {
        Ok(r) => r,
        Err(e) => {
            eprintln!("error[sim]: {}: {e}", path.display());
            return ExitCode::from(EXIT_INVALID);
        }
    };
    let written = match write_run(out, &run) {
        Ok(w) => w,
        Err(e) => {
            eprintln!("error[io]: {e}");
            return ExitCode::from(EXIT_INVALID);
        }
    };
    match format {
        ReportFormat::Text => {
            println!("{} ({})", run.name, path.display());
            if let Some(s) = &run.summary {
                println!("  {s}");
            }
            println!();
            print!("{}", table(&run));
            if crate::verbosity() > 0 {
                let named = |ext: &str| -> Vec<String> {
                    written
                        .iter()
                        .filter(|p| p.extension().is_some_and(|e| e == ext))
                        .filter_map(|p| Some(p.file_stem()?.to_string_lossy().to_string()))
                        .collect()
                };
                println!(
                    "\nwrote {}/: {}.csv and {} .svg",
                    out.display(),
                    named("csv").join(".csv, "),
                    named("svg").join(", ")
                );
            }
        }
        ReportFormat::Json => println!(
            "{}",
            serde_json::to_string_pretty(&json(&run)).expect("json")
        ),
    }
    ExitCode::SUCCESS
}
