//! `lawsmith margin`: the largest estimate error for which the required ultimate bounds still
//! hold, and the curve of estimate error against guaranteed bound (table, CSV, SVG).

use crate::check_cmd::Limits;
use crate::progress::Progress;
use crate::{write_atomic, ReportFormat, EXIT_INVALID};
use lawsmith_sim::plot::{lines, Series};
use lawsmith_spec::ErrorForm;
use lawsmith_verify::report::margin::{bound_of, csv, json, states, text};
use lawsmith_verify::{margin, MarginReport, MarginSettings};
use std::path::Path;
use std::process::ExitCode;

/// Exit code when even zero error misses the required bounds.
const EXIT_NOT_MET: u8 = 1;

/// Parses `h=3,va=1`.
pub fn parse_bounds(text: &str) -> Result<Vec<(String, f64)>, String> {
    let mut out = Vec::new();
    for part in text.split(',').map(str::trim).filter(|p| !p.is_empty()) {
        let (name, value) = part
            .split_once('=')
            .ok_or_else(|| format!("`{part}`: write STATE=BOUND, e.g. h=3"))?;
        let v: f64 = value
            .trim()
            .parse()
            .map_err(|_| format!("`{part}`: `{}` is not a number", value.trim()))?;
        if !(v > 0.0 && v.is_finite()) {
            return Err(format!("`{part}`: a bound must be positive and finite"));
        }
        out.push((name.trim().to_string(), v));
    }
    if out.is_empty() {
        return Err("give at least one bound, e.g. --bound h=3,va=1".into());
    }
    Ok(out)
}

fn svg(r: &MarginReport) -> String {
    let scale = if r.form == ErrorForm::Relative {
        100.0
    } else {
        1.0
    };
    let mut series = Vec::new();
    let st = states(r);
    let x_max = r.curve.last().map_or(1.0, |p| p.magnitude * scale);
    for (n, u) in &st {
        series.push(Series {
            label: format!("{n} bound ({u})"),
            points: r
                .curve
                .iter()
                .filter_map(|p| Some((p.magnitude * scale, bound_of(p, n)?)))
                .collect(),
            dashed: false,
        });
        if let Some((_, b)) = r.required.iter().find(|(s, _)| s == n) {
            series.push(Series {
                label: format!("{n} required"),
                points: vec![(0.0, *b), (x_max, *b)],
                dashed: true,
            });
        }
    }
    let xlabel = match r.form {
        ErrorForm::Relative => format!("{} estimate error (%)", r.quantity),
        ErrorForm::Absolute => format!("{} estimate error ({})", r.quantity, r.unit),
    };
    lines(
        &format!(
            "{}: guaranteed ultimate bound against estimate error",
            r.spec
        ),
        &xlabel,
        "guaranteed |error| bound",
        &series,
    )
}

#[allow(clippy::too_many_arguments)]
pub fn margin_cmd(
    path: &Path,
    quantity: &str,
    bounds: &str,
    up_to: f64,
    points: usize,
    out: Option<&Path>,
    format: ReportFormat,
    limits: &Limits,
) -> ExitCode {
    let required = match parse_bounds(bounds) {
        Ok(r) => r,
        Err(e) => {
            eprintln!("error[usage]: --bound: {e}");
            return ExitCode::from(EXIT_INVALID);
        }
    };
    if !(up_to > 0.0 && up_to.is_finite()) || points < 2 {
        eprintln!("error[usage]: --up-to must be positive and --points at least 2");
        return ExitCode::from(EXIT_INVALID);
    }
    // the spec must load cleanly first, so its diagnostics are printed as for any command
    let Some(loaded) = crate::read_spec(path) else {
        return ExitCode::from(EXIT_INVALID);
    };
    drop(loaded);
    let source = match std::fs::read_to_string(path) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("error[io]: cannot read {}: {e}", path.display());
            return ExitCode::from(EXIT_INVALID);
        }
    };
    let settings = MarginSettings {
        factors: (0..points)
            .map(|i| up_to * i as f64 / (points - 1) as f64)
            .collect(),
        ..MarginSettings::default()
    };
    let progress = Progress::new();
    let r = margin(
        &source,
        quantity,
        &required,
        &limits.settings(),
        &settings,
        &|l, b, o| progress.boxes(l, b, o),
    );
    progress.finish();
    let r = match r {
        Ok(r) => r,
        Err(e) => {
            eprintln!("error[margin]: {}: {e}", path.display());
            return ExitCode::from(EXIT_INVALID);
        }
    };
    if let Some(dir) = out {
        if let Err(e) = std::fs::create_dir_all(dir) {
            eprintln!("error[io]: cannot create {}: {e}", dir.display());
            return ExitCode::from(EXIT_INVALID);
        }
        for (name, body) in [
            (format!("margin_{}.svg", r.quantity), svg(&r)),
            (format!("margin_{}.csv", r.quantity), csv(&r)),
        ] {
            let p = dir.join(name);
            if let Err(e) = write_atomic(&p, body.as_bytes()) {
                eprintln!("error[io]: cannot write {}: {e}", p.display());
                return ExitCode::from(EXIT_INVALID);
            }
        }
    }
    match format {
        ReportFormat::Text => print!("{}", text(&r)),
        ReportFormat::Json => crate::print_json(&json(&r)),
    }
    if r.largest.is_some() {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(EXIT_NOT_MET)
    }
}
