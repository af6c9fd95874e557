//! `lawsmith margin`: the largest estimate error for which the required ultimate bounds still
//! hold, and the curve of estimate error against guaranteed bound (table, CSV, SVG).

use crate::check_cmd::Limits;
use crate::progress::Progress;
use crate::{write_atomic, ReportFormat, EXIT_INVALID};
use lawsmith_sim::plot::{lines, Series};
use lawsmith_spec::ErrorForm;
use lawsmith_verify::{margin, MarginPoint, MarginReport, MarginSettings};
use serde_json::{json, Value};
use std::fmt::Write as _;
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

fn magnitude(r: &MarginReport, x: f64) -> String {
    match r.form {
        ErrorForm::Relative => format!("{:.2}%", 100.0 * x),
        ErrorForm::Absolute => format!("{} {}", sig(x), r.unit),
    }
}

fn sig(x: f64) -> String {
    if x == 0.0 {
        "0".into()
    } else if (1e-3..1e5).contains(&x.abs()) {
        let d = (3 - x.abs().log10().floor() as i32).max(0) as usize;
        format!("{x:.d$}")
    } else {
        format!("{x:.3e}")
    }
}

fn bound_of(p: &MarginPoint, state: &str) -> Option<f64> {
    p.bounds
        .iter()
        .find(|b| b.state == state)
        .map(|b| b.magnitude())
}

/// The states whose bounds the table shows: every error bounded at some point of the curve.
fn states(r: &MarginReport) -> Vec<(String, String)> {
    let mut out: Vec<(String, String)> = Vec::new();
    for p in &r.curve {
        for b in &p.bounds {
            if !out.iter().any(|(s, _)| *s == b.state) {
                out.push((b.state.clone(), b.unit.clone()));
            }
        }
    }
    out
}

pub fn text(r: &MarginReport) -> String {
    let mut s = String::new();
    let kind = match r.form {
        ErrorForm::Relative => "relative error",
        ErrorForm::Absolute => "absolute error",
    };
    let _ = writeln!(
        s,
        "margin of {}: {} ({kind}, declared [{}, {}]{})",
        r.spec,
        r.quantity,
        r.declared.0,
        r.declared.1,
        if r.form == ErrorForm::Absolute {
            format!(" {}", r.unit)
        } else {
            String::new()
        }
    );
    let st = states(r);
    let req: Vec<String> = r
        .required
        .iter()
        .map(|(n, b)| {
            let unit = st
                .iter()
                .find(|(s, _)| s == n)
                .map_or("", |(_, u)| u.as_str());
            format!("|{n} error| <= {} {unit}", sig(*b))
        })
        .collect();
    let _ = writeln!(s, "required: {}", req.join(", "));
    let _ = writeln!(
        s,
        "each row is a proof of the ultimate bound with the error range scaled by the factor\n"
    );
    let mut header = vec![
        "factor".to_string(),
        "|error|".to_string(),
        "level c".to_string(),
    ];
    for (n, u) in &st {
        header.push(format!("|{n} error| {u}"));
    }
    header.push("required".into());
    let mut rows = vec![header];
    let mut all: Vec<&MarginPoint> = r.curve.iter().collect();
    if let Some(l) = &r.largest {
        if !all.iter().any(|p| p.factor == l.factor) {
            all.push(l);
        }
    }
    all.sort_by(|a, b| a.factor.total_cmp(&b.factor));
    for p in &all {
        let mut row = vec![
            format!("{:.3}", p.factor),
            magnitude(r, p.magnitude),
            p.level.map_or("none".into(), sig),
        ];
        for (n, _) in &st {
            row.push(bound_of(p, n).map_or("-".into(), sig));
        }
        let mark = if r.largest.as_ref().is_some_and(|l| l.factor == p.factor) && !r.unbounded {
            " (largest)"
        } else {
            ""
        };
        row.push(format!("{}{mark}", if p.met { "met" } else { "not met" }));
        rows.push(row);
    }
    let widths: Vec<usize> = (0..rows[0].len())
        .map(|c| rows.iter().map(|r| r[c].chars().count()).max().unwrap_or(0))
        .collect();
    for row in &rows {
        let cells: Vec<String> = row
            .iter()
            .zip(&widths)
            .map(|(c, w)| format!("{c:<w$}"))
            .collect();
        let _ = writeln!(s, "  {}", cells.join("  ").trim_end());
    }
    let _ = writeln!(s);
    match (&r.largest, r.unbounded) {
        (Some(l), false) => {
            let _ = writeln!(
                s,
                "largest error meeting the required bounds: {} (factor {:.3} of the declared range)",
                magnitude(r, l.magnitude),
                l.factor
            );
        }
        (Some(l), true) => {
            let _ = writeln!(
                s,
                "every sampled error meets the required bounds, up to {} (factor {:.3}); sample larger factors with --up-to",
                magnitude(r, l.magnitude),
                l.factor
            );
        }
        (None, _) => {
            let _ = writeln!(
                s,
                "the required bounds are not met even without this error: {}",
                r.curve
                    .first()
                    .and_then(|p| p.note.clone())
                    .unwrap_or_else(|| "the guaranteed bounds exceed them".into())
            );
        }
    }
    s
}

pub fn json(r: &MarginReport) -> Value {
    let point = |p: &MarginPoint| {
        json!({
            "factor": p.factor,
            "magnitude": p.magnitude,
            "level": p.level,
            "bounds": p.bounds.iter().map(|b| (b.state.clone(), json!({"lower": b.lower, "upper": b.upper, "unit": b.unit}))).collect::<serde_json::Map<_, _>>(),
            "met": p.met,
            "note": p.note,
            "boxes": p.boxes,
        })
    };
    json!({
        "spec": r.spec,
        "quantity": r.quantity,
        "form": match r.form { ErrorForm::Relative => "relative", ErrorForm::Absolute => "absolute" },
        "unit": r.unit,
        "declared": [r.declared.0, r.declared.1],
        "required": r.required.iter().map(|(s, b)| (s.clone(), json!(b))).collect::<serde_json::Map<_, _>>(),
        "curve": r.curve.iter().map(point).collect::<Vec<_>>(),
        "largest": r.largest.as_ref().map(point),
        "at_least": r.unbounded,
    })
}

fn csv(r: &MarginReport) -> String {
    let st = states(r);
    let mut s = String::from("factor,magnitude,level");
    for (n, _) in &st {
        let _ = write!(s, ",{n}_bound");
    }
    s.push_str(",met\n");
    for p in &r.curve {
        let _ = write!(
            s,
            "{},{},{}",
            p.factor,
            p.magnitude,
            p.level.map_or(String::new(), |l| l.to_string())
        );
        for (n, _) in &st {
            let _ = write!(
                s,
                ",{}",
                bound_of(p, n).map_or(String::new(), |b| b.to_string())
            );
        }
        let _ = writeln!(s, ",{}", p.met);
    }
    s
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
