//! The margin curve as text, JSON and CSV (the CLI draws its SVG).

use crate::margin::{MarginPoint, MarginReport};
use lawsmith_spec::ErrorForm;
use serde_json::{json, Value};
use std::fmt::Write as _;

fn magnitude(r: &MarginReport, x: f64) -> String {
    match r.form {
        ErrorForm::Relative => format!("{:.2}%", 100.0 * x),
        ErrorForm::Absolute => format!("{} {}", sig3(x), r.unit),
    }
}

/// Four significant digits, zeros kept (the margin table aligns on them).
fn sig3(x: f64) -> String {
    if x == 0.0 {
        "0".into()
    } else if (1e-3..1e5).contains(&x.abs()) {
        let d = (3 - x.abs().log10().floor() as i32).max(0) as usize;
        format!("{x:.d$}")
    } else {
        format!("{x:.3e}")
    }
}

/// A proved bound as [`sig3`] writes it, rounded up.
fn bound3(x: f64) -> String {
    let up = super::sig_up(x);
    match up.parse::<f64>() {
        Ok(v) if x != 0.0 && (1e-3..1e5).contains(&x.abs()) && !up.contains('e') => {
            let d = (3 - x.abs().log10().floor() as i32).max(0) as usize;
            format!("{v:.d$}")
        }
        _ => up,
    }
}

/// The bound on `state` proved at a point of the curve.
pub fn bound_of(p: &MarginPoint, state: &str) -> Option<f64> {
    p.bounds
        .iter()
        .find(|b| b.state == state)
        .map(|b| b.magnitude())
}

/// The states whose bounds the table shows: every error bounded at some point of the curve.
pub fn states(r: &MarginReport) -> Vec<(String, String)> {
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

/// The margin curve as a table, with the largest error meeting the required bounds.
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
            format!("|{n} error| <= {} {unit}", sig3(*b))
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
            p.level.map_or("none".into(), sig3),
        ];
        for (n, _) in &st {
            row.push(bound_of(p, n).map_or("-".into(), bound3));
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

/// The margin curve as JSON.
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

/// The margin curve as CSV.
pub fn csv(r: &MarginReport) -> String {
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
