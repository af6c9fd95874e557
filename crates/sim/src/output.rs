//! What a scenario run produces: CSV time series, SVG plots, the side-by-side metrics table
//! (text and Markdown) and JSON.

use crate::fly::{metric_label, metrics, Flight, METRICS};
use crate::plot::{lines, Series};
use serde_json::{json, Map, Value};
use std::collections::BTreeMap;
use std::fmt::Write as _;

/// The flights of one scenario and their metrics.
#[derive(Clone, Debug)]
pub struct ScenarioRun {
    /// Scenario name.
    pub name: String,
    /// Its summary.
    pub summary: Option<String>,
    /// One flight per controller, with its metrics.
    pub flights: Vec<(Flight, BTreeMap<String, f64>)>,
}

impl ScenarioRun {
    /// Bundles flights with their metrics.
    pub fn new(name: &str, summary: Option<String>, flights: Vec<Flight>) -> ScenarioRun {
        ScenarioRun {
            name: name.to_string(),
            summary,
            flights: flights
                .into_iter()
                .map(|f| {
                    let m = metrics(&f);
                    (f, m)
                })
                .collect(),
        }
    }
}

/// The time series of a flight as CSV (SI units; angles in rad).
pub fn csv(f: &Flight) -> String {
    let mut s = String::from(
        "t,h,va,theta,q,alpha,elevator,throttle,elevator_cmd,throttle_cmd,h_cmd,va_cmd,h_r,va_r,energy_error,balance_error,domain,elevator_saturated,throttle_saturated,outside_box\n",
    );
    for x in &f.samples {
        let _ = writeln!(
            s,
            "{:.3},{:.6},{:.6},{:.6},{:.6},{:.6},{:.6},{:.6},{:.6},{:.6},{:.3},{:.3},{:.6},{:.6},{:.6},{:.6},{},{},{},{}",
            x.t, x.h, x.va, x.theta, x.q, x.alpha, x.elevator, x.throttle, x.elevator_cmd,
            x.throttle_cmd, x.h_cmd, x.va_cmd, x.h_r, x.va_r, x.energy_error, x.balance_error,
            u8::from(x.domain), u8::from(x.elevator_saturated), u8::from(x.throttle_saturated),
            u8::from(x.outside_box)
        );
    }
    s
}

/// Points kept per plotted line (thinned evenly; the CSV has every sample).
const PLOT_POINTS: usize = 600;

fn thin(f: &Flight, g: impl Fn(&crate::fly::Sample) -> f64) -> Vec<(f64, f64)> {
    let step = f.samples.len().div_ceil(PLOT_POINTS).max(1);
    f.samples
        .iter()
        .step_by(step)
        .map(|x| (x.t, g(x)))
        .collect()
}

/// The plots of a run: (file name, SVG), one per quantity, every controller overlaid.
pub fn plots(r: &ScenarioRun) -> Vec<(String, String)> {
    type Pick = fn(&crate::fly::Sample) -> f64;
    // (file, title, unit, value, the command drawn dashed)
    type Quantity<'a> = (&'a str, &'a str, &'a str, Pick, Option<(&'a str, Pick)>);
    let quantities: [Quantity; 6] = [
        (
            "altitude",
            "Altitude",
            "h (m)",
            |x| x.h,
            Some(("command", |x| x.h_cmd)),
        ),
        (
            "airspeed",
            "Airspeed",
            "V (m/s)",
            |x| x.va,
            Some(("command", |x| x.va_cmd)),
        ),
        (
            "pitch",
            "Pitch attitude",
            "θ (deg)",
            |x| x.theta.to_degrees(),
            None,
        ),
        ("throttle", "Throttle", "δt (0..1)", |x| x.throttle, None),
        (
            "energy_error",
            "Total energy error (as height)",
            "m",
            |x| x.energy_error,
            None,
        ),
        (
            "balance_error",
            "Energy balance error (as height)",
            "m",
            |x| x.balance_error,
            None,
        ),
    ];
    let mut out: Vec<(String, String)> = quantities
        .iter()
        .map(|(file, title, unit, pick, cmd)| {
            let mut series: Vec<Series> = r
                .flights
                .iter()
                .map(|(f, _)| Series {
                    label: f.pilot.clone(),
                    points: thin(f, pick),
                    dashed: false,
                })
                .collect();
            if let (Some((label, g)), Some((f, _))) = (cmd, r.flights.first()) {
                series.push(Series {
                    label: label.to_string(),
                    points: thin(f, g),
                    dashed: true,
                });
            }
            (
                format!("{file}.svg"),
                lines(&format!("{title}: {}", r.name), "time (s)", unit, &series),
            )
        })
        .collect();
    // a law's estimate of the drag error beside the truth, where a law has one
    let estimating: Vec<&Flight> = r
        .flights
        .iter()
        .map(|(f, _)| f)
        .filter(|f| f.samples.iter().any(|x| x.drag_error_estimate.is_finite()))
        .collect();
    if let Some(first) = estimating.first() {
        let mut series: Vec<Series> = estimating
            .iter()
            .map(|f| Series {
                label: f.pilot.clone(),
                points: thin(f, |x| x.drag_error_estimate),
                dashed: false,
            })
            .collect();
        series.push(Series {
            label: "true".into(),
            points: thin(first, |x| x.drag_error),
            dashed: true,
        });
        out.push((
            "drag_error_estimate.svg".into(),
            lines(
                &format!("Relative drag error, estimated and true: {}", r.name),
                "time (s)",
                "δ (1)",
                &series,
            ),
        ));
    }
    out
}

fn cell(v: f64) -> String {
    if v.is_nan() {
        "-".into()
    } else {
        format!("{v:.3}")
    }
}

fn rows(r: &ScenarioRun) -> Vec<Vec<String>> {
    let mut out = Vec::new();
    for (name, _, _) in METRICS {
        let mut row = vec![metric_label(name)];
        for (_, m) in &r.flights {
            row.push(cell(m.get(name).copied().unwrap_or(f64::NAN)));
        }
        out.push(row);
    }
    out
}

/// The side-by-side metrics table as text.
pub fn table(r: &ScenarioRun) -> String {
    let mut head = vec!["metric".to_string()];
    head.extend(r.flights.iter().map(|(f, _)| f.pilot.clone()));
    let body = rows(r);
    let mut widths: Vec<usize> = head.iter().map(String::len).collect();
    for row in &body {
        for (w, c) in widths.iter_mut().zip(row) {
            *w = (*w).max(c.chars().count());
        }
    }
    let mut s = String::new();
    let line = |s: &mut String, cells: &[String]| {
        let parts: Vec<String> = cells
            .iter()
            .zip(&widths)
            .enumerate()
            .map(|(i, (c, w))| {
                if i == 0 {
                    format!("{c:<w$}")
                } else {
                    format!("{c:>w$}")
                }
            })
            .collect();
        let _ = writeln!(s, "{}", parts.join("  ").trim_end());
    };
    line(&mut s, &head);
    line(
        &mut s,
        &widths.iter().map(|w| "-".repeat(*w)).collect::<Vec<_>>(),
    );
    for row in &body {
        line(&mut s, row);
    }
    s
}

/// The metrics table in Markdown.
pub fn markdown_table(r: &ScenarioRun) -> String {
    let mut s = String::from("| metric |");
    for (f, _) in &r.flights {
        let _ = write!(s, " {} |", f.pilot);
    }
    s.push_str("\n|---|");
    for _ in &r.flights {
        s.push_str("---:|");
    }
    s.push('\n');
    for row in rows(r) {
        let _ = writeln!(s, "| {} |", row.join(" | "));
    }
    s
}

/// `{"scenario", "controllers": {name: {metric: value}}}` (NaN as null).
pub fn json(r: &ScenarioRun) -> Value {
    let mut controllers = Map::new();
    for (f, m) in &r.flights {
        let o: Map<String, Value> = m
            .iter()
            .map(|(k, v)| {
                (
                    k.clone(),
                    if v.is_finite() { json!(v) } else { Value::Null },
                )
            })
            .collect();
        controllers.insert(f.pilot.clone(), Value::Object(o));
    }
    json!({"scenario": r.name, "controllers": controllers})
}
