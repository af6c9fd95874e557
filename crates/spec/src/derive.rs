//! The closed loop and V̇: laws substituted in order, dynamics closed with the laws, and
//! V̇ = Σ ∂V/∂x·ẋ + Σ ∂V/∂r·ṙ, simplified to canonical form.

use crate::diag::Diagnostic;
use crate::model::{Decl, ErrorForm, Spec, Symbol};
use lawsmith_expr::{derivative, AssumeAll, Condition, Dag, ExprId, Oracle, Simplifier};
use std::collections::HashMap;

/// What `derive` produces. Every expression is in base symbols only (states, references,
/// rates, signals, gains, parameters) and in canonical form.
#[derive(Debug)]
pub struct Derivation {
    /// V.
    pub candidate: ExprId,
    /// V̇ along the closed loop.
    pub vdot: ExprId,
    /// Each law with earlier laws substituted, in evaluation order.
    pub laws: Vec<(String, ExprId)>,
    /// Each actuator command in base symbols.
    pub actuators: Vec<(String, ExprId)>,
    /// Each controller state's update law in base symbols (laws substituted).
    pub updates: Vec<(String, ExprId)>,
    /// The `where` definitions of the candidate, simplified.
    pub where_defs: Vec<(String, ExprId)>,
    /// Closed-loop state derivatives (true values of uncertain quantities written as
    /// estimate and error, the error `δNAME` a symbol of its own).
    pub closed_loop: Vec<(String, ExprId)>,
    /// Side conditions the simplification relied on (rule name, condition); the verifier
    /// proves them over the envelope.
    pub assumptions: Vec<(&'static str, Condition)>,
    /// The expansion work the simplification spent (what `DagLimits::max_term_products`
    /// bounds).
    pub work: u64,
}

/// A problem that keeps V̇ from being formed, located in the spec file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DeriveError {
    /// Stable class name, as for load diagnostics (`expansion-budget`, `node-budget`, …).
    pub class: &'static str,
    /// What went wrong.
    pub message: String,
    /// Byte range in the spec file it points at.
    pub span: std::ops::Range<usize>,
    /// The setting to raise or the change to make.
    pub hint: Option<String>,
}

impl DeriveError {
    /// The error as a diagnostic, to render with [`crate::render`] against the spec's text.
    pub fn diagnostic(&self) -> Diagnostic {
        let d = Diagnostic::new(self.class, self.message.clone(), self.span.clone())
            .label("V̇ is formed from this candidate and the closed loop");
        match &self.hint {
            Some(h) => d.hint(h.clone()),
            None => d,
        }
    }
}

impl std::fmt::Display for DeriveError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)?;
        if let Some(h) = &self.hint {
            write!(f, " ({h})")?;
        }
        Ok(())
    }
}

impl std::error::Error for DeriveError {}

/// Each uncertain quantity's true value as the plant sees it: `estimate·(1 + δ)` or
/// `estimate + δ`, where the estimate (a signal, or an input computed by its law) is what the
/// controller sees.
fn true_values(dag: &mut Dag, symbols: &[Symbol]) -> HashMap<String, ExprId> {
    let mut out = HashMap::new();
    for s in symbols {
        let Decl::Uncertain {
            estimate,
            form,
            delta,
            ..
        } = &s.decl
        else {
            continue;
        };
        let e = dag.sym(estimate);
        let delta = dag.sym(delta);
        let value = match form {
            ErrorForm::Relative => {
                let one = dag.int(1);
                let factor = dag.add(vec![one, delta]);
                dag.mul(vec![e, factor])
            }
            ErrorForm::Absolute => dag.add(vec![e, delta]),
        };
        out.insert(s.name.clone(), value);
    }
    out
}

/// Derives V̇ with every side condition granted (and recorded in
/// [`Derivation::assumptions`]).
pub fn derive(spec: &mut Spec) -> Result<Derivation, DeriveError> {
    let mut oracle = AssumeAll::default();
    let mut d = derive_with(spec, &mut oracle)?;
    d.assumptions = oracle.assumed;
    Ok(d)
}

/// Derives V̇ with side conditions answered by `oracle`.
pub fn derive_with(spec: &mut Spec, oracle: &mut dyn Oracle) -> Result<Derivation, DeriveError> {
    let at = spec.candidate_span.clone();
    let error = |class: &'static str, message: String, hint: Option<&str>| DeriveError {
        class,
        message,
        span: at.clone(),
        hint: hint.map(str::to_string),
    };
    let dag = &mut spec.dag;
    let laws = substituted_laws(dag, &spec.laws);
    let law_map: HashMap<String, ExprId> = laws.iter().cloned().collect();
    // the plant sees true values
    let true_values = true_values(dag, &spec.symbols);
    let closed = closed_loop(dag, &spec.dynamics, &true_values, &law_map);
    // each controller state moves by its update law, the laws substituted
    let updates: Vec<(String, ExprId)> = spec
        .updates
        .iter()
        .map(|(m, u)| (m.clone(), dag.substitute(*u, &law_map)))
        .collect();
    let v = spec.candidate;
    let vdot = vdot_along(dag, &spec.symbols, v, &closed, &updates)
        .map_err(|(class, message)| error(class, message, None))?;
    let actuators: Vec<(String, ExprId)> = spec
        .actuators
        .iter()
        .map(|a| (a.name.clone(), dag.substitute(a.law, &law_map)))
        .collect();
    let mut simp = Simplifier::new(dag, oracle);
    let vdot = simp.simplify(dag, vdot);
    let candidate = simp.simplify(dag, v);
    let laws = laws
        .into_iter()
        .map(|(n, e)| (n, simp.simplify(dag, e)))
        .collect();
    let actuators = actuators
        .into_iter()
        .map(|(n, e)| (n, simp.simplify(dag, e)))
        .collect();
    let updates = updates
        .into_iter()
        .map(|(n, e)| (n, simp.simplify(dag, e)))
        .collect();
    let where_defs = spec
        .where_defs
        .iter()
        .map(|(n, e)| (n.clone(), simp.simplify(dag, *e)))
        .collect();
    let closed_loop = closed
        .into_iter()
        .map(|(n, e)| (n, simp.simplify(dag, e)))
        .collect();
    if simp.exhausted() {
        return Err(error(
            "expansion-budget",
            format!(
                "expanding V̇ and the closed loop into canonical form needs more than {} term products (DagLimits::max_term_products)",
                dag.limits().max_term_products
            ),
            Some("raise it with --max-term-products, or keep a product of many sums (or a high power of one) out of the candidate and the laws"),
        ));
    }
    if dag.over_budget() {
        return Err(error(
            "node-budget",
            format!(
                "the derivation grew past {} expression nodes (DagLimits::max_nodes)",
                dag.limits().max_nodes
            ),
            Some("raise it with --max-nodes"),
        ));
    }
    Ok(Derivation {
        candidate,
        vdot,
        laws,
        actuators,
        updates,
        where_defs,
        closed_loop,
        assumptions: Vec::new(),
        work: simp.work(),
    })
}

/// V̇ of the law as flown: each input that an actuator sends (its command is the input plus
/// terms of no input, `thrust_cmd = thrust`, `pitch_cmd = gamma + alpha`) replaced in the
/// dynamics by the value the saturated command gives it, `clamp(command, lo, hi) − (command −
/// input)`. Update laws read the laws as computed (the generated code does). Returns V̇ in base
/// symbols, not simplified, or why the law cannot be saturated this way (an actuator whose
/// command is not its input plus terms of no input, or two actuators of one input).
pub fn saturated_vdot(spec: &mut Spec) -> Result<ExprId, String> {
    let dag = &mut spec.dag;
    let law_map: HashMap<String, ExprId> = substituted_laws(dag, &spec.laws).into_iter().collect();
    let inputs: Vec<String> = spec.laws.iter().map(|(n, _)| n.clone()).collect();
    let mut sat_map = law_map.clone();
    let mut covered: Vec<String> = Vec::new();
    for a in &spec.actuators {
        let used: Vec<String> = dag
            .symbols(a.law)
            .into_iter()
            .filter(|s| inputs.contains(s))
            .collect();
        let [input] = used.as_slice() else {
            return Err(format!(
                "actuator `{}` sends {} inputs; each must send one input plus terms of none",
                a.name,
                used.len()
            ));
        };
        let d = derivative(dag, a.law, input);
        let d = lawsmith_expr::simplify(dag, d, &mut lawsmith_expr::AssumeNothing);
        if !dag.is_one(d) {
            return Err(format!(
                "actuator `{}` is not its input `{input}` plus terms of no input",
                a.name
            ));
        }
        if covered.contains(input) {
            return Err(format!("input `{input}` is sent by two actuators"));
        }
        covered.push(input.clone());
        let command = dag.substitute(a.law, &law_map);
        let offset = dag.sub(command, law_map[input]);
        let lo = dag.num(a.limits.lo.exact().clone());
        let hi = dag.num(a.limits.hi.exact().clone());
        let clamped = dag.call(lawsmith_expr::Func::Clamp, vec![command, lo, hi]);
        let sat = dag.sub(clamped, offset);
        sat_map.insert(input.clone(), sat);
    }
    let true_values = true_values(dag, &spec.symbols);
    let closed = closed_loop(dag, &spec.dynamics, &true_values, &sat_map);
    let updates: Vec<(String, ExprId)> = spec
        .updates
        .iter()
        .map(|(m, u)| (m.clone(), dag.substitute(*u, &law_map)))
        .collect();
    vdot_along(dag, &spec.symbols, spec.candidate, &closed, &updates).map_err(|(_, m)| m)
}

/// The laws in order, each with the laws before it substituted.
fn substituted_laws(dag: &mut Dag, laws: &[(String, ExprId)]) -> Vec<(String, ExprId)> {
    let mut map: HashMap<String, ExprId> = HashMap::new();
    let mut out = Vec::new();
    for (input, law) in laws {
        let full = dag.substitute(*law, &map);
        map.insert(input.clone(), full);
        out.push((input.clone(), full));
    }
    out
}

/// Each state's dynamics with the true values and then the inputs substituted.
fn closed_loop(
    dag: &mut Dag,
    dynamics: &[(String, ExprId)],
    true_values: &HashMap<String, ExprId>,
    inputs: &HashMap<String, ExprId>,
) -> Vec<(String, ExprId)> {
    dynamics
        .iter()
        .map(|(s, f)| {
            let plant = dag.substitute(*f, true_values);
            (s.clone(), dag.substitute(plant, inputs))
        })
        .collect()
}

/// V̇ = Σ ∂V/∂s·ṡ over the symbols V depends on: a state's rate from `closed`, a reference's
/// (or a rate's) its declared rate, a controller state's its update law; parameters, gains
/// and unknowns are constant. Not simplified. An error is (class, message).
fn vdot_along(
    dag: &mut Dag,
    symbols: &[Symbol],
    v: ExprId,
    closed: &[(String, ExprId)],
    updates: &[(String, ExprId)],
) -> Result<ExprId, (&'static str, String)> {
    let mut terms = Vec::new();
    for name in dag.symbols(v) {
        let Some(sym) = symbols.iter().find(|s| s.name == name) else {
            continue;
        };
        let rate = match &sym.decl {
            Decl::State { .. } => closed
                .iter()
                .find(|(s, _)| *s == name)
                .map(|(_, f)| *f)
                .ok_or_else(|| {
                    (
                        "state-without-dynamics",
                        format!("state `{name}` has no dynamics"),
                    )
                })?,
            Decl::Reference { rate, .. }
            | Decl::Rate {
                rate: Some(rate), ..
            } => dag.sym(rate),
            Decl::Memory { .. } => updates
                .iter()
                .find(|(m, _)| *m == name)
                .map(|(_, u)| *u)
                .ok_or_else(|| {
                    (
                        "memory-without-update",
                        format!("controller state `{name}` has no update law"),
                    )
                })?,
            Decl::Parameter { .. } | Decl::Gain { .. } | Decl::Unknown { .. } => continue,
            _ => {
                return Err((
                    "no-rate",
                    format!(
                    "the candidate depends on `{name}`, a {} whose rate of change is not declared",
                    sym.kind().name()
                ),
                ))
            }
        };
        let dv = derivative(dag, v, &name);
        terms.push(dag.mul(vec![dv, rate]));
    }
    Ok(dag.add(terms))
}
