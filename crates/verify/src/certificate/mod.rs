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
/// its limits, with its proof or the point where it leaves them. Version 4 added controller
/// states: their error coordinates (`controller-state error`), their limits as constraints
/// after the spec's, the `projection` goals at those limits, the constant unknowns (role
/// `uncertainty`, named as declared), and each Lyapunov goal's exempt `errors`.
pub const CERTIFICATE_VERSION: u64 = 4;

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
    k.name()
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
        Evidence::Unclamped => json!({"box": b, "unclamped": true}),
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
        .filter_map(|p| {
            let (v, n) = sublevel_json(p, sub?);
            leaves += n;
            Some(v)
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

/// The coordinates whose joint zero a Lyapunov goal is exempt at, by name.
pub(crate) fn exempt_names(c: &Compiled) -> Vec<&str> {
    c.errors.iter().map(|&k| c.names[k].as_str()).collect()
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
    if c.goal.origin {
        o.insert("errors".into(), json!(exempt_names(c)));
    }
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
    // the guidance rates that keep every command within its limits, when asked and proved
    let rates = match &report.rates {
        Some(Ok(r)) if matches!(r.outcome, crate::rates::RatesOutcome::Proven) => {
            let (v, n) = rates_json(r);
            leaves_total += n;
            v
        }
        _ => Value::Null,
    };
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
        "rate_limits": rates,
        "roundoff": match &report.roundoff {
            Some(Ok(ro)) => roundoff_json(ro),
            _ => Value::Null,
        },
    })
}

/// An instruction of the analysed program as the certificate writes it.
pub(crate) fn op_json(op: &lawsmith_codegen::Op) -> Value {
    use lawsmith_codegen::Op;
    match op {
        Op::Const(c) => json!(["const", num(*c)]),
        Op::Input(i) => json!(["input", i]),
        Op::Neg(a) => json!(["neg", a]),
        Op::Add(a, b) => json!(["add", a, b]),
        Op::Sub(a, b) => json!(["sub", a, b]),
        Op::Mul(a, b) => json!(["mul", a, b]),
        Op::Div(a, b) => json!(["div", a, b]),
        Op::Call1(f, a) => json!(["call", f.name(), a]),
        Op::Call2(f, a, b) => json!(["call", f.name(), a, b]),
        Op::Pow(a, b) => json!(["pow", a, b]),
        Op::Clamp(a, lo, hi) => json!(["clamp", a, num(*lo), num(*hi)]),
        Op::Select(c, a, b) => json!(["select", c, a, b]),
    }
}

/// The round-off bounds with their evidence: the program analysed (its rounded constants with
/// the rationals they stand for), its inputs, and per precision the input map, the box and
/// each output's bound with its split tree.
pub(crate) fn roundoff_json(ro: &crate::roundoff::RoundoffReport) -> Value {
    let p = &ro.program;
    json!({
        "method": "forward error analysis, mean-value enclosures, half an ulp of the result's binade per operation",
        "lib_ulps": crate::roundoff::LIB_ULPS,
        "leaves": ro.leaves,
        "inputs": p.inputs,
        "program": p.ops.iter().map(op_json).collect::<Vec<_>>(),
        "rounded": p.rounded.iter().map(|(s, q)| json!([s, exact_text(q)])).collect::<Vec<_>>(),
        "outputs": p.outputs.iter().map(|(n, s)| json!([n, s])).collect::<Vec<_>>(),
        "coordinates": ro.coordinates,
        "precisions": ro.precisions.iter().map(|(f, map, coords, bounds)| json!({
            "float": match f { lawsmith_codegen::Float::F64 => "f64", lawsmith_codegen::Float::F32 => "f32" },
            "input_map": map.0.iter().map(|(o, js)| json!([num(*o), js])).collect::<Vec<_>>(),
            "box": coords.iter().map(|x| json!([num(x.lo()), num(x.hi())])).collect::<Vec<_>>(),
            "bounds": bounds.iter().map(|b| json!({
                "output": b.output, "bound": num(b.bound), "leaves": b.boxes, "tree": b.tree,
            })).collect::<Vec<_>>(),
        })).collect::<Vec<_>>(),
    })
}

/// A sublevel proof (`V > level` on part of the domain) as the certificate writes it; returns
/// its leaves.
fn sublevel_json(p: &crate::bound::SublevelProof, sub: &Compiled) -> (Value, usize) {
    let mut o = Map::new();
    o.insert("coordinate".into(), json!(sub.names[p.coordinate]));
    o.insert("side".into(), json!(p.side.name()));
    o.insert("from".into(), num(p.from));
    o.insert("level".into(), num(p.level));
    o.insert("boxes".into(), json!(p.report.boxes));
    let n = p.report.tree.as_ref().map_or(0, |t| tree_json(&mut o, t));
    (Value::Object(o), n)
}

/// The proved guidance rates: the error bounds, the level with its face proofs, each rate's
/// declared and proved range, and each actuator's proof over the proved rates wherever
/// V ≤ level (the level is the constraint at `sublevel_constraint`). Returns the leaves.
fn rates_json(r: &crate::rates::RateLimits) -> (Value, usize) {
    let mut leaves = 0;
    let faces: Vec<Value> = r
        .faces
        .iter()
        .map(|p| {
            let (v, n) = sublevel_json(p, &r.sub);
            leaves += n;
            v
        })
        .collect();
    let actuators: Vec<Value> = r
        .actuators
        .iter()
        .map(|(name, g, rep)| {
            let mut o = Map::new();
            o.insert("actuator".into(), json!(name));
            leaves += goal_json(&mut o, g, &Status::Proven, Some(rep));
            Value::Object(o)
        })
        .collect();
    let v = json!({
        "within": r.within.iter().map(|(s, b)| (s.clone(), num(*b))).collect::<Map<String, Value>>(),
        "level": num(r.level),
        "candidate": {"expr": r.sub.text, "dims": r.sub.names},
        "faces": faces,
        "rates": r.rates.iter().map(|p| json!({
            "name": p.name, "declared": [num(p.declared.0), num(p.declared.1)],
            "proved": [num(p.proved.0), num(p.proved.1)],
        })).collect::<Vec<_>>(),
        "sublevel_constraint": r.sublevel_constraint,
        "actuators": actuators,
        "saturated": match &r.saturated {
            Some(Ok(sat)) if sat.proof.is_some() => {
                let (v, n) = saturated_json(sat, &r.sub);
                leaves += n;
                v
            }
            _ => Value::Null,
        },
    });
    (v, leaves)
}

/// The saturated law's region of attraction: the saturation-free level, the level, the face
/// proofs of the whole error box at it, the proofs that V exceeds the saturation-free level
/// beyond the bounds, V̇ of the saturated law on the band between the two levels (the level
/// is the constraint at `constraint`), and the bounds on each error with their proofs.
/// Returns the leaves.
fn saturated_json(sat: &crate::rates::SaturatedRegion, sub: &Compiled) -> (Value, usize) {
    let mut leaves = 0;
    let mut proofs = |ps: &[crate::bound::SublevelProof]| -> Vec<Value> {
        ps.iter()
            .map(|p| {
                let (v, n) = sublevel_json(p, sub);
                leaves += n;
                v
            })
            .collect()
    };
    let faces = proofs(&sat.box_faces);
    let outside = proofs(&sat.outside);
    let bound_proofs = proofs(&sat.bound_proofs);
    let mut goal = Map::new();
    if let Some((g, rep)) = &sat.proof {
        leaves += goal_json(&mut goal, g, &Status::Proven, Some(rep));
    }
    let v = json!({
        "free_level": num(sat.free),
        "level": num(sat.level),
        "faces": faces,
        "outside": outside,
        "constraint": sat.constraint,
        "goal": goal,
        "bounds": sat.bounds.iter().map(|e| json!({
            "state": e.state, "lower": num(e.lower), "upper": num(e.upper),
        })).collect::<Vec<_>>(),
        "bound_proofs": bound_proofs,
    });
    (v, leaves)
}

/// An actuator's declared limits as exact decimals.
fn limits_json(ag: &crate::prepare::ActuatorGoal) -> Value {
    json!([
        exact_text(ag.limits.lo.exact()),
        exact_text(ag.limits.hi.exact())
    ])
}

mod recheck;
pub use recheck::{
    recheck, recheck_roundoff, ProvedRegion, Rechecked, RecheckedRoundoff, Rejection,
};
