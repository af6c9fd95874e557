//! Margin search: how large may one estimate error grow before the guaranteed ultimate bound
//! exceeds what is required?
//!
//! The declared error range of one uncertain quantity is scaled by a factor `t` (the other
//! uncertainties stay as declared), and for each `t` the ultimate bound is proved afresh. The
//! curve (error magnitude against guaranteed bound) is sampled at fixed factors, then the
//! largest factor meeting the required bounds is bracketed and bisected. Each point of the curve
//! is a full proof, so every number in the table is guaranteed, not estimated.

use crate::bound::{BoundOutcome, ErrorBound};
use crate::check::{check, CheckError};
use crate::settings::Settings;
use lawsmith_spec::{load, Claim, Decl, ErrorForm, Range, SymbolKind};

/// One point of the curve.
#[derive(Clone, Debug)]
pub struct MarginPoint {
    /// Factor on the declared error range.
    pub factor: f64,
    /// The error's largest magnitude at this factor (relative: a fraction; absolute: in the
    /// estimate's unit).
    pub magnitude: f64,
    /// The proved level, when one was proved.
    pub level: Option<f64>,
    /// The guaranteed bounds (empty when no level was proved).
    pub bounds: Vec<ErrorBound>,
    /// Every required bound holds.
    pub met: bool,
    /// Why no bound was proved, when none was.
    pub note: Option<String>,
    /// Boxes of the proofs.
    pub boxes: usize,
}

/// The margin curve and the largest error that meets the required bounds.
#[derive(Clone, Debug)]
pub struct MarginReport {
    /// The spec's name.
    pub spec: String,
    /// The uncertain quantity varied.
    pub quantity: String,
    /// Relative or absolute.
    pub form: ErrorForm,
    /// Its unit (1 for a relative error).
    pub unit: String,
    /// Its declared error range.
    pub declared: (f64, f64),
    /// Required bounds: state, bound.
    pub required: Vec<(String, f64)>,
    /// The curve at the sampled factors, in increasing order.
    pub curve: Vec<MarginPoint>,
    /// The largest factor found that meets the required bounds (None: not even with zero
    /// error), and whether it is only a lower limit (every sampled factor met them).
    pub largest: Option<MarginPoint>,
    /// Every sampled factor met the bounds: the margin is at least the largest one sampled.
    pub unbounded: bool,
}

/// Settings of a margin search.
#[derive(Clone, Debug)]
pub struct MarginSettings {
    /// Factors on the declared range at which the curve is sampled.
    pub factors: Vec<f64>,
    /// Relative width at which the bisection for the largest factor stops.
    pub tolerance: f64,
}

impl Default for MarginSettings {
    fn default() -> Self {
        MarginSettings {
            factors: vec![0.0, 0.25, 0.5, 0.75, 1.0, 1.25, 1.5],
            tolerance: 0.01,
        }
    }
}

/// Runs the margin search for `quantity` of the spec in `source`.
pub fn margin(
    source: &str,
    quantity: &str,
    required: &[(String, f64)],
    settings: &Settings,
    margin: &MarginSettings,
    progress: &(dyn Fn(&str, usize, usize) + Sync),
) -> Result<MarginReport, CheckError> {
    let spec = load(source)
        .map_err(|d| CheckError::new(format!("the spec does not load ({} problems)", d.len())))?;
    let (sym, form, declared) = spec
        .symbol(quantity)
        .and_then(|s| match &s.decl {
            Decl::Uncertain { form, error, .. } => Some((s, *form, error.nearest())),
            _ => None,
        })
        .ok_or_else(|| {
            let names: Vec<&str> = spec
                .symbols_of(SymbolKind::Uncertain)
                .map(|s| s.name.as_str())
                .collect();
            CheckError::new(if names.is_empty() {
                "the spec declares no uncertain quantity (an `uncertain:` section)".into()
            } else {
                format!(
                    "`{quantity}` is not an uncertain quantity of the spec (declared: {})",
                    names.join(", ")
                )
            })
        })?;
    let unit = match form {
        ErrorForm::Relative => "1".to_string(),
        ErrorForm::Absolute => sym.unit.clone(),
    };
    let states: Vec<String> = spec
        .symbols_of(SymbolKind::State)
        .map(|s| s.name.clone())
        .collect();
    if let Some((s, _)) = required.iter().find(|(s, _)| !states.contains(s)) {
        return Err(CheckError::new(format!(
            "`{s}` is not a state of the spec (states: {})",
            states.join(", ")
        )));
    }
    let span = declared.0.abs().max(declared.1.abs());
    if span == 0.0 {
        return Err(CheckError::new(format!(
            "`{quantity}` has a zero error range; there is nothing to scale"
        )));
    }
    if form == ErrorForm::Relative {
        let lo = margin.factors.iter().fold(0.0f64, |a, &t| a.max(t)) * declared.0;
        if lo <= -1.0 {
            return Err(CheckError::new(format!(
                "scaling the range of `{quantity}` that far gives a relative error of {lo} or below: lower the largest factor"
            )));
        }
    }
    let point = |t: f64| -> Result<MarginPoint, CheckError> {
        let mut spec = load(source).map_err(|_| CheckError::new("the spec does not load"))?;
        for s in spec.symbols.iter_mut().filter(|s| s.name == quantity) {
            if let Decl::Uncertain { error, .. } = &mut s.decl {
                *error = Range::from_f64(declared.0 * t, declared.1 * t);
            }
        }
        spec.claim = Claim::UltimateBound {
            required: required.to_vec(),
        };
        let label = format!("{quantity} x {t:.3}");
        let settings = &Settings {
            actuators: false,
            ..settings.clone()
        };
        let (report, _) = check(&mut spec, settings, &|l, b, o| {
            progress(&format!("{label}: {l}"), b, o)
        })?;
        let b = report.bound.as_ref();
        let proved = b.is_some_and(|b| {
            !b.bounds.is_empty() || (b.level == 0.0 && matches!(b.outcome, BoundOutcome::Proven))
        }) && report.well_posed == Some(true);
        let bounds = b.map_or(Vec::new(), |b| b.bounds.clone());
        let met = matches!(b.map(|b| &b.outcome), Some(BoundOutcome::Proven))
            && report.verdict == crate::check::Verdict::Proven;
        let note = if proved && !bounds.is_empty() {
            None
        } else {
            Some(match b.map(|b| &b.outcome) {
                Some(BoundOutcome::Refuted(_, why) | BoundOutcome::Inconclusive(why)) => {
                    why.clone()
                }
                _ => format!("verdict {}", report.verdict.name()),
            })
        };
        Ok(MarginPoint {
            factor: t,
            magnitude: span * t,
            level: b.filter(|_| proved).map(|b| b.level),
            bounds: if proved { bounds } else { Vec::new() },
            met,
            note,
            boxes: report.boxes,
        })
    };
    let mut factors = margin.factors.clone();
    factors.sort_by(f64::total_cmp);
    factors.dedup();
    let mut curve = Vec::new();
    for &t in &factors {
        curve.push(point(t)?);
    }
    // bracket: the last meeting factor before the first failing one
    let first_fail = curve.iter().position(|p| !p.met);
    let (largest, unbounded) = match first_fail {
        None => (curve.last().cloned(), true),
        Some(0) => (None, false),
        Some(i) => {
            let mut ok = curve[i - 1].clone();
            let mut bad = curve[i].factor;
            while bad - ok.factor > margin.tolerance * ok.factor.max(f64::MIN_POSITIVE) {
                let mid = 0.5 * (ok.factor + bad);
                let p = point(mid)?;
                if p.met {
                    ok = p;
                } else {
                    bad = mid;
                }
            }
            (Some(ok), false)
        }
    };
    Ok(MarginReport {
        spec: spec.name.clone(),
        quantity: quantity.to_string(),
        form,
        unit,
        declared,
        required: required.to_vec(),
        curve,
        largest,
        unbounded,
    })
}
