//! `lawsmith derive`: V, V̇ and the laws in base symbols, as text, LaTeX or JSON.

use crate::{read_spec, Format, EXIT_INVALID};
use lawsmith_expr::{to_latex, to_text, DagLimits};
use lawsmith_spec::{derive, uncertainty_name, Decl, Derivation, ErrorForm, Range, Spec, Target};
use serde_json::{json, Map, Value};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

pub fn derive_cmd(paths: &[PathBuf], format: Format, limits: &DagLimits) -> ExitCode {
    let mut failed = false;
    let mut json_out = Vec::new();
    for (i, path) in paths.iter().enumerate() {
        let Some(crate::Loaded { mut spec, bytes }) = read_spec(path) else {
            failed = true;
            continue;
        };
        spec.dag.set_limits(limits.clone());
        let d = match derive(&mut spec) {
            Ok(d) => d,
            Err(e) => {
                crate::print_derive_error(path, &bytes, &e);
                failed = true;
                continue;
            }
        };
        if crate::verbosity() >= 2 {
            eprintln!(
                "lawsmith: derived {}: {} expression nodes, {} of {} term products of the expansion budget",
                spec.name,
                spec.dag.len(),
                d.work,
                limits.max_term_products
            );
        }
        match format {
            Format::Json => json_out.push(derivation_json(&spec, &d, path)),
            Format::Text => {
                if i > 0 {
                    println!();
                }
                print!("{}", derivation_text(&spec, &d, path));
            }
            Format::Latex => {
                if i > 0 {
                    println!();
                }
                print!("{}", derivation_latex(&spec, &d));
            }
        }
    }
    if format == Format::Json {
        crate::print_json_per_spec(json_out);
    }
    if failed {
        ExitCode::from(EXIT_INVALID)
    } else {
        ExitCode::SUCCESS
    }
}

fn derivation_text(spec: &Spec, d: &Derivation, path: &Path) -> String {
    let dag = &spec.dag;
    let mut s = String::new();
    s.push_str(&format!("{} ({})\n", spec.name, path.display()));
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

fn derivation_latex(spec: &Spec, d: &Derivation) -> String {
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
    s.push_str("\n\\end{align*}\n");
    s
}

fn derivation_json(spec: &Spec, d: &Derivation, path: &Path) -> Value {
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
            Decl::Uncertain { estimate, form, .. } => {
                o.insert("estimate".into(), json!(estimate));
                let form = match form {
                    ErrorForm::Relative => "relative",
                    ErrorForm::Absolute => "absolute",
                };
                o.insert("form".into(), json!(form));
                o.insert("error_symbol".into(), json!(uncertainty_name(&s.name)));
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
        "file": path.display().to_string(),
        "claim": spec.claim.name(),
        "candidate": to_text(dag, d.candidate),
        "vdot": to_text(dag, d.vdot),
        "laws": laws,
        "actuators": actuators,
        "constraints": spec.constraints.iter().map(|c| c.text.clone()).collect::<Vec<_>>(),
        "symbols": symbols,
        "assumptions": assumptions,
    })
}
