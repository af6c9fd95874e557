//! Proof certificates: everything a reader needs to re-check a verdict without the search.
//!
//! A certificate records the spec's SHA-256, the domain, the settings, the verdict, and for
//! every goal its expression, its test, and either the split tree of its proof (shape in
//! preorder plus every leaf box with its evidence) or its counterexample. [`recheck`] derives
//! the goals from the spec again, walks each tree recomputing every box from the root (so the
//! leaves cover the domain by construction), and re-evaluates every leaf: the recorded box
//! must equal the recomputed one, and the recorded bound must equal a fresh evaluation bit for
//! bit (evaluation is deterministic) and prove the test. Any edit is therefore caught.
//!
//! Non-finite numbers are written as the strings `"inf"`, `"-inf"`, `"nan"` (JSON has none).

use crate::bound::{above, sublevel_root, BoundReport, Side};
use crate::check::{CheckReport, GoalKind, Status, Verdict};
use crate::goal::{Compiled, Feasibility, Scratch, Test};
use crate::hessian::Method;
use crate::interval::Interval;
use crate::prepare::Prepared;
use crate::search::{halves, reconfirm, Counter, Evidence, Tree};
use rayon::prelude::*;
use serde_json::{json, Map, Value};
use sha2::{Digest, Sha256};

/// The certificate format's version; bumped on any incompatible change. Version 2 added what
/// an independent checker needs beside the spec: each coordinate's declared range as exact
/// decimals, the parameters' exact values, the region (V) of an ultimate bound's claim and
/// the candidate its sublevel proofs bound. Version 3 added `actuators`: each command against
/// its limits, with its proof or the point where it leaves them.
pub const CERTIFICATE_VERSION: u64 = 3;

/// An exact rational as text: its terminating decimal, or `p/q`.
fn exact_text(v: &lawsmith_expr::BigRational) -> String {
    lawsmith_expr::as_terminating_decimal(v)
        .unwrap_or_else(|| format!("{}/{}", v.numer(), v.denom()))
}

/// Lower-case hex SHA-256 of bytes.
pub fn sha256_hex(bytes: &[u8]) -> String {
    let d = Sha256::digest(bytes);
    d.iter().map(|b| format!("{b:02x}")).collect()
}

fn num(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else if x.is_nan() {
        json!("nan")
    } else if x > 0.0 {
        json!("inf")
    } else {
        json!("-inf")
    }
}

fn parse_num(v: &Value) -> Option<f64> {
    match v {
        Value::Number(n) => n.as_f64(),
        Value::String(s) => match s.as_str() {
            "inf" => Some(f64::INFINITY),
            "-inf" => Some(f64::NEG_INFINITY),
            "nan" => Some(f64::NAN),
            _ => None,
        },
        _ => None,
    }
}

fn parse_point(v: &Value) -> Option<Vec<f64>> {
    v.as_array()?.iter().map(parse_num).collect()
}

fn pair(i: &Interval) -> Value {
    json!([num(i.lo()), num(i.hi())])
}

fn parse_pair(v: &Value) -> Option<Interval> {
    let a = v.as_array()?;
    if a.len() != 2 {
        return None;
    }
    let (lo, hi) = (parse_num(&a[0])?, parse_num(&a[1])?);
    (lo <= hi).then(|| Interval::new(lo, hi))
}

/// The test of a goal as written in a certificate.
pub fn test_json(t: &Test) -> Value {
    match *t {
        Test::Negative { strict: true } => json!({"below": 0, "strict": true}),
        Test::Negative { strict: false } => json!({"below": 0, "strict": false}),
        Test::Within { lo, hi } => json!({"within": [num(lo), num(hi)]}),
        Test::NonZero => json!("nonzero"),
    }
}

fn kind_name(k: GoalKind) -> &'static str {
    match k {
        GoalKind::Condition => "condition",
        GoalKind::Positive => "positive",
        GoalKind::Claim => "claim",
    }
}

fn evidence_json(bx: &[Interval], ev: &Evidence) -> Value {
    let b: Vec<Value> = bx.iter().map(pair).collect();
    match ev {
        Evidence::Bound(f) => json!({"box": b, "bound": pair(f)}),
        Evidence::Hessian(m, v) => {
            json!({"box": b, "hessian": {"method": m.name(), "value": num(*v)}})
        }
        Evidence::Excluded(i) => json!({"box": b, "excluded": i}),
        Evidence::BelowLevel(v) => json!({"box": b, "below_level": pair(v)}),
    }
}

fn tree_json(o: &mut Map<String, Value>, tree: &Tree) -> usize {
    o.insert("tree".into(), json!(tree.shape));
    o.insert(
        "leaves".into(),
        Value::Array(
            tree.leaves
                .iter()
                .map(|(b, e)| evidence_json(b, e))
                .collect(),
        ),
    );
    tree.leaves.len()
}

/// The ultimate-bound section of a certificate: the level, the bounds and every sublevel
/// proof with its tree.
fn bound_json(b: &BoundReport, prepared: &Prepared) -> (Value, usize) {
    let sub = prepared.sublevel();
    let mut leaves = 0;
    let proofs: Vec<Value> = b
        .sublevel
        .iter()
        .map(|p| {
            let mut o = Map::new();
            let name = sub.map_or("?", |g| g.names[p.coordinate].as_str());
            o.insert("coordinate".into(), json!(name));
            o.insert("side".into(), json!(p.side.name()));
            o.insert("from".into(), num(p.from));
            o.insert("level".into(), num(p.level));
            o.insert("boxes".into(), json!(p.report.boxes));
            if let Some(t) = &p.report.tree {
                leaves += tree_json(&mut o, t);
            }
            Value::Object(o)
        })
        .collect();
    let v = json!({
        "candidate": sub.map(|g| json!({"expr": g.text, "dims": g.names})),
        "level": num(b.level),
        "refuted_level": b.refuted_level.map(num),
        "attraction": num(b.attraction),
        "bounds": b.bounds.iter().map(|e| json!({
            "state": e.state, "unit": e.unit, "lower": num(e.lower), "upper": num(e.upper),
        })).collect::<Vec<_>>(),
        "required": b.required.iter().map(|(s, x, met)| json!({
            "state": s, "bound": num(*x), "met": met,
        })).collect::<Vec<_>>(),
        "sublevel": proofs,
    });
    (v, leaves)
}

/// A goal's statement, its status and its evidence (the split tree of a proof, or the
/// counterexample) into `o`; returns the leaves written.
fn goal_json(
    o: &mut Map<String, Value>,
    c: &Compiled,
    status: &Status,
    search: Option<&crate::search::Report>,
) -> usize {
    o.insert("label".into(), json!(c.goal.label));
    o.insert("expr".into(), json!(c.text));
    o.insert("test".into(), test_json(&c.goal.test));
    o.insert("origin_exempt".into(), json!(c.goal.origin));
    if let Some(r) = &c.region_text {
        o.insert("region".into(), json!(r));
    }
    o.insert("dims".into(), json!(c.names));
    let name = match status {
        Status::Proven => "proven",
        Status::Refuted(_) => "refuted",
        Status::Inconclusive(_) => "inconclusive",
        Status::Skipped => "skipped",
    };
    o.insert("status".into(), json!(name));
    if let Some(s) = search {
        o.insert("boxes".into(), json!(s.boxes));
    }
    if let Status::Inconclusive(why) = status {
        o.insert("reason".into(), json!(why));
    }
    if let Status::Refuted(cx) = status {
        let pt = |p: &[f64]| p.iter().map(|&x| num(x)).collect::<Vec<_>>();
        let mut cj = json!({
            "point": pt(&cx.point),
            "value": num(cx.value),
            "enclosure": pair(&cx.enclosure),
        });
        if let Some([a, b]) = &cx.bracket {
            cj["bracket"] = json!([pt(a), pt(b)]);
        }
        o.insert("counterexample".into(), cj);
    }
    search
        .and_then(|s| s.tree.as_ref())
        .map_or(0, |tree| tree_json(o, tree))
}

/// Where a certificate came from and how it was searched.
#[derive(Clone, Debug)]
pub struct Origin<'a> {
    /// The spec file as given.
    pub file: &'a str,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// The tool version.
    pub tool_version: &'a str,
    /// The settings, as JSON.
    pub settings: Value,
}

/// Writes the certificate of a check.
pub fn certificate(report: &CheckReport, prepared: &Prepared, origin: &Origin) -> Value {
    let domain: Vec<Value> = prepared
        .problem
        .variables
        .iter()
        .map(|v| {
            json!({
                "name": v.name, "symbol": v.symbol, "role": v.role.name(), "unit": v.unit,
                "range": [num(v.lo), num(v.hi)],
                "declared": [exact_text(v.declared.lo.exact()), exact_text(v.declared.hi.exact())],
            })
        })
        .collect();
    let mut goals = Vec::new();
    let mut leaves_total = 0;
    for (g, r) in prepared.goals.iter().zip(&report.goals) {
        let c = &g.compiled;
        let mut o = Map::new();
        o.insert("kind".into(), json!(kind_name(g.kind)));
        o.insert("source".into(), json!(g.source));
        leaves_total += goal_json(&mut o, c, &r.status, r.search.as_ref());
        if let (GoalKind::Claim, Some(b)) = (g.kind, &report.bound) {
            let (v, n) = bound_json(b, prepared);
            leaves_total += n;
            o.insert("ultimate_bound".into(), v);
        }
        goals.push(Value::Object(o));
    }
    // each actuator's command against its limits: outside the verdict, which is the claim's
    let mut actuators = Vec::new();
    for (ag, s) in prepared.actuators.iter().zip(&report.saturation) {
        let mut o = Map::new();
        o.insert("actuator".into(), json!(ag.actuator));
        o.insert("limits".into(), limits_json(ag));
        leaves_total += goal_json(&mut o, &ag.compiled, &s.status, s.search.as_ref());
        actuators.push(Value::Object(o));
    }
    json!({
        "certificate": "lawsmith proof certificate",
        "version": CERTIFICATE_VERSION,
        "tool_version": origin.tool_version,
        "spec": {"name": report.name, "file": origin.file, "sha256": origin.sha256},
        "claim": report.claim.name(),
        "verdict": report.verdict.name(),
        "well_posed": report.well_posed,
        "domain": domain,
        "parameters": prepared.problem.parameters.iter().map(|(n, v)| (n.clone(), json!(exact_text(v.exact())))).collect::<Map<String, Value>>(),
        "constraints": report.constraints,
        "settings": origin.settings,
        "counts": {"goals": goals.len(), "boxes": report.boxes, "leaves": leaves_total},
        "min_margin": report.min_margin.map(num),
        "goals": goals,
        "actuators": actuators,
    })
}

/// An actuator's declared limits as exact decimals.
fn limits_json(ag: &crate::prepare::ActuatorGoal) -> Value {
    json!([
        exact_text(ag.limits.lo.exact()),
        exact_text(ag.limits.hi.exact())
    ])
}

/// What a successful re-check covered.
#[derive(Clone, Debug, PartialEq)]
pub struct Rechecked {
    /// The verdict the certificate states (and the re-check confirmed).
    pub verdict: Verdict,
    /// Goals re-checked.
    pub goals: usize,
    /// Leaf boxes re-evaluated.
    pub leaves: usize,
    /// Counterexamples re-confirmed.
    pub counterexamples: usize,
    /// Each actuator's command against its limits as re-checked: `saturation-free` (its
    /// proof re-evaluated), `saturates` (its point re-confirmed), `undecided`, `not checked`.
    pub actuators: Vec<(String, &'static str)>,
}

/// Why a certificate was rejected.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Rejection(pub String);

impl std::fmt::Display for Rejection {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for Rejection {}

fn reject<T>(msg: impl Into<String>) -> Result<T, Rejection> {
    Err(Rejection(msg.into()))
}

fn field<'a>(v: &'a Value, key: &str, at: &str) -> Result<&'a Value, Rejection> {
    v.get(key)
        .ok_or_else(|| Rejection(format!("{at}: missing field `{key}`")))
}

/// Re-checks a certificate against the spec it claims (already prepared by
/// [`crate::prepare`] from the spec whose bytes hash to `spec_sha256`).
pub fn recheck(
    cert: &Value,
    spec_sha256: &str,
    prepared: &Prepared,
) -> Result<Rechecked, Rejection> {
    if field(cert, "version", "certificate")?.as_u64() != Some(CERTIFICATE_VERSION) {
        return reject(format!("certificate version is not {CERTIFICATE_VERSION}"));
    }
    let sha = field(field(cert, "spec", "certificate")?, "sha256", "spec")?;
    if sha.as_str() != Some(spec_sha256) {
        return reject(format!(
            "the spec's SHA-256 is {spec_sha256} but the certificate was written for {}",
            sha.as_str().unwrap_or("?")
        ));
    }
    let claim = field(cert, "claim", "certificate")?;
    if claim.as_str() != Some(prepared.claim.name().as_str()) {
        return reject(format!(
            "the certificate proves the claim {claim}, the spec states `{}`",
            prepared.claim.name()
        ));
    }
    // the domain must be the spec's, bound for bound
    let domain = field(cert, "domain", "certificate")?
        .as_array()
        .ok_or_else(|| Rejection("`domain` is not a list".into()))?;
    let vars = &prepared.problem.variables;
    if domain.len() != vars.len() {
        return reject(format!(
            "the certificate's domain has {} coordinates, the spec's {}",
            domain.len(),
            vars.len()
        ));
    }
    for (d, v) in domain.iter().zip(vars) {
        let range = parse_pair(field(d, "range", "domain")?);
        if d.get("name").and_then(Value::as_str) != Some(v.name.as_str())
            || range != Some(Interval::new(v.lo, v.hi))
        {
            return reject(format!(
                "domain coordinate `{}` does not match the spec ({} in [{}, {}])",
                d.get("name").and_then(Value::as_str).unwrap_or("?"),
                v.name,
                v.lo,
                v.hi
            ));
        }
    }
    let goals = field(cert, "goals", "certificate")?
        .as_array()
        .ok_or_else(|| Rejection("`goals` is not a list".into()))?;
    if goals.len() != prepared.goals.len() {
        return reject(format!(
            "the certificate has {} goals, the spec gives {}",
            goals.len(),
            prepared.goals.len()
        ));
    }
    let mut out = Rechecked {
        verdict: Verdict::Proven,
        goals: 0,
        leaves: 0,
        counterexamples: 0,
        actuators: Vec::new(),
    };
    let mut statuses = Vec::new();
    for (gi, (gj, pg)) in goals.iter().zip(&prepared.goals).enumerate() {
        let c = &pg.compiled;
        let at = format!("goal {} ({})", gi + 1, c.goal.label);
        let status = statement(gj, c, &at)?;
        statuses.push(status.to_string());
        // an ultimate bound's claim goal is proved at the certificate's level
        let mut at_level = None;
        if let (GoalKind::Claim, Some(_)) = (pg.kind, prepared.sublevel()) {
            if status == "proven" {
                let (level, leaves) = recheck_bound(gj, prepared, &at)?;
                out.leaves += leaves;
                at_level = Some(crate::bound::at_level(c, level));
            }
        }
        let c = at_level.as_ref().unwrap_or(c);
        evidence(gj, c, prepared.root(gi), status, &at, &mut out)?;
    }
    // each actuator's command against its limits, as the spec declares them
    let actuators = field(cert, "actuators", "certificate")?
        .as_array()
        .ok_or_else(|| Rejection("`actuators` is not a list".into()))?;
    if actuators.len() != prepared.actuators.len() {
        return reject(format!(
            "the certificate has {} actuators, the spec {}",
            actuators.len(),
            prepared.actuators.len()
        ));
    }
    for (k, (aj, ag)) in actuators.iter().zip(&prepared.actuators).enumerate() {
        let c = &ag.compiled;
        let at = format!("actuator `{}`", ag.actuator);
        if aj.get("actuator").and_then(Value::as_str) != Some(ag.actuator.as_str()) {
            return reject(format!("{at}: the certificate names another actuator here"));
        }
        let limits = limits_json(ag);
        if aj.get("limits") != Some(&limits) {
            return reject(format!("{at}: the limits differ from the spec's {limits}"));
        }
        let status = statement(aj, c, &at)?;
        let mut tally = Rechecked {
            actuators: Vec::new(),
            ..out
        };
        let root = prepared.actuator_root(k);
        if let Some(point) = evidence(aj, c, root, status, &at, &mut tally)? {
            // outside the limits themselves, not only outside the test's f64 ends
            if !ag.outside(c.at_point(&point, &mut Scratch::default())) {
                return reject(format!(
                    "{at}: the recorded point is not outside the declared limits"
                ));
            }
        }
        out.leaves = tally.leaves;
        let word = match status {
            "proven" => "saturation-free",
            "refuted" => "saturates",
            "inconclusive" => "undecided",
            _ => "not checked",
        };
        out.actuators.push((ag.actuator.clone(), word));
    }
    let implied = if statuses.iter().any(|s| s == "refuted") {
        Verdict::Falsified
    } else if statuses.iter().all(|s| s == "proven") {
        Verdict::Proven
    } else {
        Verdict::Inconclusive
    };
    let stated = field(cert, "verdict", "certificate")?
        .as_str()
        .unwrap_or("");
    if stated != implied.name() {
        return reject(format!(
            "the certificate states `{stated}` but its goals give `{}`",
            implied.name()
        ));
    }
    out.verdict = implied;
    Ok(out)
}

/// A goal's statement in the certificate must be the spec's: its expression, test and
/// coordinates. Returns its status.
fn statement<'a>(gj: &'a Value, c: &Compiled, at: &str) -> Result<&'a str, Rejection> {
    if gj.get("expr").and_then(Value::as_str) != Some(c.text.as_str())
        || gj.get("test") != Some(&test_json(&c.goal.test))
        || gj.get("dims") != Some(&json!(c.names))
    {
        return reject(format!(
            "{at}: expression, test or coordinates differ from the spec's"
        ));
    }
    Ok(field(gj, "status", at)?.as_str().unwrap_or(""))
}

/// Re-checks a goal's evidence for its status: every leaf of a proof's tree, or the
/// counterexample (returned, when it is one point).
fn evidence(
    gj: &Value,
    c: &Compiled,
    root: Vec<Interval>,
    status: &str,
    at: &str,
    out: &mut Rechecked,
) -> Result<Option<Vec<f64>>, Rejection> {
    out.goals += 1;
    match status {
        "proven" => {
            out.leaves += recheck_tree(gj, c, root, at)?;
            Ok(None)
        }
        "refuted" => {
            let cx = field(gj, "counterexample", at)?;
            let bad = || Rejection(format!("{at}: malformed counterexample"));
            let point = parse_point(field(cx, "point", at)?).ok_or_else(bad)?;
            let bracket = match cx.get("bracket").and_then(Value::as_array) {
                Some(ends) if ends.len() == 2 => Some([
                    parse_point(&ends[0]).ok_or_else(bad)?,
                    parse_point(&ends[1]).ok_or_else(bad)?,
                ]),
                Some(_) => return Err(bad()),
                None => None,
            };
            if point.len() != c.dims.len() {
                return reject(format!("{at}: the counterexample has the wrong dimension"));
            }
            let one_point = bracket.is_none().then(|| point.clone());
            let counter = Counter {
                point,
                value: f64::NAN,
                enclosure: Interval::point(0.0),
                bracket,
            };
            if !reconfirm(c, &counter, &mut Scratch::default()) {
                return reject(format!(
                    "{at}: the recorded counterexample does not refute the goal"
                ));
            }
            out.counterexamples += 1;
            Ok(one_point)
        }
        "inconclusive" | "skipped" => Ok(None),
        other => reject(format!("{at}: unknown status `{other}`")),
    }
}

/// Re-checks the ultimate-bound section of a proven claim: every sublevel proof's tree, and
/// that the proofs present imply the stated bounds and region of attraction. Returns the
/// level the claim goal must be proved at, and the leaves re-evaluated.
fn recheck_bound(gj: &Value, prepared: &Prepared, at: &str) -> Result<(f64, usize), Rejection> {
    let sub = prepared
        .sublevel()
        .ok_or_else(|| Rejection(format!("{at}: the spec's claim has no ultimate bound")))?;
    let b = field(gj, "ultimate_bound", at)?;
    let bad = |what: &str| Rejection(format!("{at}: malformed ultimate bound ({what})"));
    let level = field(b, "level", at)
        .ok()
        .and_then(parse_num)
        .ok_or_else(|| bad("level"))?;
    let attraction = field(b, "attraction", at)
        .ok()
        .and_then(parse_num)
        .ok_or_else(|| bad("attraction"))?;
    if !(level >= 0.0 && level.is_finite() && attraction >= 0.0 && attraction.is_finite()) {
        return Err(bad("level"));
    }
    let root = prepared.sublevel_root();
    let mut proved: Vec<(usize, Side, f64, f64)> = Vec::new();
    let mut leaves = 0;
    for (i, p) in field(b, "sublevel", at)?
        .as_array()
        .ok_or_else(|| bad("sublevel"))?
        .iter()
        .enumerate()
    {
        let name = p.get("coordinate").and_then(Value::as_str).unwrap_or("");
        let k = sub
            .names
            .iter()
            .position(|n| n == name)
            .filter(|k| sub.errors.contains(k))
            .ok_or_else(|| bad("coordinate"))?;
        let side = p
            .get("side")
            .and_then(Value::as_str)
            .and_then(Side::from_name)
            .ok_or_else(|| bad("side"))?;
        let from = p
            .get("from")
            .and_then(parse_num)
            .ok_or_else(|| bad("from"))?;
        let lv = p
            .get("level")
            .and_then(parse_num)
            .ok_or_else(|| bad("level"))?;
        if !root[k].contains(from) {
            return Err(bad("from"));
        }
        let g = above(sub, lv);
        let r = sublevel_root(&root, k, side, from);
        leaves += recheck_tree(p, &g, r, &format!("{at}, sublevel proof {}", i + 1))?;
        proved.push((k, side, from, lv));
    }
    // every face of the error box at the attraction level
    for &k in &sub.errors {
        for end in [root[k].lo(), root[k].hi()] {
            if end != 0.0
                && attraction > 0.0
                && !proved
                    .iter()
                    .any(|&(pk, s, f, l)| pk == k && s == Side::Face && f == end && l == attraction)
            {
                return reject(format!(
                    "{at}: no proof that V > {attraction} on the face {} = {end}",
                    sub.names[k]
                ));
            }
        }
    }
    if level > 0.0 && level >= attraction {
        return reject(format!(
            "{at}: the level {level} is not below the region of attraction {attraction}"
        ));
    }
    // every stated bound by a proof at the level
    let mut stated: Vec<(String, f64)> = Vec::new();
    for e in field(b, "bounds", at)?
        .as_array()
        .ok_or_else(|| bad("bounds"))?
    {
        let state = e.get("state").and_then(Value::as_str).unwrap_or("");
        let k = sub
            .errors
            .iter()
            .copied()
            .find(|&k| prepared.problem.variables[sub.dims[k]].symbol == state)
            .ok_or_else(|| bad("bounds"))?;
        let lower = e
            .get("lower")
            .and_then(parse_num)
            .ok_or_else(|| bad("bounds"))?;
        let upper = e
            .get("upper")
            .and_then(parse_num)
            .ok_or_else(|| bad("bounds"))?;
        let covered = |side: Side, b: f64, end: f64| {
            ((level == 0.0 || end == 0.0) && b == 0.0)
                || proved
                    .iter()
                    .any(|&(pk, s, f, l)| pk == k && s == side && f == b && l == level)
        };
        if !covered(Side::Upper, upper, root[k].hi()) || !covered(Side::Lower, lower, root[k].lo())
        {
            return reject(format!(
                "{at}: the bound [{lower}, {upper}] on `{state}` is not proved at level {level}"
            ));
        }
        stated.push((state.to_string(), lower.abs().max(upper.abs())));
    }
    // the required bounds are the spec's, never the certificate's own list: each must be met
    // by a bound proved above
    let listed: Option<Vec<(String, f64)>> = field(b, "required", at)?
        .as_array()
        .ok_or_else(|| bad("required"))?
        .iter()
        .map(|r| {
            Some((
                r.get("state")?.as_str()?.to_string(),
                r.get("bound").and_then(parse_num)?,
            ))
        })
        .collect();
    if listed.as_deref() != Some(prepared.required()) {
        return reject(format!(
            "{at}: the certificate's required bounds differ from the spec's ({})",
            required_text(prepared.required())
        ));
    }
    for (state, need) in prepared.required() {
        match stated.iter().find(|(s, _)| s == state) {
            Some((_, got)) if got <= need => {}
            Some((_, got)) => {
                return reject(format!(
                    "{at}: the proved bound {got} on `{state}` exceeds the spec's required {need}"
                ))
            }
            None => {
                return reject(format!(
                    "{at}: the spec requires a bound on `{state}`, and the certificate proves none"
                ))
            }
        }
    }
    Ok((level, leaves))
}

fn required_text(required: &[(String, f64)]) -> String {
    if required.is_empty() {
        return "none".into();
    }
    required
        .iter()
        .map(|(s, b)| format!("|{s}| <= {b}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Walks a goal's split tree from the root box, checks every recorded leaf box against the
/// recomputed one, and re-evaluates every leaf's evidence in parallel. Returns the leaf count.
fn recheck_tree(
    gj: &Value,
    c: &Compiled,
    root: Vec<Interval>,
    at: &str,
) -> Result<usize, Rejection> {
    let shape: Vec<i64> = field(gj, "tree", at)?
        .as_array()
        .and_then(|a| a.iter().map(Value::as_i64).collect())
        .ok_or_else(|| Rejection(format!("{at}: `tree` is not a list of integers")))?;
    let leaves = field(gj, "leaves", at)?
        .as_array()
        .ok_or_else(|| Rejection(format!("{at}: `leaves` is not a list")))?;
    // recompute the leaf boxes from the shape
    let mut boxes = Vec::new();
    let mut stack = vec![root];
    let mut pos = 0;
    while let Some(bx) = stack.pop() {
        let Some(&s) = shape.get(pos) else {
            return reject(format!("{at}: the tree ends before covering the domain"));
        };
        pos += 1;
        if s < 0 {
            boxes.push(bx);
        } else {
            let d = s as usize;
            if d >= bx.len() || !(bx[d].mid() > bx[d].lo() && bx[d].mid() < bx[d].hi()) {
                return reject(format!("{at}: the tree splits along an invalid dimension"));
            }
            let (lo, hi) = halves(&bx, d);
            stack.push(hi);
            stack.push(lo);
        }
    }
    if pos != shape.len() || boxes.len() != leaves.len() {
        return reject(format!(
            "{at}: the tree has {} leaves and {} entries, the certificate lists {} leaves",
            boxes.len(),
            shape.len(),
            leaves.len()
        ));
    }
    let strict = matches!(c.goal.test, Test::Negative { strict: true });
    let bad: Option<String> = boxes
        .par_iter()
        .zip(leaves.par_iter())
        .enumerate()
        .map_init(Scratch::default, |s, (li, (bx, leaf))| {
            let recorded: Option<Vec<Interval>> = leaf
                .get("box")
                .and_then(Value::as_array)
                .and_then(|a| a.iter().map(parse_pair).collect());
            if recorded.as_deref() != Some(bx.as_slice()) {
                return Some(format!(
                    "leaf {li}: its box is not the one its tree position gives"
                ));
            }
            if let Some(b) = leaf.get("bound") {
                let recorded = parse_pair(b);
                let holds_origin = c.holds_origin(bx);
                let (f, _) = c.enclose(bx, s);
                if recorded != Some(f) {
                    return Some(format!(
                        "leaf {li}: recorded bound {b} but the box evaluates to [{}, {}]",
                        f.lo(),
                        f.hi()
                    ));
                }
                let exempt = holds_origin && strict;
                if exempt || !c.goal.test.proves(f) {
                    return Some(format!("leaf {li}: its bound does not prove the goal"));
                }
            } else if let Some(h) = leaf.get("hessian") {
                let method = h
                    .get("method")
                    .and_then(Value::as_str)
                    .and_then(Method::from_name);
                let value = h.get("value").and_then(parse_num);
                let (Some(method), Some(value)) = (method, value) else {
                    return Some(format!("leaf {li}: malformed Hessian evidence"));
                };
                let v = c.origin_measure(method, bx, s);
                let passes = if strict { v < 0.0 } else { v <= 0.0 };
                if v.to_bits() != value.to_bits() || !passes {
                    return Some(format!(
                        "leaf {li}: recorded Hessian value {value} but the box gives {v}"
                    ));
                }
            } else if let Some(v) = leaf.get("below_level") {
                let recorded = parse_pair(v);
                match c.feasibility(bx, s) {
                    Feasibility::Below(f) if Some(f) == recorded && f.hi() < c.level => {}
                    _ => {
                        return Some(format!(
                            "leaf {li}: V is not below the level {} on its box",
                            c.level
                        ))
                    }
                }
            } else if let Some(i) = leaf.get("excluded").and_then(Value::as_u64) {
                if c.feasibility(bx, s) != Feasibility::None(i as usize) {
                    return Some(format!(
                        "leaf {li}: constraint {i} does not fail everywhere on its box"
                    ));
                }
            } else {
                return Some(format!("leaf {li}: no evidence"));
            }
            None
        })
        .find_first(Option::is_some)
        .flatten();
    match bad {
        Some(msg) => reject(format!("{at}: {msg}")),
        None => Ok(boxes.len()),
    }
}
