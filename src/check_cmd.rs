//! `lawsmith check` and `lawsmith recheck`: run the prover, print the report, write and
//! re-check certificates, map verdicts to exit codes.

use crate::progress::Progress;
use crate::{read_spec, ReportFormat, EXIT_INVALID};
use lawsmith_expr::DagLimits;
use lawsmith_verify::{
    certificate, check, prepare, recheck, report, sha256_hex, BoundSettings, Budget, Origin,
    Settings, Verdict,
};
use serde_json::{json, Value};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Duration;

/// Exit codes of `check`.
const EXIT_FALSIFIED: u8 = 1;
const EXIT_INCONCLUSIVE: u8 = 2;

/// The limits of the symbolic work, as options.
#[derive(clap::Args, Clone, Debug)]
pub struct ExprLimits {
    /// Expression nodes the derivation may hold (memory).
    #[arg(long, default_value_t = DagLimits::default().max_nodes)]
    max_nodes: usize,
    /// Term products the simplifier may form expanding V̇ and the closed loop (time).
    #[arg(long, default_value_t = DagLimits::default().max_term_products)]
    max_term_products: u64,
}

impl ExprLimits {
    pub fn dag(&self) -> DagLimits {
        DagLimits {
            max_nodes: self.max_nodes,
            max_term_products: self.max_term_products,
        }
    }
}

/// The guidance rates that keep the commands within their limits, as options.
#[derive(clap::Args, Clone, Debug)]
pub struct RateOptions {
    /// Also prove the guidance rates that keep every command within its limits, on the
    /// sublevel set of V within --within (a set no trajectory leaves).
    #[arg(long)]
    rates: bool,
    /// With --rates: the error bounds that set must lie within, e.g. h=0.5,va=0.2 (default:
    /// each state's error box).
    #[arg(long, value_name = "STATE=BOUND,...", requires = "rates", value_parser = parse_within)]
    within: Option<Within>,
}

/// Error bounds, `h=0.5,va=0.2`.
#[derive(Clone, Debug)]
pub struct Within(Vec<(String, f64)>);

fn parse_within(text: &str) -> Result<Within, String> {
    crate::margin_cmd::parse_bounds(text).map(Within)
}

impl RateOptions {
    /// The error bounds of --rates (empty for the error box), or None without --rates.
    pub fn within(&self) -> Option<Vec<(String, f64)>> {
        self.rates
            .then(|| self.within.clone().map(|w| w.0).unwrap_or_default())
    }
}

/// The prover's limits, as options.
#[derive(clap::Args, Clone, Debug)]
pub struct Limits {
    /// Boxes each branch-and-bound search may evaluate.
    #[arg(long, default_value_t = Budget::default().max_boxes)]
    max_boxes: usize,
    /// Seconds each search may run.
    #[arg(long, value_name = "SECONDS", default_value_t = Budget::default().time_limit.as_secs_f64())]
    time_limit: f64,
    /// Open boxes a search may hold in its queue (memory).
    #[arg(long, default_value_t = Budget::default().max_queue)]
    max_queue: usize,
    /// Sampled points per goal before the proof.
    #[arg(long, default_value_t = Settings::default().samples)]
    samples: usize,
    /// Ultimate bounds: relative width at which the bisection over the level stops.
    #[arg(long, value_name = "FRACTION", default_value_t = BoundSettings::default().level_tolerance)]
    level_tolerance: f64,
    #[command(flatten)]
    expr: ExprLimits,
    /// Set by `with_rates`: the error bounds of --rates.
    #[arg(skip)]
    rates: Option<Vec<(String, f64)>>,
    /// Set by `with_saturated`: `check --saturated`.
    #[arg(skip)]
    saturated: bool,
    /// Set by `with_roundoff`: `check --roundoff`, `emit`, `build`.
    #[arg(skip)]
    roundoff: bool,
}

impl Limits {
    pub fn settings(&self) -> Settings {
        Settings {
            samples: self.samples,
            budget: Budget {
                max_boxes: self.max_boxes,
                time_limit: Duration::from_secs_f64(self.time_limit.max(0.0)),
                max_queue: self.max_queue,
            },
            bound: BoundSettings {
                level_tolerance: self.level_tolerance.clamp(1e-9, 0.5),
                ..BoundSettings::default()
            },
            dag: self.expr.dag(),
            actuators: true,
            rates: self.rates.clone(),
            saturated: self.saturated,
            roundoff: self.roundoff,
        }
    }

    /// These limits with the generated code's round-off bounded (`check --roundoff`).
    pub fn with_roundoff(&self, roundoff: bool) -> Limits {
        Limits {
            roundoff,
            ..self.clone()
        }
    }

    /// These limits with the rate options (`check --rates`).
    pub fn with_rates(&self, r: &RateOptions) -> Limits {
        Limits {
            rates: r.within(),
            ..self.clone()
        }
    }

    /// These limits with the saturated law's region asked for (`check --saturated`).
    pub fn with_saturated(&self, saturated: bool) -> Limits {
        Limits {
            saturated,
            ..self.clone()
        }
    }

    fn json(&self) -> Value {
        settings_json(&self.settings())
    }
}

/// The settings of a check as a certificate records them.
pub fn settings_json(s: &Settings) -> Value {
    json!({
        "samples": s.samples, "max_boxes": s.budget.max_boxes,
        "time_limit_s": s.budget.time_limit.as_secs_f64(), "max_queue": s.budget.max_queue,
        "level_tolerance": s.bound.level_tolerance,
        "max_nodes": s.dag.max_nodes,
        "max_term_products": s.dag.max_term_products,
    })
}

fn exit_of(v: Verdict) -> u8 {
    match v {
        Verdict::Proven => 0,
        Verdict::Falsified => EXIT_FALSIFIED,
        Verdict::Inconclusive => EXIT_INCONCLUSIVE,
    }
}

/// Severity for combining several specs: invalid > falsified > inconclusive > proven.
fn severity(code: u8) -> u8 {
    match code {
        EXIT_INVALID => 3,
        EXIT_FALSIFIED => 2,
        EXIT_INCONCLUSIVE => 1,
        _ => 0,
    }
}

pub fn check_cmd(
    paths: &[PathBuf],
    format: ReportFormat,
    cert_path: Option<&Path>,
    limits: &Limits,
) -> ExitCode {
    if cert_path.is_some() && paths.len() != 1 {
        eprintln!("error[usage]: --certificate takes exactly one spec");
        return ExitCode::from(EXIT_INVALID);
    }
    let settings = limits.settings();
    let progress = Progress::new();
    let mut worst = 0u8;
    let mut json_out = Vec::new();
    for (i, path) in paths.iter().enumerate() {
        let code = match read_spec(path) {
            None => EXIT_INVALID,
            Some(mut loaded) => {
                let r = check(&mut loaded.spec, &settings, &|l, b, o| {
                    progress.boxes(l, b, o)
                });
                progress.finish();
                match r {
                    Err(e) => {
                        crate::print_check_error(path, &loaded.bytes, &e);
                        EXIT_INVALID
                    }
                    Ok((report, prepared)) => {
                        if let Some(cp) = cert_path {
                            let origin = Origin {
                                file: &path.display().to_string(),
                                sha256: sha256_hex(&loaded.bytes),
                                tool_version: env!("CARGO_PKG_VERSION"),
                                settings: limits.json(),
                            };
                            let cert = certificate(&report, &prepared, &origin);
                            let text = serde_json::to_string(&cert).expect("json") + "\n";
                            if let Err(e) = crate::write_atomic(cp, text.as_bytes()) {
                                eprintln!("error[io]: cannot write {}: {e}", cp.display());
                                return ExitCode::from(EXIT_INVALID);
                            }
                        }
                        match format {
                            ReportFormat::Json => {
                                json_out.push(report::json(&report, &path.display().to_string()))
                            }
                            ReportFormat::Text => {
                                if i > 0 {
                                    println!();
                                }
                                print!(
                                    "{}",
                                    report::text(&report, &path.display().to_string(), true)
                                );
                            }
                        }
                        exit_of(report.verdict)
                    }
                }
            }
        };
        if severity(code) > severity(worst) {
            worst = code;
        }
    }
    if format == ReportFormat::Json {
        crate::print_json_per_spec(json_out);
    }
    ExitCode::from(worst)
}

pub fn recheck_cmd(
    cert_path: &Path,
    spec_path: &Path,
    expr: &ExprLimits,
    format: ReportFormat,
) -> ExitCode {
    let text = match std::fs::read_to_string(cert_path) {
        Ok(t) => t,
        Err(e) => {
            eprintln!("error[io]: cannot read {}: {e}", cert_path.display());
            return ExitCode::from(EXIT_INVALID);
        }
    };
    let cert: Value = match serde_json::from_str(&text) {
        Ok(v) => v,
        Err(e) => {
            eprintln!(
                "error[certificate]: {}:{}:{}: not JSON: {e}",
                cert_path.display(),
                e.line(),
                e.column()
            );
            return ExitCode::from(EXIT_INVALID);
        }
    };
    let Some(mut loaded) = read_spec(spec_path) else {
        return ExitCode::from(EXIT_INVALID);
    };
    loaded.spec.dag.set_limits(expr.dag());
    let prepared = match prepare(&mut loaded.spec) {
        Ok(p) => p,
        Err(e) => {
            crate::print_check_error(spec_path, &loaded.bytes, &e);
            return ExitCode::from(EXIT_INVALID);
        }
    };
    let outcome = recheck(&cert, &sha256_hex(&loaded.bytes), &prepared).and_then(|r| {
        let ro = lawsmith_verify::recheck_roundoff(&cert, &loaded.spec)?;
        Ok((r, ro))
    });
    if format == ReportFormat::Json {
        let v = match &outcome {
            Ok((r, ro)) => json!({
                "roundoff": ro.as_ref().map(|(rows, leaves)| json!({
                    "leaves": leaves,
                    "outputs": rows.iter().map(|(n, b)| json!({"output": n, "f64": b[0], "f32": b[1]})).collect::<Vec<_>>(),
                })),
                "certificate": cert_path.display().to_string(),
                "spec": spec_path.display().to_string(),
                "accepted": true,
                "goals": r.goals,
                "leaf_boxes": r.leaves,
                "counterexamples": r.counterexamples,
                "verdict": r.verdict.name(),
                "rate_limits": r.rates.as_ref().map(|(level, rates)| json!({
                    "level": level,
                    "rates": rates.iter().map(|(n, (lo, hi))| (n.clone(), json!([lo, hi]))).collect::<serde_json::Map<_, _>>(),
                })),
                "saturated": r.saturated.as_ref().map(|(level, bounds)| json!({
                    "level": level,
                    "bounds": bounds.iter().map(|(n, (lo, hi))| (n.clone(), json!([lo, hi]))).collect::<serde_json::Map<_, _>>(),
                })),
            }),
            Err(e) => json!({
                "certificate": cert_path.display().to_string(),
                "spec": spec_path.display().to_string(),
                "accepted": false,
                "reason": e.to_string(),
            }),
        };
        crate::print_json(&v);
        return ExitCode::from(if outcome.is_ok() { 0 } else { EXIT_FALSIFIED });
    }
    match outcome {
        Ok((r, ro)) => {
            let actuators: Vec<String> = r
                .actuators
                .iter()
                .map(|(a, word)| format!("{a} {word}"))
                .collect();
            println!(
                "accepted: {} re-checked against {} ({} goals, {} leaf boxes re-evaluated, {} counterexamples re-confirmed); verdict {}; actuators: {}",
                cert_path.display(),
                spec_path.display(),
                r.goals,
                r.leaves,
                r.counterexamples,
                r.verdict.name(),
                if actuators.is_empty() { "none".to_string() } else { actuators.join(", ") }
            );
            if let Some((level, rates)) = &r.rates {
                let list: Vec<String> = rates
                    .iter()
                    .map(|(n, (lo, hi))| format!("{n} in [{lo}, {hi}]"))
                    .collect();
                println!(
                    "guidance rates re-checked: every command within its limits wherever V <= {level} for {}",
                    list.join(", ")
                );
            }
            if let Some((level, bounds)) = &r.saturated {
                let list: Vec<String> = bounds
                    .iter()
                    .map(|(n, (lo, hi))| format!("{n} error in [{lo}, {hi}]"))
                    .collect();
                println!(
                    "saturated law re-checked: {{V <= {level}}} is a region of attraction with the commands clamped, inside it {}",
                    list.join(", ")
                );
            }
            if let Some((rows, leaves)) = &ro {
                let list: Vec<String> = rows
                    .iter()
                    .map(|(n, b)| format!("{n} <= {:e} (f64), <= {:e} (f32)", b[0], b[1]))
                    .collect();
                println!(
                    "round-off re-checked ({leaves} leaves): {}",
                    list.join("; ")
                );
            }
            ExitCode::SUCCESS
        }
        Err(e) => {
            println!("rejected: {}: {e}", cert_path.display());
            ExitCode::from(EXIT_FALSIFIED)
        }
    }
}
