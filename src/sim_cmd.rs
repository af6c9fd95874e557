//! `lawsmith sim`: fly a scenario (or a Monte Carlo campaign of it) and write CSV, SVG and the
//! metrics.

use crate::{read_spec, write_atomic, ReportFormat, EXIT_INVALID};
use lawsmith_sim::montecarlo::campaign;
use lawsmith_sim::output::{csv, json, plots, table, ScenarioRun};
use lawsmith_sim::run::{Setup, PILOTS};
use lawsmith_sim::scenario::Scenario;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Reads a scenario and the spec it names (relative to the scenario file).
pub fn load_setup(path: &Path) -> Result<Setup, u8> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        eprintln!("error[io]: cannot read {}: {e}", path.display());
        EXIT_INVALID
    })?;
    let scenario = Scenario::parse(&text).map_err(|e| {
        eprintln!("error[scenario]: {}: {e}", path.display());
        EXIT_INVALID
    })?;
    let spec_path = path.parent().unwrap_or(Path::new(".")).join(&scenario.spec);
    let loaded = read_spec(&spec_path).ok_or(EXIT_INVALID)?;
    Setup::new(scenario, &loaded.spec).map_err(|e| {
        eprintln!("error[scenario]: {}: {e}", path.display());
        EXIT_INVALID
    })
}

/// Flies every controller of a scenario.
pub fn fly_all(setup: &Setup) -> Result<ScenarioRun, String> {
    let nominal = setup.nominal();
    let flights = PILOTS
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
    let setup = match load_setup(path) {
        Ok(s) => s,
        Err(c) => return ExitCode::from(c),
    };
    if let Some(n) = runs {
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
        let mut files = c.histograms();
        files.push((
            "campaign.json".into(),
            serde_json::to_string_pretty(&c.json()).expect("json") + "\n",
        ));
        for (name, text) in files {
            if let Err(e) = write_atomic(&out.join(&name), text.as_bytes()) {
                eprintln!("error[io]: cannot write {}: {e}", out.join(name).display());
                return ExitCode::from(EXIT_INVALID);
            }
        }
        match format {
            ReportFormat::Text => print!("{}", c.table()),
            ReportFormat::Json => {
                println!("{}", serde_json::to_string_pretty(&c.json()).expect("json"))
            }
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
    if let Err(e) = write_run(out, &run) {
        eprintln!("error[io]: {e}");
        return ExitCode::from(EXIT_INVALID);
    }
    match format {
        ReportFormat::Text => {
            println!("{} ({})", run.name, path.display());
            if let Some(s) = &run.summary {
                println!("  {s}");
            }
            println!();
            print!("{}", table(&run));
            println!("\nwrote {}/: {{energy,pid,lqr}}.csv and altitude, airspeed, pitch, throttle, energy_error, balance_error .svg", out.display());
        }
        ReportFormat::Json => println!(
            "{}",
            serde_json::to_string_pretty(&json(&run)).expect("json")
        ),
    }
    ExitCode::SUCCESS
}
