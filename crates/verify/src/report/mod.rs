//! Rendering of a check report: readable text and JSON; and of the margin curve
//! ([`margin`]).

pub mod margin;

use crate::bound::{BoundOutcome, BoundReport};
use crate::check::{CheckReport, Counterexample, GoalKind, GoalResult, Status};
use crate::goal::Test;
use serde_json::{json, Map, Value};
use std::fmt::Write as _;

/// A value as f64 prints it, with negative zero shown as 0.
fn plain(x: f64) -> String {
    format!("{}", x + 0.0)
}

/// A number with 4 significant digits, in plain or scientific notation as fits.
/// A number with four significant digits, as the reports print them.
pub fn short(x: f64) -> String {
    sig(x)
}

/// An upper bound to four significant digits, rounded up (never below `x`): a proved upper
/// bound printed is never a stronger claim than the one proved.
pub fn sig_up(x: f64) -> String {
    directed(x, true)
}

/// A lower bound to four significant digits, rounded down (never above `x`).
pub fn sig_down(x: f64) -> String {
    directed(x, false)
}

fn directed(x: f64, up: bool) -> String {
    if x == 0.0 || !x.is_finite() {
        return plain(x);
    }
    if x < 0.0 {
        // −x rounded the other way
        let t = directed(-x, !up);
        return format!("-{t}");
    }
    // as `sig` writes it: four significant digits, plain between 1e-3 and 1e5
    let e = x.log10().floor() as i32;
    let plain_form = (1e-3..1e5).contains(&x);
    let digits = 3 - e; // decimals of the fourth significant digit
    let step = 10f64.powi(-digits);
    let mut m = if up {
        (x / step).ceil()
    } else {
        (x / step).floor()
    } * step;
    loop {
        let text = if plain_form {
            let t = format!("{m:.prec$}", prec = digits.max(0) as usize);
            if t.contains('.') {
                t.trim_end_matches('0').trim_end_matches('.').to_string()
            } else {
                t
            }
        } else {
            format!("{:.3}e{e}", m / 10f64.powi(e))
        };
        let v: f64 = text.parse().unwrap_or(f64::NAN);
        if (up && v >= x) || (!up && v <= x) {
            return text;
        }
        m += if up { step } else { -step };
    }
}

pub(crate) fn sig(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        // negative zero (a margin of −0·…) reads as 0
        return plain(x);
    }
    let a = x.abs();
    if (1e-3..1e5).contains(&a) {
        let digits = (3 - a.log10().floor() as i32).max(0) as usize;
        let s = format!("{x:.digits$}");
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    } else {
        format!("{x:.3e}")
    }
}

fn status_word(s: &Status) -> &'static str {
    match s {
        Status::Proven => "proved",
        Status::Refuted(_) => "FAILS",
        Status::Inconclusive(_) => "undecided",
        Status::Skipped => "skipped",
    }
}

fn goal_counts(r: &GoalResult) -> String {
    let mut parts = Vec::new();
    if let Some(s) = &r.search {
        let mut p = format!("{} box{}", s.boxes, if s.boxes == 1 { "" } else { "es" });
        let mut how = Vec::new();
        if s.by_bound > 0 {
            how.push(format!("{} by bound", s.by_bound));
        }
        if s.by_hessian > 0 {
            how.push(format!("{} by Hessian", s.by_hessian));
        }
        if s.excluded > 0 && r.kind == GoalKind::Claim && r.label.contains("V >=") {
            how.push(format!(
                "{} below the level or excluded by constraints",
                s.excluded
            ));
        } else if s.excluded > 0 {
            how.push(format!("{} excluded by constraints", s.excluded));
        }
        if !how.is_empty() {
            p.push_str(&format!(": {}", how.join(", ")));
        }
        parts.push(p);
    }
    if let Some(s) = &r.sampled {
        parts.push(format!(
            "{} sample{}",
            s.evaluated,
            if s.evaluated == 1 { "" } else { "s" }
        ));
    }
    parts.join("; ")
}

/// The report as text. `timings` adds wall times (leave them out for snapshots: everything
/// else is deterministic).
pub fn text(r: &CheckReport, path: &str, timings: bool) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "{} ({path})", r.name);
    let claim_goal = r.goals.iter().find(|g| g.kind == GoalKind::Claim);
    let _ = writeln!(
        s,
        "claim    {}: {}",
        r.claim.name(),
        claim_goal.map_or("", |g| g.label.as_str())
    );
    let time = if timings {
        format!(" in {:.2} s", r.seconds)
    } else {
        String::new()
    };
    let _ = writeln!(
        s,
        "verdict  {}{time} ({} boxes)",
        r.verdict.name().to_uppercase(),
        r.boxes
    );
    let _ = writeln!(
        s,
        "\ndomain (an error Δx is the state x minus its reference):"
    );
    let width = r
        .variables
        .iter()
        .map(|v| v.name.chars().count())
        .max()
        .unwrap_or(1);
    let role_width = r
        .variables
        .iter()
        .map(|v| v.role.name().len())
        .max()
        .unwrap_or(1)
        .max(9);
    for v in &r.variables {
        let pad = width - v.name.chars().count();
        let _ = writeln!(
            s,
            "  {}{} {:<role_width$} [{}, {}] {}",
            v.name,
            " ".repeat(pad),
            v.role.name(),
            sig(v.declared.lo.value()),
            sig(v.declared.hi.value()),
            v.unit
        );
    }
    for c in &r.constraints {
        let _ = writeln!(s, "  constraint {c}");
    }
    let conds: Vec<&GoalResult> = r
        .goals
        .iter()
        .filter(|g| g.kind == GoalKind::Condition)
        .collect();
    let wp = match r.well_posed {
        Some(true) => "proved",
        Some(false) => "FAILS",
        None => "undecided",
    };
    if conds.is_empty() {
        // every division and function of the laws is by or of a constant that is fine
        let _ = writeln!(
            s,
            "\nwell-posedness: nothing to prove (the laws are defined everywhere)"
        );
    } else {
        let _ = writeln!(
            s,
            "\nwell-posedness: {wp} ({} condition{})",
            conds.len(),
            if conds.len() == 1 { "" } else { "s" }
        );
    }
    for g in &conds {
        let _ = writeln!(
            s,
            "  {:<9} {}   [{}; {}]",
            status_word(&g.status),
            g.label,
            g.source,
            goal_counts(g)
        );
    }
    let _ = writeln!(s, "\nLyapunov argument:");
    for g in r.goals.iter().filter(|g| g.kind != GoalKind::Condition) {
        let counts = goal_counts(g);
        let counts = if counts.is_empty() {
            String::new()
        } else {
            format!("   [{counts}]")
        };
        let _ = writeln!(s, "  {:<9} {}{counts}", status_word(&g.status), g.label);
        if let Status::Inconclusive(why) = &g.status {
            let _ = writeln!(s, "            {why}");
            if let Some(search) = &g.search {
                for (bx, bound) in search.worst.iter().take(3) {
                    let desc: Vec<String> = g
                        .dims
                        .iter()
                        .zip(bx)
                        .map(|(&d, i)| {
                            format!("{} [{}, {}]", r.variables[d].name, sig(i.lo()), sig(i.hi()))
                        })
                        .collect();
                    let _ = writeln!(
                        s,
                        "            open box (bound {}): {}",
                        sig(*bound),
                        desc.join(", ")
                    );
                }
            }
        }
    }
    if let Some(b) = &r.bound {
        bound_text(&mut s, b);
    }
    if let Some(m) = r.min_margin {
        // a compound quantity in parentheses before the division
        let f = if r.quantity.contains(' ') {
            format!("({})", r.quantity)
        } else {
            r.quantity.clone()
        };
        let _ = writeln!(
            s,
            "  worst sampled margin -{f}/|e|^2 = {} (each error scaled by its range)",
            sig(m)
        );
    }
    if !r.follows.is_empty() {
        let _ = writeln!(s, "\nwhat follows:");
        for f in &r.follows {
            let _ = writeln!(s, "  - {f}");
        }
    }
    if !r.saturation.is_empty() {
        let _ = writeln!(
            s,
            "\nsaturation (each command against its limits over the whole domain; the proof \
             assumes the unsaturated law):"
        );
        for a in &r.saturation {
            let how = match &a.status {
                Status::Proven => {
                    let n = a.search.as_ref().map_or(0, |s| s.boxes);
                    format!("proved in {n} box{}", if n == 1 { "" } else { "es" })
                }
                Status::Refuted(_) => "at the point below".into(),
                Status::Inconclusive(why) => why.clone(),
                Status::Skipped => "not decided (the laws are not defined everywhere)".into(),
            };
            let _ = writeln!(
                s,
                "  {:<12} {:<15} {how}\n  {:<12} {:<15} {:.2}% of {} sampled points outside [{}, {}] \
                 (commands seen {} .. {})",
                a.actuator,
                a.verdict(),
                "",
                "",
                100.0 * a.share,
                a.samples,
                sig(a.limits.0),
                sig(a.limits.1),
                sig(a.seen.0),
                sig(a.seen.1),
            );
            if let Some(p) = &a.point {
                let point: Vec<String> = p
                    .point
                    .iter()
                    .map(|(n, v)| format!("{n} = {}", sig(*v)))
                    .collect();
                let _ = writeln!(
                    s,
                    "  {:<12} {:<15} {} = {} at {} (every digit in --format json)",
                    "",
                    "",
                    a.actuator,
                    sig(p.value),
                    point.join(", ")
                );
            }
        }
    }
    if let Some(rates) = &r.rates {
        rates_text(&mut s, rates);
    }
    if let Some(ro) = &r.roundoff {
        roundoff_text(&mut s, ro);
    }
    if let Some(cx) = &r.counterexample {
        let _ = writeln!(s, "\ncounterexample: `{}` fails at", cx.goal);
        for (n, v) in &cx.point {
            let _ = writeln!(s, "  {n} = {}", plain(*v));
        }
        for (n, v) in cx.coordinates.iter().filter(|(n, _)| n.starts_with('Δ')) {
            let _ = writeln!(s, "  {n} = {}", plain(*v));
        }
        if cx.sign_change {
            let _ = writeln!(
                s,
                "  the expression changes sign here: provably positive and provably negative \
                 at two points a few ulps apart around this one"
            );
        } else {
            let _ = writeln!(
                s,
                "  {} there = {} (enclosure [{}, {}])",
                cx.quantity,
                plain(cx.value),
                plain(cx.enclosure.lo()),
                plain(cx.enclosure.hi())
            );
        }
        match cx.vdot {
            // already shown when the statement is about V̇ itself
            Some(_) if cx.quantity == "dV/dt" => {}
            Some(v) => {
                let _ = writeln!(s, "  dV/dt there = {} (f64)", plain(v));
            }
            None => {
                let _ = writeln!(
                    s,
                    "  dV/dt is not defined there (it was derived assuming the condition)"
                );
            }
        }
    }
    s
}

/// The claim with what was proved of it: for an ultimate bound, the level and the error
/// bounds (the errors are bounded, not driven to zero); otherwise the claim's name. ASCII
/// only: it goes into generated headers.
pub fn claim_summary(r: &CheckReport) -> String {
    match &r.bound {
        Some(b) if matches!(b.outcome, BoundOutcome::Proven) && b.level > 0.0 => {
            let bounds: Vec<String> = b
                .bounds
                .iter()
                .map(|e| {
                    format!(
                        "|{} error| <= {} {}",
                        e.state,
                        sig_up(e.magnitude()),
                        e.unit
                    )
                })
                .collect();
            format!(
                "ultimate_bound: once V <= {}, {} (errors bounded, not driven to zero)",
                sig(b.level),
                bounds.join(", ")
            )
        }
        Some(b) if matches!(b.outcome, BoundOutcome::Proven) => {
            "ultimate_bound: c = 0, every error goes to zero".into()
        }
        _ => r.claim.name(),
    }
}

/// What the header of generated code records of the proof, one line each: the boxes of
/// branch and bound and the certificate's SHA-256 (`certificate_sha256`, of the certificate
/// as `check --certificate` writes it), and each actuator's saturation verdict.
pub fn proof_figures(r: &CheckReport, certificate_sha256: &str) -> Vec<String> {
    let mut v = vec![
        format!(
            "proof evidence: {} boxes of branch and bound; certificate SHA-256: {certificate_sha256}",
            r.boxes
        ),
        format!(
            "(`lawsmith check SPEC{} --certificate FILE` writes the certificate; `lawsmith recheck` re-checks it)",
            if r.roundoff.is_some() { " --roundoff" } else { "" }
        ),
    ];
    if !r.saturation.is_empty() {
        let each: Vec<String> = r
            .saturation
            .iter()
            .map(|a| format!("{} {}", a.actuator, a.verdict()))
            .collect();
        v.push(format!(
            "saturation over the envelope (the proof assumes the unsaturated law): {}",
            each.join(", ")
        ));
    }
    if let Some(Ok(rates)) = &r.rates {
        if matches!(rates.outcome, crate::rates::RatesOutcome::Proven) {
            let each: Vec<String> = rates
                .rates
                .iter()
                .map(|p| {
                    format!(
                        "{} in [{}, {}]",
                        p.name,
                        sig_up(p.proved.0),
                        sig_down(p.proved.1)
                    )
                })
                .collect();
            v.push(format!(
                "guidance rates proved to keep every command within its limits wherever V <= {} (within {}): {}",
                sig_down(rates.level),
                within_text(rates),
                each.join(", ")
            ));
        }
    }
    if let Some(line) = roundoff_line(r) {
        v.push(format!(
            "round-off proved over every input the code accepts (each command as sent, each update law): {line}"
        ));
    }
    v
}

/// The proved round-off bounds in one line (`pitch_cmd <= … (f64), <= … (f32); …`), each
/// rounded up, when the report has them.
pub fn roundoff_line(r: &CheckReport) -> Option<String> {
    let Some(Ok(ro)) = &r.roundoff else {
        return None;
    };
    Some(
        roundoff_rows(ro)
            .iter()
            .map(|(name, b)| {
                format!(
                    "{name} <= {} (f64), <= {} (f32)",
                    sig_up(b[0]),
                    sig_up(b[1])
                )
            })
            .collect::<Vec<_>>()
            .join("; "),
    )
}

/// Each output of the round-off analysis with its bound in f64 and in f32.
fn roundoff_rows(ro: &crate::roundoff::RoundoffReport) -> Vec<(String, [f64; 2])> {
    ro.program
        .outputs
        .iter()
        .enumerate()
        .map(|(o, (name, _))| {
            let of = |f: lawsmith_codegen::Float| {
                ro.precisions
                    .iter()
                    .find(|p| p.0 == f)
                    .map_or(f64::INFINITY, |p| p.3[o].bound)
            };
            (
                name.clone(),
                [
                    of(lawsmith_codegen::Float::F64),
                    of(lawsmith_codegen::Float::F32),
                ],
            )
        })
        .collect()
}

/// The round-off section of the text report.
fn roundoff_text(s: &mut String, ro: &Result<crate::roundoff::RoundoffReport, String>) {
    let ro = match ro {
        Ok(ro) => ro,
        Err(why) => {
            let _ = writeln!(s, "\nround-off: not bounded: {why}");
            return;
        }
    };
    let _ = writeln!(
        s,
        "\nround-off of the generated code, |computed - exact| proved over every input it accepts \
         (each command as sent, then each controller state's update law; {} leaves per output):",
        ro.leaves
    );
    let rows = roundoff_rows(ro);
    let width = rows.iter().map(|r| r.0.len()).max().unwrap_or(1).max(6);
    let _ = writeln!(s, "  {:<width$}  {:>10}  {:>10}", "output", "f64", "f32");
    for (name, b) in rows {
        let _ = writeln!(
            s,
            "  {name:<width$}  {:>10}  {:>10}",
            sig_up(b[0]),
            sig_up(b[1])
        );
    }
}

/// The round-off bounds as JSON: `{"leaves", "outputs": [{"output", "f64", "f32"}]}`, or
/// `{"error"}`.
fn roundoff_json(ro: &Result<crate::roundoff::RoundoffReport, String>) -> Value {
    match ro {
        Err(why) => json!({ "error": why }),
        Ok(ro) => json!({
            "leaves": ro.leaves,
            "outputs": roundoff_rows(ro).iter().map(|(name, b)| json!({
                "output": name, "f64": b[0], "f32": b[1],
            })).collect::<Vec<_>>(),
        }),
    }
}

/// The ultimate-bound section of the text report.
fn bound_text(s: &mut String, b: &BoundReport) {
    let _ = writeln!(s, "\nultimate bound:");
    if b.level == 0.0 && matches!(b.outcome, BoundOutcome::Proven) {
        let _ = writeln!(
            s,
            "  dV/dt < 0 wherever the error is not zero: every error goes to zero (c = 0)"
        );
    } else if !matches!(b.outcome, BoundOutcome::Proven) && b.bounds.is_empty() {
        let _ = writeln!(
            s,
            "  no level proved ({} level proofs tried{})",
            b.steps.len(),
            b.refuted_level.map_or(String::new(), |r| format!(
                "; the highest point found with dV/dt >= 0 has V = {}, so no level below that holds",
                sig(r)
            ))
        );
    } else {
        let _ = writeln!(
            s,
            "  level    c = {} ({} level proofs; {})",
            sig(b.level),
            b.steps.len(),
            b.refuted_level
                .map_or("no level refuted".to_string(), |r| format!(
                    "the highest point found with dV/dt >= 0 has V = {}, so no level below that holds",
                    sig(r)
                ))
        );
        if !b.bounds.is_empty() {
            let _ = writeln!(s, "  inside {{V <= c}}, guaranteed:");
            for e in &b.bounds {
                let _ = writeln!(
                    s,
                    "    Δ{} in [{}, {}] {}   (|Δ{}| <= {} {})",
                    e.state,
                    sig_down(e.lower),
                    sig_up(e.upper),
                    e.unit,
                    e.state,
                    sig_up(e.magnitude()),
                    e.unit
                );
            }
        }
    }
    let _ = writeln!(
        s,
        "  region of attraction: V < {} (V exceeds it on every face of the error box)",
        sig_down(b.attraction)
    );
    for (st, req, met) in &b.required {
        let _ = writeln!(
            s,
            "  required |Δ{st}| <= {}: {}",
            sig(*req),
            if *met { "met" } else { "NOT MET" }
        );
    }
    match &b.outcome {
        BoundOutcome::Proven => {}
        BoundOutcome::Refuted(_, why) | BoundOutcome::Inconclusive(why) => {
            let _ = writeln!(s, "  {why}");
        }
    }
}

/// The ultimate-bound section of the JSON report.
fn bound_json(b: &BoundReport) -> Value {
    let bounds: Map<String, Value> = b
        .bounds
        .iter()
        .map(|e| {
            (
                e.state.clone(),
                json!({"lower": e.lower, "upper": e.upper, "unit": e.unit}),
            )
        })
        .collect();
    let required: Map<String, Value> = b
        .required
        .iter()
        .map(|(s, x, met)| (s.clone(), json!({"bound": x, "met": met})))
        .collect();
    json!({
        "level": b.level,
        "refuted_level": b.refuted_level,
        "attraction": b.attraction,
        "bounds": bounds,
        "required": required,
        "level_proofs": b.steps.len(),
        "boxes": b.boxes,
    })
}

fn test_text(t: &Test) -> String {
    match t {
        Test::Negative { strict: true } => "< 0".into(),
        Test::Negative { strict: false } => "<= 0".into(),
        Test::Within { lo, hi } => format!("in [{lo}, {hi}]"),
        Test::NonZero => "!= 0".into(),
    }
}

/// A counterexample as JSON: the goal, every symbol's value, the errors, the quantity and its
/// value, V̇ there.
fn counterexample_json(cx: &Counterexample) -> Value {
    let point: Map<String, Value> = cx
        .point
        .iter()
        .map(|(n, v)| (n.clone(), json!(v)))
        .collect();
    let errors: Map<String, Value> = cx
        .coordinates
        .iter()
        .filter(|(n, _)| n.starts_with('Δ'))
        .map(|(n, v)| (n.trim_start_matches('Δ').to_string(), json!(v)))
        .collect();
    json!({
        "goal": cx.goal,
        "point": point,
        "errors": errors,
        "quantity": cx.quantity,
        "value": cx.value,
        "vdot": cx.vdot,
        "sign_change": cx.sign_change,
    })
}

/// The report as JSON: `{"verdict", "claim", "well_posed", "saturation": {actuator:
/// {"verdict", "limits", "share", "point", …}}, "counterexample": {"point": {symbol: value},
/// "vdot": value, …} | null, "boxes", "min_margin", "seconds", …}`.
pub fn json(r: &CheckReport, path: &str) -> Value {
    let mut saturation = Map::new();
    for a in &r.saturation {
        saturation.insert(
            a.actuator.clone(),
            json!({
                "verdict": a.verdict(),
                "limits": [a.limits.0, a.limits.1],
                "share": a.share,
                "samples": a.samples,
                "seen": [a.seen.0, a.seen.1],
                "boxes": a.search.as_ref().map(|s| s.boxes),
                "reason": match &a.status { Status::Inconclusive(why) => Some(why), _ => None },
                "point": a.point.as_ref().map(counterexample_json),
            }),
        );
    }
    let counterexample = r
        .counterexample
        .as_ref()
        .map_or(Value::Null, counterexample_json);
    let goals: Vec<Value> = r
        .goals
        .iter()
        .map(|g| {
            let mut o = json!({
                "kind": g.kind.name(),
                "label": g.label,
                "source": g.source,
                "expr": g.text,
                "test": test_text(&g.test),
                "status": status_word(&g.status).to_lowercase(),
                "boxes": g.search.as_ref().map(|s| s.boxes),
                "samples": g.sampled.as_ref().map(|s| s.evaluated),
            });
            if let Status::Inconclusive(why) = &g.status {
                // why it stopped, and the open boxes with the largest bound (coordinate →
                // [lo, hi], and the bound of the goal's expression there)
                let open: Vec<Value> = g
                    .search
                    .iter()
                    .flat_map(|s| &s.worst)
                    .map(|(bx, bound)| {
                        let coords: Map<String, Value> = g
                            .dims
                            .iter()
                            .zip(bx)
                            .map(|(&d, i)| (r.variables[d].name.clone(), json!([i.lo(), i.hi()])))
                            .collect();
                        json!({"box": coords, "bound": if bound.is_finite() { json!(bound) } else { Value::Null }})
                    })
                    .collect();
                o["reason"] = json!(why);
                o["open_boxes"] = Value::Array(open);
            }
            o
        })
        .collect();
    json!({
        "name": r.name,
        "file": path,
        "verdict": r.verdict.name(),
        "claim": r.claim.name(),
        "well_posed": r.well_posed,
        "saturation": saturation,
        "counterexample": counterexample,
        "boxes": r.boxes,
        "min_margin": r.min_margin,
        "follows": r.follows,
        "rate_limits": r.rates.as_ref().map(rates_json),
        "roundoff": r.roundoff.as_ref().map(roundoff_json),
        "seconds": r.seconds,
        "goals": goals,
        "ultimate_bound": r.bound.as_ref().map(bound_json),
    })
}

/// The within bounds in words (ASCII: they go into generated headers): `|h error| <= 0.5,
/// |va error| <= 0.25`, or the error box.
fn within_text(r: &crate::rates::RateLimits) -> String {
    if r.within.is_empty() {
        return "the error box".into();
    }
    r.within
        .iter()
        .map(|(st, b)| format!("|{st} error| <= {}", sig(*b)))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The guidance rates that keep every command within its limits, as text.
fn rates_text(s: &mut String, rates: &Result<crate::rates::RateLimits, String>) {
    use crate::rates::RatesOutcome;
    let r = match rates {
        Ok(r) => r,
        Err(why) => {
            let _ = writeln!(s, "\nguidance rates: {why}");
            return;
        }
    };
    let _ = writeln!(
        s,
        "\nguidance rates (each command within its limits wherever V <= {}, a set within {} that \
         no trajectory leaves):",
        sig_down(r.level),
        within_text(r)
    );
    match &r.outcome {
        RatesOutcome::Proven => {
            let width = r.rates.iter().map(|p| p.name.len()).max().unwrap_or(1);
            for p in &r.rates {
                let proved = format!("[{}, {}]", sig_up(p.proved.0), sig_down(p.proved.1));
                let _ = writeln!(
                    s,
                    "  {:<width$}  proved {:<20} declared [{}, {}] {}",
                    p.name,
                    proved,
                    sig(p.declared.0),
                    sig(p.declared.1),
                    p.unit
                );
            }
            let _ = writeln!(
                s,
                "  {} proofs of every actuator, {} boxes; so {{V <= {}}} is a region of attraction \
                 of the law as flown (saturated): no command leaves its limits there",
                r.steps,
                r.boxes,
                sig_down(r.level)
            );
            for w in &r.warnings {
                let _ = writeln!(s, "  warning: {w}");
            }
            if let Some(sat) = &r.saturated {
                saturated_text(s, sat);
            }
        }
        RatesOutcome::Refuted(actuator, cx) => {
            let point: Vec<String> = cx
                .point
                .iter()
                .map(|(n, v)| format!("{n} = {}", sig(*v)))
                .collect();
            let _ = writeln!(
                s,
                "  none: with every rate held at zero, {actuator} = {} at {} (every digit in \
                 --format json); narrow the set (--within) or the envelope",
                sig(cx.value),
                point.join(", ")
            );
        }
        RatesOutcome::Inconclusive(why) => {
            let _ = writeln!(s, "  undecided: {why}");
        }
    }
}

/// What the saturated law guarantees beyond the saturation-free set, as text.
fn saturated_text(s: &mut String, sat: &Result<crate::rates::SaturatedRegion, String>) {
    let _ = writeln!(
        s,
        "\nwith saturation (each command clamped to its limits, the rates within the proved ones):"
    );
    let r = match sat {
        Ok(r) => r,
        Err(why) => {
            let _ = writeln!(s, "  not sought: {why}");
            return;
        }
    };
    if r.proof.is_none() {
        let _ = writeln!(
            s,
            "  nothing proved beyond the saturation-free set {{V <= {}}} ({} proofs; the whole \
             error box's level is {})",
            sig(r.free),
            r.steps,
            sig(r.box_level)
        );
    } else {
        let _ = writeln!(
            s,
            "  region of attraction {{V <= {}}}: dV/dt < 0 with the commands clamped wherever \
             {} <= V <= {}, and below {} the commands are within their limits ({} proofs, {} \
             boxes); inside it, guaranteed:",
            sig_down(r.level),
            sig_down(r.free),
            sig_down(r.level),
            sig_down(r.free),
            r.steps,
            r.boxes
        );
        for e in &r.bounds {
            let _ = writeln!(
                s,
                "    Δ{} in [{}, {}] {}",
                e.state,
                sig_down(e.lower),
                sig_up(e.upper),
                e.unit
            );
        }
    }
    if let Some(u) = r.undecided {
        let _ = writeln!(
            s,
            "  undecided at V = {} (the proof's box budget ran out)",
            sig(u)
        );
    }
    match &r.refuted {
        Some((level, cx)) => {
            let point: Vec<String> = cx
                .coordinates
                .iter()
                .map(|(n, v)| format!("{n} = {}", sig(*v)))
                .collect();
            let _ = writeln!(
                s,
                "  not beyond V = {}: {} = {} at {} (every digit in --format json)",
                sig(*level),
                cx.quantity,
                sig(cx.value),
                point.join(", ")
            );
        }
        None if r.undecided.is_none() && r.level >= 0.99 * r.box_level => {
            let _ = writeln!(
                s,
                "  it reaches the whole error box's largest sublevel set ({})",
                sig(r.box_level)
            );
        }
        None if r.undecided.is_none() => {
            let _ = writeln!(
                s,
                "  larger levels were not tried ({} proofs at most)",
                crate::rates::SATURATED_STEPS
            );
        }
        None => {}
    }
}

/// The saturated law's region of attraction as JSON.
fn saturated_json(sat: &Result<crate::rates::SaturatedRegion, String>) -> Value {
    let r = match sat {
        Ok(r) => r,
        Err(why) => return json!({"outcome": "not sought", "reason": why}),
    };
    json!({
        "outcome": if r.proof.is_some() { "proven" } else { "none beyond the saturation-free set" },
        "free_level": r.free,
        "box_level": r.box_level,
        "level": r.level,
        "bounds": r.bounds.iter().map(|e| (e.state.clone(), json!({"lower": e.lower, "upper": e.upper, "unit": e.unit}))).collect::<Map<String, Value>>(),
        "refuted": r.refuted.as_ref().map(|(l, cx)| json!({"level": l, "point": counterexample_json(cx)})),
        "undecided": r.undecided,
        "steps": r.steps,
        "boxes": r.boxes,
    })
}

/// The guidance rates as JSON: `{"within", "level", "outcome", "rates": [{"name", "unit",
/// "declared", "proved"}], "steps", "boxes", "warnings", "point" | "reason"}`.
fn rates_json(rates: &Result<crate::rates::RateLimits, String>) -> Value {
    use crate::rates::RatesOutcome;
    let r = match rates {
        Ok(r) => r,
        Err(why) => return json!({"outcome": "not sought", "reason": why}),
    };
    let (outcome, point, reason) = match &r.outcome {
        RatesOutcome::Proven => ("proven", Value::Null, Value::Null),
        RatesOutcome::Refuted(a, cx) => (
            "saturates",
            json!({"actuator": a, "point": counterexample_json(cx)}),
            Value::Null,
        ),
        RatesOutcome::Inconclusive(why) => ("inconclusive", Value::Null, json!(why)),
    };
    json!({
        "within": r.within.iter().map(|(st, b)| (st.clone(), json!(b))).collect::<Map<String, Value>>(),
        "level": r.level,
        "outcome": outcome,
        "rates": r.rates.iter().map(|p| json!({
            "name": p.name, "unit": p.unit,
            "declared": [p.declared.0, p.declared.1],
            "proved": [p.proved.0, p.proved.1],
        })).collect::<Vec<_>>(),
        "steps": r.steps,
        "boxes": r.boxes,
        "warnings": r.warnings,
        "saturates": point,
        "reason": reason,
        "saturated": r.saturated.as_ref().map(saturated_json),
    })
}

#[cfg(test)]
mod directed_tests {
    use super::*;

    #[test]
    fn bounds_print_rounded_away_from_what_they_bound() {
        // an upper bound printed is never below it, a lower bound never above it, in the
        // digits `sig` prints
        for x in [
            0.12344, 0.12346, 1.0, 1234.5678, 4.970e-14, 2.3856e-5, 99999.9, 7e-4,
        ] {
            for v in [x, -x] {
                let (u, d) = (sig_up(v), sig_down(v));
                assert!(u.parse::<f64>().unwrap() >= v, "{v}: {u}");
                assert!(d.parse::<f64>().unwrap() <= v, "{v}: {d}");
                assert_eq!(
                    u.contains('e'),
                    sig(v).contains('e'),
                    "{v}: {u} vs {}",
                    sig(v)
                );
            }
        }
        assert_eq!(sig_up(0.12344), "0.1235");
        assert_eq!(sig_down(0.12346), "0.1234");
        assert_eq!(sig_up(-0.12346), "-0.1234");
        assert_eq!(sig_up(4.9696e-14), "4.970e-14");
    }
}
