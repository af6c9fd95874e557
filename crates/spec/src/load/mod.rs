//! Loading: YAML → raw schema → checked names, units and ranges → dimension-checked, lowered
//! formulas. Every problem found is collected; loading fails only at the end.

mod build;
mod declare;
mod dims;
mod resolve;

use crate::diag::Diagnostic;
use crate::model::Range as Bounds;
use crate::model::*;
use crate::names::{identifier_problem, reserved_reason};
use crate::schema::*;
use crate::units::{parse_unit, Dim};
use lawsmith_expr::{nearest, parse_with, Ast, Dag, ExprId, ParseSettings, Span};
use serde_saphyr::Spanned;
use std::collections::HashMap;
use std::ops::Range;

/// Largest spec file accepted, in bytes. Real specs are a few kilobytes; the bound keeps a
/// runaway file from being parsed at all.
pub const MAX_SPEC_BYTES: usize = 4 << 20;

/// Loads and validates a spec from its YAML text, collecting every diagnostic.
pub fn load(source: &str) -> Result<Spec, Vec<Diagnostic>> {
    if source.len() > MAX_SPEC_BYTES {
        return Err(vec![Diagnostic::new(
            "too-large",
            format!(
                "the spec is {} bytes; the limit is {} bytes",
                source.len(),
                MAX_SPEC_BYTES
            ),
            0..0,
        )
        .hint("split the file or remove generated content")]);
    }
    // A first pass that only walks the document: alias bombs and other budget breaches are
    // reported as such, before any type error in the first field could hide them.
    if let Err(e) = serde_saphyr::from_str::<serde::de::IgnoredAny>(source) {
        return Err(vec![yaml_diagnostic(source, &e)]);
    }
    let raw: RawSpec = match serde_saphyr::from_str(source) {
        Ok(r) => r,
        Err(e) => return Err(vec![yaml_diagnostic(source, &e)]),
    };
    let mut l = Loader {
        src: source,
        diags: Vec::new(),
        decl: HashMap::new(),
        symbols: Vec::new(),
        defs: HashMap::new(),
        def_dims: HashMap::new(),
        inputs: Vec::new(),
        law_order: Vec::new(),
        updates: Vec::new(),
    };
    l.run(raw).map_err(|()| l.diags.clone()).and_then(|spec| {
        if l.diags.is_empty() {
            Ok(spec)
        } else {
            Err(l.diags.clone())
        }
    })
}

fn yaml_diagnostic(source: &str, e: &serde_saphyr::Error) -> Diagnostic {
    let text = e.without_snippet().to_string();
    let message = text.lines().next().unwrap_or("invalid YAML").to_string();
    let offset = e
        .location()
        .map(|loc| offset_of(source, loc.line() as usize, loc.column() as usize))
        .unwrap_or(0);
    if let Some(rest) = message.strip_prefix("duplicate mapping key: ") {
        let key = rest.split(',').next().unwrap_or(rest).trim();
        return Diagnostic::new(
            "duplicate-name",
            format!("`{key}` appears twice in the same mapping"),
            offset..offset + key.len().max(1),
        )
        .label("second occurrence")
        .hint("YAML keeps only one of them; remove or rename the other");
    }
    let class = if message.contains("non-finite float") {
        "non-finite"
    } else if message.contains("budget") || message.contains("alias") {
        "yaml-budget"
    } else if message.contains("unknown field") || message.contains("missing field") {
        "schema"
    } else {
        "bad-yaml"
    };
    let mut d = Diagnostic::new(class, message, offset..offset + 1);
    if class == "schema" {
        d = d.hint("see the spec format in README.md; keys are case-sensitive");
    }
    if class == "non-finite" {
        d = d.hint("write a finite decimal number; a proof needs bounded ranges and values");
    }
    d
}

/// Byte offset of a 1-based line and column.
fn offset_of(source: &str, line: usize, column: usize) -> usize {
    let mut off = 0;
    for (i, l) in source.split_inclusive('\n').enumerate() {
        if i + 1 == line {
            let col = l
                .char_indices()
                .nth(column.saturating_sub(1))
                .map_or(l.len(), |(b, _)| b);
            return off + col;
        }
        off += l.len();
    }
    source.len()
}

/// A constraint's text, its two sides (each with the file offset of its text) and operator.
type ParsedConstraint = (String, (Ast, usize), String, (Ast, usize));

struct Def {
    ast: Option<Ast>,
    base: usize,
    text: String,
    lowered: Option<ExprId>,
}

struct Loader<'s> {
    src: &'s str,
    diags: Vec<Diagnostic>,
    /// name → (kind, declaration span)
    decl: HashMap<String, (SymbolKind, Range<usize>)>,
    symbols: Vec<Symbol>,
    defs: HashMap<String, Def>,
    def_dims: HashMap<String, Option<Dim>>,
    inputs: Vec<String>,
    /// The inputs in the order of `laws:` (the evaluation order).
    law_order: Vec<String>,
    /// The controller states' update laws, parsed.
    updates: Vec<build::Named>,
}

/// Where a formula's text starts in the file, so formula offsets become file offsets.
fn scalar_base(src: &str, s: &SpannedStr) -> usize {
    let loc = s.referenced;
    let span = loc.span();
    let off = span
        .byte_offset()
        .map(|b| b as usize)
        .unwrap_or_else(|| offset_of(src, loc.line() as usize, loc.column() as usize));
    let off = off.min(src.len());
    match src[off..].chars().next() {
        Some('"') | Some('\'') => off + 1,
        _ => off,
    }
}

fn range_of<T>(src: &str, s: &Spanned<T>) -> Range<usize> {
    let loc = s.referenced;
    let off = loc
        .span()
        .byte_offset()
        .map(|b| b as usize)
        .unwrap_or_else(|| offset_of(src, loc.line() as usize, loc.column() as usize))
        .min(src.len());
    let len = loc.span().byte_len().map_or(1, |l| l as usize).max(1);
    off..(off + len).min(src.len())
}

impl<'s> Loader<'s> {
    fn err(&mut self, d: Diagnostic) {
        self.diags.push(d);
    }

    fn name_span(&self, s: &SpannedStr) -> Range<usize> {
        let b = scalar_base(self.src, s);
        b..(b + s.value.len()).min(self.src.len())
    }

    fn declare(&mut self, name: &SpannedStr, kind: SymbolKind) -> bool {
        let span = self.name_span(name);
        let n = &name.value;
        if let Some(p) = identifier_problem(n) {
            self.err(Diagnostic::new("bad-name", p, span).label("not a valid name"));
            return false;
        }
        if let Some(r) = reserved_reason(n) {
            self.err(
                Diagnostic::new("reserved-word", r, span)
                    .label("reserved")
                    .hint(format!("rename it, e.g. `{n}_v`")),
            );
            return false;
        }
        if let Some((k, first)) = self.decl.get(n) {
            let (line, _) = Diagnostic::new("", "", first.clone()).line_col(self.src);
            let msg = format!(
                "`{n}` is declared twice (first as a {} on line {line})",
                k.name()
            );
            self.err(Diagnostic::new("duplicate-name", msg, span).label("second declaration"));
            return false;
        }
        self.decl.insert(n.clone(), (kind, span));
        true
    }

    fn unit(&mut self, u: &SpannedStr) -> Dim {
        match parse_unit(&u.value) {
            Ok(d) => d,
            Err((at, msg)) => {
                let b = scalar_base(self.src, u) + at;
                self.err(Diagnostic::new("bad-unit", msg, b..b + 1).label("here"));
                Dim::one()
            }
        }
    }

    fn parse_formula(&mut self, f: &SpannedStr) -> Option<(Ast, usize)> {
        let base = scalar_base(self.src, f);
        let settings = ParseSettings::default();
        match parse_with(&f.value, &settings) {
            Ok(ast) => Some((ast, base)),
            Err(e) => {
                let at = self.file_span(base, &f.value, e.span);
                self.err(Diagnostic::new("syntax", e.message, at).label("here"));
                None
            }
        }
    }

    /// File range of a span inside a formula whose text starts at `base`.
    fn file_span(&self, base: usize, text: &str, s: Span) -> Range<usize> {
        if self.src.get(base..base + text.len()) == Some(text) {
            let end = (base + s.end.max(s.start + 1)).min(self.src.len());
            (base + s.start).min(self.src.len())..end
        } else {
            base..base + 1
        }
    }

    /// The four phases: declarations, structure, dimensions, lowering; each collects its
    /// problems, and a phase runs only on what the ones before it could read.
    fn run(&mut self, raw: RawSpec) -> Result<Spec, ()> {
        // 1. declarations
        let (def_order, guidance_cmds) = self.declarations(&raw);
        let claim = self.claim(&raw);
        // 2. structure: dynamics for every state, a law for every input
        let (dyn_asts, law_asts) = self.structure(&raw);
        self.updates = self.update_laws(&raw);
        // 3. dimensions
        let (cand, act_asts, constraint_asts) =
            self.dimensions(&raw, &def_order, &dyn_asts, &law_asts);
        if !self.diags.is_empty() {
            return Err(());
        }
        // 4. lowering, in dependency order: dynamics, definitions, laws
        let mut dag = Dag::new();
        let (dynamics, laws, updates, candidate) =
            self.lower_model(&mut dag, &raw, &dyn_asts, &law_asts, &cand);
        let (actuators, constraints) = self.lower_outputs(
            &mut dag,
            &act_asts,
            &constraint_asts,
            &dynamics,
            law_asts.len(),
        );
        let where_defs = raw
            .lyapunov
            .where_
            .0
            .iter()
            .filter_map(|(n, _)| Some((n.value.clone(), self.defs.get(&n.value)?.lowered?)))
            .collect();
        let energies = raw
            .energies
            .0
            .iter()
            .filter_map(|(n, _)| Some((n.value.clone(), self.defs.get(&n.value)?.lowered?)))
            .collect();
        if dag.over_budget() {
            self.err(Diagnostic::new(
                "budget",
                format!(
                    "the formulas grew past {} expression nodes",
                    dag.limits().max_nodes
                ),
                0..0,
            ));
        }
        if !self.diags.is_empty() {
            return Err(());
        }
        if !constraints.is_empty() {
            self.check_gain_set(&dag, &constraints, &raw.constraints);
        }
        Ok(Spec {
            name: raw.name.value.clone(),
            summary: raw.summary.clone(),
            assumptions: raw.assumptions.clone(),
            symbols: std::mem::take(&mut self.symbols),
            dag,
            dynamics,
            energies,
            where_defs,
            candidate: candidate.ok_or(())?,
            candidate_span: {
                let f = &raw.lyapunov.candidate;
                let base = scalar_base(self.src, f);
                self.file_span(
                    base,
                    &f.value,
                    Span {
                        start: 0,
                        end: f.value.len(),
                    },
                )
            },
            claim,
            laws,
            updates,
            constraints,
            actuators,
            guidance: guidance_cmds,
        })
    }

    /// Reports a formula of the controller (or the candidate) that came to depend on a true
    /// value through `ddt(…)` of a state, whose dynamics use it; and, for the controller
    /// (`unknowns`), on a constant unknown.
    fn no_true_values(
        &mut self,
        dag: &Dag,
        id: ExprId,
        (base, text): (usize, &str),
        what: &str,
        unknowns: bool,
    ) {
        let kind = |s: &String| self.decl.get(s).map(|d| d.0);
        let symbols = dag.symbols(id);
        if let Some(u) = symbols
            .iter()
            .find(|s| unknowns && kind(s) == Some(SymbolKind::Unknown))
        {
            self.err(
                Diagnostic::new(
                    "uncertain-in-law",
                    format!(
                        "{what} depends on `{u}`, a constant the controller does not know; only the dynamics and the candidate may use it"
                    ),
                    base..base + text.len().max(1),
                )
                .label("uses an unknown")
                .hint("estimate it with a controller state (`estimates:` under `memory`) and use the estimate"),
            );
            return;
        }
        let used: Vec<&String> = symbols
            .iter()
            .filter(|s| kind(s) == Some(SymbolKind::Uncertain))
            .collect();
        if let Some(u) = used.first() {
            self.err(
                Diagnostic::new(
                    "uncertain-in-law",
                    format!(
                        "{what} depends on `{u}`, the plant's true value, through ddt(…) of a state whose dynamics use it"
                    ),
                    base..base + text.len().max(1),
                )
                .label("uses the true dynamics")
                .hint("write the derivative from estimates, e.g. ddt(ref(…)), or move the true value out of the dynamics"),
            );
        }
    }

    /// Reports a law that came to depend on its own input or a later one through `ddt(…)` of
    /// a state whose dynamics use it: an equation in that input, not a formula to evaluate.
    fn no_law_loop(&mut self, dag: &Dag, id: ExprId, index: usize, base: usize, text: &str) {
        let input = &self.law_order[index];
        let later = dag.symbols(id).into_iter().find(|s| {
            self.law_order
                .iter()
                .position(|i| i == s)
                .is_some_and(|k| k >= index)
        });
        if let Some(u) = later {
            let which = if &u == input {
                "itself".to_string()
            } else {
                format!("`{u}`, a later law")
            };
            let msg = format!(
                "the law for `{input}` depends on {which} through ddt(…) of a state whose dynamics use `{u}`"
            );
            self.err(
                Diagnostic::new("law-loop", msg, base..base + text.len().max(1))
                    .label("an equation in the law's own output, not a formula")
                    .hint("write the derivative from references and earlier laws, e.g. ddt(ref(e_tot)), or reorder the laws"),
            );
        }
    }

    fn names_of(&self, kind: SymbolKind) -> Vec<String> {
        self.symbols
            .iter()
            .filter(|s| s.kind() == kind)
            .map(|s| s.name.clone())
            .collect()
    }

    fn dim_of_symbol(&self, name: &str) -> Option<Dim> {
        self.symbols.iter().find(|s| s.name == name).map(|s| s.dim)
    }

    fn parse_constraint(&mut self, c: &SpannedStr) -> Option<ParsedConstraint> {
        let text = &c.value;
        let base = scalar_base(self.src, c);
        let ops = ["<=", ">=", "<", ">"];
        let Some((pos, op)) = ops
            .iter()
            .filter_map(|op| text.find(op).map(|p| (p, *op)))
            .min_by_key(|(p, _)| *p)
        else {
            self.err(
                Diagnostic::new(
                    "bad-constraint",
                    format!("constraint `{text}` has no comparison"),
                    base..base + text.len().max(1),
                )
                .hint("write e.g. `k_tot < k_bal`"),
            );
            return None;
        };
        let (l, r) = (&text[..pos], &text[pos + op.len()..]);
        let mut side = |s: &str, off: usize| -> Option<(Ast, usize)> {
            match parse_with(s, &ParseSettings::default()) {
                Ok(a) => Some((a, base + off)),
                Err(e) => {
                    let at = base + off + e.span.start;
                    self.err(Diagnostic::new("syntax", e.message, at..at + 1).label("here"));
                    None
                }
            }
        };
        let lhs = side(l, 0)?;
        let rhs = side(r, pos + op.len())?;
        let dl = self.dim(&lhs.0, lhs.1, l, &mut Vec::new());
        let dr = self.dim(&rhs.0, rhs.1, r, &mut Vec::new());
        if let (Some(a), Some(b)) = (dl, dr) {
            if a != b {
                self.err(Diagnostic::new(
                    "dimension",
                    format!("constraint `{text}` compares {a} with {b}"),
                    base..base + text.len(),
                ));
            }
        }
        Some((text.clone(), lhs, op.to_string(), rhs))
    }

    /// Reports an empty gain set: no point of a grid over the gain box meets every constraint.
    fn check_gain_set(&mut self, dag: &Dag, constraints: &[Constraint], raw: &[SpannedStr]) {
        let gains: Vec<&Symbol> = self
            .symbols
            .iter()
            .filter(|s| s.kind() == SymbolKind::Gain)
            .collect();
        // 9 points per gain, capped at ~60,000 points overall
        let per = match gains.len() {
            0..=4 => 9usize,
            5 => 8,
            6 => 6,
            _ => 4,
        };
        let total = per
            .checked_pow(gains.len() as u32)
            .unwrap_or(usize::MAX)
            .min(1 << 20);
        let mut env: HashMap<String, f64> = self
            .symbols
            .iter()
            .filter_map(|s| match &s.decl {
                Decl::Parameter { value } => Some((s.name.clone(), value.value())),
                _ => None,
            })
            .collect();
        for k in 0..total {
            let mut idx = k;
            for g in &gains {
                let Some((lo, hi)) = g.range().map(Bounds::nearest) else {
                    continue;
                };
                let t = (idx % per) as f64 / (per - 1) as f64;
                idx /= per;
                env.insert(g.name.clone(), lo + t * (hi - lo));
            }
            let all = constraints.iter().all(|c| {
                let (l, r) = (
                    lawsmith_expr::eval(dag, c.lhs, &env).unwrap_or(f64::NAN),
                    lawsmith_expr::eval(dag, c.rhs, &env).unwrap_or(f64::NAN),
                );
                match c.op.as_str() {
                    "<" => l < r,
                    "<=" => l <= r,
                    ">" => l > r,
                    _ => l >= r,
                }
            });
            if all {
                return;
            }
        }
        let span = raw.first().map(|c| self.name_span(c)).unwrap_or(0..0);
        self.err(
            Diagnostic::new(
                "empty-gain-set",
                format!("no gain vector in the declared ranges meets the constraints (searched a grid of {total} points)"),
                span,
            )
            .label("unsatisfiable with the gain ranges")
            .hint("widen the gain ranges or relax the constraints"),
        );
    }
}

/// The range held by a symbol whose declared range was refused (the diagnostic is already
/// recorded, so the spec is never returned with it).
fn placeholder() -> Bounds {
    Bounds::from_f64(0.0, 0.0)
}

fn unknown(
    class: &'static str,
    name: &str,
    kind: &str,
    span: Range<usize>,
    names: Vec<String>,
) -> Diagnostic {
    let article = if kind.starts_with(['a', 'e', 'i', 'o', 'u']) {
        "an"
    } else {
        "a"
    };
    let mut d = Diagnostic::new(class, format!("`{name}` is not a declared {kind}"), span)
        .label(format!("not {article} {kind}"));
    if let Some(s) = nearest(name, names.iter().map(String::as_str)) {
        d = d.hint(format!("did you mean `{s}`?"));
    } else if !names.is_empty() {
        d = d.hint(format!("declared: {}", names.join(", ")));
    }
    d
}
