//! Monte Carlo campaigns: dispersed runs of a scenario (mass, drag, wind, estimate errors,
//! turbulence seed), flown in parallel, summarised by percentiles and histograms.

use crate::fly::Perturbation;
use crate::fly::{metric_label, metrics, METRICS};
use crate::plot::histogram;
use crate::run::{Setup, Variant};
use crate::turbulence::Noise;
use rayon::prelude::*;
use serde_json::{json, Map, Value};
use std::collections::BTreeMap;
use std::fmt::Write as _;

/// One run's metrics, per controller.
type RunMetrics = Vec<(String, BTreeMap<String, f64>)>;

/// The metrics of every run, per controller.
#[derive(Clone, Debug)]
pub struct Campaign {
    /// Scenario name.
    pub scenario: String,
    /// Runs.
    pub runs: usize,
    /// Seed.
    pub seed: u64,
    /// Per controller, per metric, the value of every run (run order).
    pub values: BTreeMap<String, BTreeMap<String, Vec<f64>>>,
    /// The controllers, in report order.
    pub pilots: Vec<String>,
}

/// Run `i` of a campaign: its dispersed variant, drawn from `seed + i`.
pub fn variant(setup: &Setup, seed: u64, i: usize) -> Variant {
    let d = setup.scenario.dispersions;
    let mut rng = Noise::new(
        seed.wrapping_add(i as u64)
            .wrapping_mul(0x2545_F491_4F6C_DD1D),
    );
    let mut v = setup.nominal();
    v.truth.mass *= 1.0 + rng.between(-d.mass, d.mass);
    v.truth.cd0 *= 1.0 + rng.between(-d.cd0, d.cd0);
    v.estimates.drag *= 1.0 + rng.between(-d.drag_estimate, d.drag_estimate);
    v.estimates.thrust *= 1.0 + rng.between(-d.thrust_estimate, d.thrust_estimate);
    v.estimates.alpha_bias += rng.between(-d.alpha_bias, d.alpha_bias);
    v.perturbation = Perturbation {
        wind: (
            rng.between(-d.wind, d.wind),
            rng.between(-d.wind, d.wind) / 5.0,
        ),
        seed: i as u64 + 1,
    };
    // drawn last, so campaigns without it draw what they always drew
    v.estimates.thrust_bias += rng.between(-d.thrust_bias, d.thrust_bias);
    v
}

/// Flies `runs` dispersed runs of every controller, in parallel. The result does not depend
/// on the number of threads.
pub fn campaign(setup: &Setup, runs: usize, seed: u64) -> Result<Campaign, String> {
    let pilots = setup.pilots();
    let results: Vec<Result<RunMetrics, String>> = (0..runs)
        .into_par_iter()
        .map(|i| {
            let v = variant(setup, seed, i);
            pilots
                .iter()
                .map(|p| setup.fly(p, &v).map(|f| (p.to_string(), metrics(&f))))
                .collect()
        })
        .collect();
    let mut values: BTreeMap<String, BTreeMap<String, Vec<f64>>> = BTreeMap::new();
    for r in results {
        for (pilot, m) in r? {
            let e = values.entry(pilot).or_default();
            for (k, v) in m {
                e.entry(k).or_default().push(v);
            }
        }
    }
    Ok(Campaign {
        scenario: setup.scenario.name.clone(),
        runs,
        seed,
        pilots,
        values,
    })
}

/// The `p`-th percentile (0..100) of the finite values, by linear interpolation; NaN when
/// there are none.
pub fn percentile(v: &[f64], p: f64) -> f64 {
    let mut x: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    if x.is_empty() {
        return f64::NAN;
    }
    x.sort_by(f64::total_cmp);
    let pos = p / 100.0 * (x.len() - 1) as f64;
    let (i, f) = (pos.floor() as usize, pos.fract());
    if i + 1 < x.len() {
        x[i] * (1.0 - f) + x[i + 1] * f
    } else {
        x[i]
    }
}

/// Percentiles reported.
pub const PERCENTILES: [(f64, &str); 4] =
    [(5.0, "p5"), (50.0, "p50"), (95.0, "p95"), (100.0, "max")];

impl Campaign {
    /// The summary table as text: per metric and controller, p5 / p50 / p95 / max.
    pub fn table(&self) -> String {
        let mut s = format!(
            "{} runs of {} (seed {}); per controller p5 / p50 / p95 / max\n",
            self.runs, self.scenario, self.seed
        );
        for (name, _, _) in METRICS {
            let _ = writeln!(s, "{}", metric_label(name));
            for (pilot, m) in self.in_order() {
                let v = m.get(name).map(Vec::as_slice).unwrap_or(&[]);
                let cells: Vec<String> = PERCENTILES
                    .iter()
                    .map(|(p, _)| {
                        let x = percentile(v, *p);
                        if x.is_nan() {
                            "-".into()
                        } else {
                            format!("{x:.3}")
                        }
                    })
                    .collect();
                let finite = v.iter().filter(|x| x.is_finite()).count();
                let _ = writeln!(
                    s,
                    "  {pilot:<8} {}   ({finite} of {} runs defined)",
                    cells.join(" / "),
                    v.len()
                );
            }
        }
        s
    }

    /// The summary as a Markdown table: per metric and controller, p50 / p95 / max, and how
    /// many runs define the metric where not all do.
    pub fn markdown(&self) -> String {
        let pilots: Vec<&str> = self.in_order().map(|(p, _)| p).collect();
        let mut s = format!(
            "| metric | {} |\n|---|{}\n",
            pilots
                .iter()
                .map(|p| format!("{p} p50 / p95 / max"))
                .collect::<Vec<_>>()
                .join(" | "),
            "---:|".repeat(pilots.len())
        );
        for (name, _, _) in METRICS {
            let mut row = vec![metric_label(name)];
            for (_, m) in self.in_order() {
                let v = m.get(name).map(Vec::as_slice).unwrap_or(&[]);
                let defined = v.iter().filter(|x| x.is_finite()).count();
                let cell = if defined == 0 {
                    "-".to_string()
                } else {
                    let q: Vec<String> = [50.0, 95.0, 100.0]
                        .iter()
                        .map(|p| format!("{:.3}", percentile(v, *p)))
                        .collect();
                    q.join(" / ")
                };
                row.push(if defined > 0 && defined < v.len() {
                    format!("{cell} ({defined} of {} runs)", v.len())
                } else {
                    cell
                });
            }
            s.push_str(&format!("| {} |\n", row.join(" | ")));
        }
        s
    }

    /// The controllers in the order of the nominal tables (energy, the compared laws, pid,
    /// lqr).
    pub fn in_order(&self) -> impl Iterator<Item = (&str, &BTreeMap<String, Vec<f64>>)> {
        self.pilots
            .iter()
            .filter_map(|p| self.values.get(p).map(|m| (p.as_str(), m)))
    }

    /// `{"scenario", "runs", "seed", "controllers": {name: {metric: {p5, p50, p95, max,
    /// defined}}}}`, `defined` the runs where the metric is defined (a step metric is not,
    /// in a run whose step never settles).
    pub fn json(&self) -> Value {
        let mut controllers = Map::new();
        for (pilot, m) in self.in_order() {
            let mut o = Map::new();
            for (k, v) in m {
                let mut q = Map::new();
                q.insert(
                    "defined".into(),
                    json!(v.iter().filter(|x| x.is_finite()).count()),
                );
                for (p, name) in PERCENTILES {
                    let x = percentile(v, p);
                    q.insert(
                        name.into(),
                        if x.is_finite() { json!(x) } else { Value::Null },
                    );
                }
                o.insert(k.clone(), Value::Object(q));
            }
            controllers.insert(pilot.to_string(), Value::Object(o));
        }
        json!({"scenario": self.scenario, "runs": self.runs, "seed": self.seed, "controllers": controllers})
    }

    /// Histograms of the headline metrics: (file name, SVG).
    pub fn histograms(&self) -> Vec<(String, String)> {
        [
            "peak_airspeed_deviation_in_altitude_change",
            "altitude_overshoot",
            "energy_error_rms",
        ]
        .iter()
        .map(|metric| {
            let samples: Vec<(String, Vec<f64>)> = self
                .in_order()
                .map(|(p, m)| (p.to_string(), m.get(*metric).cloned().unwrap_or_default()))
                .collect();
            let unit = METRICS.iter().find(|m| m.0 == *metric).map_or("", |m| m.1);
            (
                format!("histogram_{metric}.svg"),
                histogram(
                    &format!(
                        "{}: {} over {} runs",
                        self.scenario,
                        METRICS.iter().find(|m| m.0 == *metric).map_or("", |m| m.2),
                        self.runs
                    ),
                    unit,
                    &samples,
                    24,
                ),
            )
        })
        .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn percentiles_interpolate_and_skip_undefined_runs() {
        let v = [3.0, 1.0, f64::NAN, 2.0, 4.0];
        assert_eq!(percentile(&v, 50.0), 2.5);
        assert_eq!(percentile(&v, 100.0), 4.0);
        assert_eq!(percentile(&v, 0.0), 1.0);
        assert!(percentile(&[f64::NAN], 50.0).is_nan());
    }
}
