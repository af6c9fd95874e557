//! Phases 2 to 4 of loading: the structure (dynamics for every state, a law for every
//! input), the dimensions of every formula, and the lowering into the DAG.

use super::dims::second;
use super::resolve::Ctx;
use super::{range_of, unknown, Loader, ParsedConstraint};
use crate::diag::Diagnostic;
use crate::model::*;
use crate::schema::*;
use crate::units::{degrees_to_radians, Dim};
use lawsmith_expr::{Ast, Dag, Decimal, ExprId};
use std::collections::HashMap;

/// A formula of a named thing: the name, the tree with the file offset of its text, the text.
pub(super) type Named = (String, (Ast, usize), String);

/// An actuator's formula: name, tree, offset, text, unit, limits.
pub(super) type ActuatorAst = (
    String,
    Ast,
    usize,
    String,
    String,
    Option<Range>,
    Option<f64>,
);

impl Loader<'_> {
    /// Each controller state's update law, parsed; one missing is reported.
    pub(super) fn update_laws(&mut self, raw: &RawSpec) -> Vec<Named> {
        let mut out = Vec::new();
        for (n, m) in &raw.memory.0 {
            match &m.update {
                Some(f) => {
                    if let Some(p) = self.parse_formula(f) {
                        out.push((n.value.clone(), p, f.value.clone()));
                    }
                }
                None => {
                    let span = self.name_span(n);
                    self.err(
                        Diagnostic::new(
                            "memory-without-update",
                            format!("controller state `{}` has no update law", n.value),
                            span,
                        )
                        .label("declared here")
                        .hint(format!("add `update: <formula for d{}/dt>` to it", n.value)),
                    );
                }
            }
        }
        out
    }

    pub(super) fn structure(&mut self, raw: &RawSpec) -> (Vec<Named>, Vec<Named>) {
        let states: Vec<String> = self.names_of(SymbolKind::State);
        let mut dyn_asts = Vec::new();
        for (n, f) in &raw.dynamics.0 {
            if !states.contains(&n.value) {
                let span = self.name_span(n);
                self.err(unknown(
                    "unknown-symbol",
                    &n.value,
                    "state",
                    span,
                    states.clone(),
                ));
                continue;
            }
            if let Some(p) = self.parse_formula(f) {
                dyn_asts.push((n.value.clone(), p, f.value.clone()));
            }
        }
        for (n, _) in &raw.states.0 {
            if !raw.dynamics.0.iter().any(|(k, _)| k.value == n.value) && states.contains(&n.value)
            {
                let span = self.name_span(n);
                self.err(
                    Diagnostic::new(
                        "state-without-dynamics",
                        format!("state `{}` has no dynamics", n.value),
                        span,
                    )
                    .label("declared here")
                    .hint(format!(
                        "add `{}: <formula for d{}/dt>` under `dynamics`",
                        n.value, n.value
                    )),
                );
            }
        }
        let mut law_asts = Vec::new();
        for (n, f) in &raw.laws.0 {
            if !self.inputs.contains(&n.value) {
                let span = self.name_span(n);
                self.err(unknown(
                    "unknown-symbol",
                    &n.value,
                    "input",
                    span,
                    self.inputs.clone(),
                ));
                continue;
            }
            if let Some(p) = self.parse_formula(f) {
                law_asts.push((n.value.clone(), p, f.value.clone()));
            }
        }
        self.law_order = law_asts.iter().map(|(n, _, _)| n.clone()).collect();
        for i in self.inputs.clone() {
            if !raw.laws.0.iter().any(|(k, _)| k.value == i) {
                let span = self.decl[&i].1.clone();
                self.err(
                    Diagnostic::new("input-without-law", format!("input `{i}` has no law"), span)
                        .label("declared here")
                        .hint(format!("add `{i}: <formula>` under `laws`")),
                );
            }
        }

        (dyn_asts, law_asts)
    }

    #[allow(clippy::type_complexity)]
    pub(super) fn dimensions(
        &mut self,
        raw: &RawSpec,
        def_order: &[String],
        dyn_asts: &[Named],
        law_asts: &[Named],
    ) -> (
        Option<(Ast, usize)>,
        Vec<ActuatorAst>,
        Vec<ParsedConstraint>,
    ) {
        // 3. dimensions (skipped after a bad unit, whose dimension is unknown: checking would
        //    only report consequences of the same typo)
        let bad_units = self.diags.iter().any(|d| d.class == "bad-unit");
        for name in def_order.iter().filter(|_| !bad_units) {
            self.def_dim(name, &mut Vec::new());
        }
        for (state, (ast, base), text) in dyn_asts.iter().filter(|_| !bad_units) {
            let want = self.dim_of_symbol(state).map(|d| d.div(&second()));
            self.expect_dim(ast, *base, text, want, &format!("dynamics of `{state}`"));
        }
        for (input, (ast, base), text) in law_asts.iter().filter(|_| !bad_units) {
            let want = self.dim_of_symbol(input);
            self.expect_dim(ast, *base, text, want, &format!("law for `{input}`"));
        }
        for (m, (ast, base), text) in self.updates.clone().iter().filter(|_| !bad_units) {
            let want = self.dim_of_symbol(m).map(|d| d.div(&second()));
            let got = self.dim(ast, *base, text, &mut Vec::new());
            if let (Some(g), Some(w)) = (got, want) {
                if g != w {
                    let span = self.file_span(*base, text, ast.span);
                    self.err(
                        Diagnostic::new(
                            "dimension",
                            format!("the update law of `{m}` is in {g} but should be in {w}"),
                            span,
                        )
                        .label(format!("this is {g}"))
                        .hint(format!(
                            "an update law is the time derivative of its controller state: the unit of `{m}` per second"
                        )),
                    );
                }
            }
        }
        let cand = self.parse_formula(&raw.lyapunov.candidate);
        if let Some((ast, base)) = &cand {
            self.dim(ast, *base, &raw.lyapunov.candidate.value, &mut Vec::new());
        }
        let mut act_asts = Vec::new();
        for (n, a) in &raw.actuators.0 {
            if !self.declare(n, SymbolKind::Command) {
                continue;
            }
            // an actuator in degrees: its command is an angle (in rad, as every formula is)
            // and its limits, written in degrees, are converted
            let degrees = a.unit.value.trim() == "deg";
            let dim = if degrees {
                Dim::one()
            } else {
                self.unit(&a.unit)
            };
            let mut limits = self.pair(&a.limits, "actuator limits");
            if let (true, Some(l)) = (degrees, &limits) {
                let rad = |d: &Decimal| Decimal::from_f64(degrees_to_radians(d.exact()));
                limits = Some(Range::new(rad(&l.lo), rad(&l.hi)));
            }
            let unit = if degrees {
                "rad".to_string()
            } else {
                a.unit.value.clone()
            };
            let safe = a.safe.as_ref().and_then(|v| {
                let value = if degrees {
                    degrees_to_radians(self.literal(v)?.exact())
                } else {
                    v.value
                };
                let inside = limits
                    .as_ref()
                    .is_none_or(|l| (l.lo.value()..=l.hi.value()).contains(&value));
                if !inside || !value.is_finite() {
                    self.err(
                        Diagnostic::new(
                            "safe-out-of-limits",
                            format!(
                                "the safe command {} of actuator `{}` is outside its limits",
                                v.value, n.value
                            ),
                            range_of(self.src, v),
                        )
                        .label("outside the limits"),
                    );
                    return None;
                }
                Some(value)
            });
            if let Some((ast, base)) = self.parse_formula(&a.law) {
                self.expect_dim(
                    &ast,
                    base,
                    &a.law.value,
                    Some(dim),
                    &format!("actuator `{}`", n.value),
                );
                act_asts.push((
                    n.value.clone(),
                    ast,
                    base,
                    a.law.value.clone(),
                    unit,
                    limits,
                    safe,
                ));
            }
        }
        let mut constraint_asts = Vec::new();
        for c in &raw.constraints {
            if let Some(parsed) = self.parse_constraint(c) {
                constraint_asts.push(parsed);
            }
        }

        (cand, act_asts, constraint_asts)
    }

    #[allow(clippy::type_complexity)]
    pub(super) fn lower_model(
        &mut self,
        dag: &mut Dag,
        raw: &RawSpec,
        dyn_asts: &[Named],
        law_asts: &[Named],
        cand: &Option<(Ast, usize)>,
    ) -> (
        Vec<(String, ExprId)>,
        Vec<(String, ExprId)>,
        Vec<(String, ExprId)>,
        Option<ExprId>,
    ) {
        let mut dynamics = Vec::new();
        for (state, (ast, base), text) in dyn_asts {
            let ctx = Ctx {
                base: *base,
                text: text.clone(),
                law_index: None,
                dynamics: None,
                plant: true,
            };
            if let Some(id) = self.lower_in(dag, ast, &ctx) {
                dynamics.push((state.clone(), id));
            }
        }
        let dyn_map: HashMap<String, ExprId> = dynamics.iter().cloned().collect();
        let mut laws = Vec::new();
        for (i, (input, (ast, base), text)) in law_asts.iter().enumerate() {
            let ctx = Ctx {
                base: *base,
                text: text.clone(),
                law_index: Some(i),
                dynamics: Some(&dyn_map),
                plant: false,
            };
            if let Some(id) = self.lower_in(dag, ast, &ctx) {
                self.no_true_values(
                    dag,
                    id,
                    (*base, text),
                    &format!("the law for `{input}`"),
                    true,
                );
                self.no_law_loop(dag, id, i, *base, text);
                laws.push((input.clone(), id));
            }
        }
        // update laws read what the laws read, and the laws' outputs
        let mut updates = Vec::new();
        for (m, (ast, base), text) in self.updates.clone() {
            let ctx = Ctx {
                base,
                text: text.clone(),
                law_index: Some(law_asts.len()),
                dynamics: Some(&dyn_map),
                plant: false,
            };
            if let Some(id) = self.lower_in(dag, &ast, &ctx) {
                self.no_true_values(
                    dag,
                    id,
                    (base, &text),
                    &format!("the update law of `{m}`"),
                    true,
                );
                updates.push((m.clone(), id));
            }
        }
        let mut candidate = None;
        if let Some((ast, base)) = &cand {
            let ctx = Ctx {
                base: *base,
                text: raw.lyapunov.candidate.value.clone(),
                law_index: None,
                dynamics: Some(&dyn_map),
                plant: false,
            };
            candidate = self.lower_in(dag, ast, &ctx);
            if let Some(id) = candidate {
                let text = raw.lyapunov.candidate.value.clone();
                self.no_true_values(dag, id, (*base, &text), "the candidate", false);
            }
        }
        (dynamics, laws, updates, candidate)
    }

    pub(super) fn lower_outputs(
        &mut self,
        dag: &mut Dag,
        act_asts: &[ActuatorAst],
        constraint_asts: &[ParsedConstraint],
        dynamics: &[(String, ExprId)],
        n_laws: usize,
    ) -> (Vec<Actuator>, Vec<Constraint>) {
        let dyn_map: HashMap<String, ExprId> = dynamics.iter().cloned().collect();
        let mut actuators = Vec::new();
        for (name, ast, base, text, unit, limits, safe) in act_asts {
            let ctx = Ctx {
                base: *base,
                text: text.clone(),
                law_index: Some(n_laws),
                dynamics: Some(&dyn_map),
                plant: false,
            };
            if let (Some(id), Some(l)) = (self.lower_in(dag, ast, &ctx), limits) {
                self.no_true_values(dag, id, (*base, text), &format!("actuator `{name}`"), true);
                actuators.push(Actuator {
                    name: name.clone(),
                    law: id,
                    unit: unit.clone(),
                    limits: l.clone(),
                    safe: *safe,
                });
            }
        }
        let mut constraints = Vec::new();
        for (text, (la, lb), op, (ra, rb)) in constraint_asts {
            let ctx_l = Ctx {
                base: *lb,
                text: text.clone(),
                law_index: None,
                dynamics: None,
                plant: false,
            };
            let l = self.lower_in(dag, la, &ctx_l);
            let ctx_r = Ctx {
                base: *rb,
                text: text.clone(),
                law_index: None,
                dynamics: None,
                plant: false,
            };
            let r = self.lower_in(dag, ra, &ctx_r);
            if let (Some(lhs), Some(rhs)) = (l, r) {
                for s in dag.symbols(lhs).into_iter().chain(dag.symbols(rhs)) {
                    if !matches!(
                        self.decl.get(&s).map(|d| d.0),
                        Some(SymbolKind::Gain | SymbolKind::Parameter)
                    ) {
                        self.err(Diagnostic::new(
                            "bad-constraint",
                            format!("constraint `{text}` uses `{s}`; constraints relate gains and parameters only"),
                            *lb..*lb + text.len(),
                        ));
                    }
                }
                constraints.push(Constraint {
                    text: text.clone(),
                    lhs,
                    op: op.clone(),
                    rhs,
                });
            }
        }
        (actuators, constraints)
    }
}
