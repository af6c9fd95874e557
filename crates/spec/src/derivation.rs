//! A derivation rendered for a reader: text, LaTeX, and JSON with every expression in formula
//! syntax over the base symbols (so another tool can evaluate it).

use crate::derive::Derivation;
use crate::model::{Decl, ErrorForm, Range, Settle, Spec, Target};
use lawsmith_expr::{to_latex, to_text};
use serde_json::{json, Map, Value};

/// The derivation as text: V, V̇, the laws and actuators in base symbols, the assumptions.
/// `file` names the spec in the heading.
pub fn text(spec: &Spec, d: &Derivation, file: &str) -> String {
    let dag = &spec.dag;
    let mut s = String::new();
    s.push_str(&format!("{} ({file})\n", spec.name));
    if let Some(sum) = &spec.summary {
        s.push_str(&format!("  {sum}\n"));
    }
    s.push_str(&format!("claim: {}\n\n", spec.claim.name()));
    for (n, e) in &d.where_defs {
        s.push_str(&format!("where {n} = {}\n", to_text(dag, *e)));
    }
    s.push_str(&format!("V     = {}\n", to_text(dag, d.candidate)));
    s.push_str(&format!("dV/dt = {}\n", to_text(dag, d.vdot)));
    s.push_str("\nlaws (in base symbols):\n");
    for (n, e) in &d.laws {
        s.push_str(&format!("  {n} = {}\n", to_text(dag, *e)));
    }
    if !d.actuators.is_empty() {
        s.push_str("actuators:\n");
        for (n, e) in &d.actuators {
            s.push_str(&format!("  {n} = {}\n", to_text(dag, *e)));
        }
    }
    if !d.updates.is_empty() {
        s.push_str("controller states (update laws, in base symbols):\n");
        for (n, e) in &d.updates {
            s.push_str(&format!("  d{n}/dt = {}\n", to_text(dag, *e)));
        }
    }
    if !d.assumptions.is_empty() {
        s.push_str("simplification assumed (to be proved over the envelope by `check`):\n");
        for (rule, c) in &d.assumptions {
            s.push_str(&format!(
                "  [{rule}] {}\n",
                c.kind.describe(&to_text(dag, c.expr))
            ));
        }
    }
    s
}

/// V, V̇ and the laws as a LaTeX `align*` block.
pub fn latex(spec: &Spec, d: &Derivation) -> String {
    let dag = &spec.dag;
    let mut s = format!("% {}: Lyapunov derivation\n\\begin{{align*}}\n", spec.name);
    s.push_str(&format!("V &= {} \\\\\n", to_latex(dag, d.candidate)));
    s.push_str(&format!("\\dot V &= {}", to_latex(dag, d.vdot)));
    for (n, e) in &d.laws {
        s.push_str(&format!(
            " \\\\\n\\mathrm{{{}}} &= {}",
            n.replace('_', "\\_"),
            to_latex(dag, *e)
        ));
    }
    for (n, e) in &d.updates {
        s.push_str(&format!(
            " \\\\\n\\dot{{\\mathrm{{{}}}}} &= {}",
            n.replace('_', "\\_"),
            to_latex(dag, *e)
        ));
    }
    s.push_str("\n\\end{align*}\n");
    s
}

/// The derivation as JSON, every expression in formula syntax over the base symbols.
pub fn json(spec: &Spec, d: &Derivation, file: &str) -> Value {
    let dag = &spec.dag;
    let mut laws = Map::new();
    for (n, e) in &d.laws {
        laws.insert(n.clone(), Value::String(to_text(dag, *e)));
    }
    let mut actuators = Map::new();
    for (n, e) in &d.actuators {
        actuators.insert(n.clone(), Value::String(to_text(dag, *e)));
    }
    let mut symbols = Map::new();
    for s in &spec.symbols {
        let mut o = Map::new();
        o.insert("kind".into(), json!(s.kind().name()));
        o.insert("unit".into(), json!(s.unit));
        let range = match &s.decl {
            Decl::State { .. } => spec.state_span(s),
            Decl::Memory { limits, .. } => Some(limits.nearest()),
            _ => s.range().map(Range::nearest),
        };
        o.insert(
            "range".into(),
            range.map_or(Value::Null, |(a, b)| json!([a, b])),
        );
        match &s.decl {
            Decl::Parameter { value } => {
                o.insert("value".into(), json!(value.value()));
            }
            Decl::Gain {
                default: Some(v), ..
            } => {
                o.insert("default".into(), json!(v));
            }
            Decl::State { target, error } => {
                match target {
                    Target::Reference(r) => o.insert("reference".into(), json!(r)),
                    Target::Equilibrium(e) => o.insert("equilibrium".into(), json!(e.value())),
                };
                let (a, b) = error.nearest();
                o.insert("error".into(), json!([a, b]));
            }
            Decl::Reference { rate, .. } => {
                o.insert("rate".into(), json!(rate));
            }
            Decl::Uncertain {
                estimate,
                form,
                delta,
                ..
            } => {
                o.insert("estimate".into(), json!(estimate));
                let form = match form {
                    ErrorForm::Relative => "relative",
                    ErrorForm::Absolute => "absolute",
                };
                o.insert("form".into(), json!(form));
                o.insert("error_symbol".into(), json!(delta));
            }
            Decl::Memory {
                initial, settle, ..
            } => {
                o.insert("initial".into(), json!(initial.value()));
                match settle {
                    Settle::Value(v) => o.insert("equilibrium".into(), json!(v.value())),
                    Settle::Unknown(u) => o.insert("estimates".into(), json!(u)),
                };
            }
            _ => {}
        }
        symbols.insert(s.name.clone(), Value::Object(o));
    }
    let assumptions: Vec<Value> = d
        .assumptions
        .iter()
        .map(|(rule, c)| {
            json!({
                "rule": rule,
                "condition": format!("{:?}", c.kind),
                "expr": to_text(dag, c.expr),
            })
        })
        .collect();
    json!({
        "name": spec.name,
        "file": file,
        "claim": spec.claim.name(),
        "candidate": to_text(dag, d.candidate),
        "vdot": to_text(dag, d.vdot),
        "laws": laws,
        "actuators": actuators,
        "updates": d
            .updates
            .iter()
            .map(|(n, e)| (n.clone(), Value::String(to_text(dag, *e))))
            .collect::<Map<String, Value>>(),
        "constraints": spec.constraints.iter().map(|c| c.text.clone()).collect::<Vec<_>>(),
        "symbols": symbols,
        "assumptions": assumptions,
    })
}
