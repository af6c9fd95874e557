//! Lowering formulas into the DAG: names, definitions, `ref(…)`, `ddt(…)` and law order.

use super::Loader;
use crate::diag::Diagnostic;
use crate::model::{Decl, SymbolKind, Target};
use lawsmith_expr::{derivative, lower, Ast, Dag, ExprId, LowerError, Resolver, Span};
use std::collections::HashMap;

impl Loader<'_> {
    pub(super) fn lower_in(&mut self, dag: &mut Dag, ast: &Ast, ctx: &Ctx) -> Option<ExprId> {
        let mut errors = Vec::new();
        let id = {
            let mut r = SpecResolver { loader: self, ctx };
            lower(dag, ast, &mut r, &mut errors)
        };
        for e in errors {
            let span = self.file_span(ctx.base, &ctx.text, e.span);
            let mut d = Diagnostic::new(e.class, e.message, span).label("here");
            if let Some(h) = e.hint {
                d = d.hint(h);
            }
            self.err(d);
        }
        id
    }

    /// Lowers a definition once; later uses share the id.
    pub(super) fn lower_def(
        &mut self,
        dag: &mut Dag,
        name: &str,
        ctx_dyn: Option<&HashMap<String, ExprId>>,
    ) -> Option<ExprId> {
        let d = self.defs.get(name)?;
        if let Some(id) = d.lowered {
            return Some(id);
        }
        let (ast, base, text) = (d.ast.clone()?, d.base, d.text.clone());
        let ctx = Ctx {
            base,
            text,
            law_index: None,
            dynamics: ctx_dyn,
            plant: false,
        };
        let id = self.lower_in(dag, &ast, &ctx)?;
        self.defs.get_mut(name)?.lowered = Some(id);
        Some(id)
    }
}

pub(super) struct Ctx<'a> {
    pub(super) base: usize,
    pub(super) text: String,
    /// Lowering the law at this index: inputs of earlier laws may be used.
    pub(super) law_index: Option<usize>,
    /// Dynamics available to `ddt`.
    pub(super) dynamics: Option<&'a HashMap<String, ExprId>>,
    /// Lowering the plant's dynamics: uncertain quantities (true values) may be used.
    pub(super) plant: bool,
}

struct SpecResolver<'l, 's, 'c> {
    loader: &'l mut Loader<'s>,
    ctx: &'c Ctx<'c>,
}

impl Resolver for SpecResolver<'_, '_, '_> {
    fn symbol(&mut self, dag: &mut Dag, name: &str, span: Span) -> Result<ExprId, LowerError> {
        if self.loader.defs.contains_key(name) {
            let dynamics = self.ctx.dynamics;
            return self
                .loader
                .lower_def(dag, name, dynamics)
                .ok_or_else(|| LowerError {
                    class: "formula",
                    message: format!("definition `{name}` could not be resolved"),
                    span,
                    hint: None,
                });
        }
        let Some(sym) = self.loader.symbols.iter().find(|s| s.name == name) else {
            return Err(LowerError {
                class: "unknown-symbol",
                message: format!("unknown symbol `{name}`"),
                span,
                hint: None,
            });
        };
        if let (Decl::Uncertain { estimate, .. }, false) = (&sym.decl, self.ctx.plant) {
            return Err(LowerError {
                class: "uncertain-in-law",
                message: format!(
                    "`{name}` is the plant's true value, which the controller does not know; only the dynamics may use it"
                ),
                span,
                hint: Some(format!("use its estimate `{estimate}`")),
            });
        }
        if sym.kind() == SymbolKind::Input {
            // positions in the order of `laws:`, which is the evaluation order
            let idx = self.loader.law_order.iter().position(|i| i == name);
            if let (Some(idx), Some(li)) = (idx, self.ctx.law_index) {
                if idx >= li {
                    let which = if idx == li {
                        "its own law"
                    } else {
                        "a later law"
                    };
                    return Err(LowerError {
                        class: "law-order",
                        message: format!(
                            "`{name}` is computed by {which}; a law may use only the laws above it"
                        ),
                        span,
                        hint: Some(
                            "reorder the laws so that every law comes after the ones it uses"
                                .into(),
                        ),
                    });
                }
            }
        }
        Ok(dag.sym(name))
    }

    fn call(
        &mut self,
        dag: &mut Dag,
        name: &str,
        args: &[ExprId],
        span: Span,
    ) -> Option<Result<ExprId, LowerError>> {
        match name {
            "ref" => Some(Ok(self.reference_of(dag, args[0]))),
            "ddt" => Some(self.time_derivative(dag, args[0], span)),
            _ => None,
        }
    }

    fn extra_functions(&self) -> &[&str] {
        &["ref", "ddt"]
    }
}

impl SpecResolver<'_, '_, '_> {
    fn reference_of(&mut self, dag: &mut Dag, e: ExprId) -> ExprId {
        let mut map = HashMap::new();
        for s in &self.loader.symbols {
            let Decl::State { target, .. } = &s.decl else {
                continue;
            };
            let target = match target {
                Target::Reference(r) => dag.sym(r),
                Target::Equilibrium(eq) => dag.num(eq.exact().clone()),
            };
            map.insert(s.name.clone(), target);
        }
        dag.substitute(e, &map)
    }

    fn time_derivative(
        &mut self,
        dag: &mut Dag,
        e: ExprId,
        span: Span,
    ) -> Result<ExprId, LowerError> {
        let mut terms = Vec::new();
        for name in dag.symbols(e) {
            let kind = self
                .loader
                .symbols
                .iter()
                .find(|s| s.name == name)
                .map(|s| {
                    let rate = match &s.decl {
                        Decl::Reference { rate, .. } => Some(rate.clone()),
                        Decl::Rate { rate, .. } => rate.clone(),
                        _ => None,
                    };
                    (s.kind(), rate)
                });
            let rate = match kind {
                // constant in time: gains, parameters, unknown constants
                Some((SymbolKind::Parameter | SymbolKind::Gain | SymbolKind::Unknown, _)) => {
                    continue
                }
                Some((SymbolKind::Reference | SymbolKind::Rate, Some(rate))) => dag.sym(&rate),
                Some((SymbolKind::State, _)) => match self.ctx.dynamics.and_then(|d| d.get(&name)) {
                    Some(&f) => f,
                    None => {
                        return Err(LowerError {
                            class: "no-rate",
                            message: format!("ddt(…) needs the dynamics of `{name}`, which are not available here"),
                            span,
                            hint: Some("ddt of a state may be used in laws, definitions and the candidate, not inside the dynamics".into()),
                        })
                    }
                },
                Some((k, _)) => {
                    return Err(LowerError {
                        class: "no-rate",
                        message: format!("ddt(…) needs the time derivative of `{name}`, a {} with no declared rate", k.name()),
                        span,
                        hint: Some("only states (through their dynamics), references (through their rates), rates that declare an `accel`, gains, parameters and unknowns can be differentiated".into()),
                    })
                }
                None => continue,
            };
            let d = derivative(dag, e, &name);
            if dag.is_zero(d) {
                continue;
            }
            terms.push(dag.mul(vec![d, rate]));
        }
        Ok(match terms.len() {
            0 => dag.int(0),
            _ => dag.add(terms),
        })
    }
}
