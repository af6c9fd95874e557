//! Loading: YAML → raw schema → checked names, units and ranges → dimension-checked, lowered
//! formulas. Every problem found is collected; loading fails only at the end.

mod dims;
mod resolve;

use crate::diag::Diagnostic;
use crate::model::Range as Bounds;
use crate::model::*;
use crate::names::{identifier_problem, reserved_reason};
use crate::schema::*;
use crate::units::{parse_unit, Dim};
use dims::second;
use lawsmith_expr::{nearest, parse_with, Ast, Dag, Decimal, ExprId, ParseSettings, Span};
use resolve::Ctx;
use serde_saphyr::Spanned;
use std::collections::{HashMap, HashSet};
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

    /// A `[min, max]` range, each end read as the decimal it was written as.
    fn pair(&mut self, r: &RawRange, what: &str) -> Option<Bounds> {
        let span = range_of(self.src, r);
        if r.value.len() != 2 {
            self.err(
                Diagnostic::new(
                    "bad-range",
                    format!("{what} needs two numbers, [min, max]"),
                    span,
                )
                .label(format!("{} number(s)", r.value.len())),
            );
            return None;
        }
        let (lo, hi) = (r.value[0].value, r.value[1].value);
        if !lo.is_finite() || !hi.is_finite() {
            self.err(Diagnostic::new(
                "bad-range",
                format!("{what} must be finite"),
                span,
            ));
            return None;
        }
        let (dl, dh) = (self.literal(&r.value[0])?, self.literal(&r.value[1])?);
        if dl.exact() > dh.exact() {
            self.err(
                Diagnostic::new(
                    "range-order",
                    format!("{what} [{lo}, {hi}] has min > max"),
                    span,
                )
                .label("empty range")
                .hint(format!("write [{hi}, {lo}]")),
            );
            return None;
        }
        Some(Bounds::new(dl, dh))
    }

    /// The exact decimal a (finite) number was written as: its text in the file, read
    /// exactly. An integer in another notation (`0x10`) is its f64, exact below 2^53.
    fn literal(&mut self, n: &Spanned<f64>) -> Option<Decimal> {
        let span = range_of(self.src, n);
        let text = self.src.get(span.clone()).unwrap_or("");
        match Decimal::parse(text) {
            Some(d) if d.value() == n.value => return Some(d),
            _ => {}
        }
        if n.value.fract() == 0.0 && n.value.abs() <= 9_007_199_254_740_992.0 {
            return Some(Decimal::binary(n.value));
        }
        self.err(
            Diagnostic::new(
                "bad-number",
                format!("`{text}` is not a decimal number lawsmith can read exactly"),
                span,
            )
            .hint("write it with digits, a decimal point and an exponent, e.g. 1.5e-3"),
        );
        None
    }

    fn push_symbol(&mut self, name: &str, unit: &str, dim: Dim, decl: Decl) -> usize {
        self.symbols.push(Symbol {
            name: name.to_string(),
            unit: unit.to_string(),
            dim,
            decl,
        });
        self.symbols.len() - 1
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

    fn run(&mut self, raw: RawSpec) -> Result<Spec, ()> {
        // 1. declarations
        for (n, p) in &raw.parameters.0 {
            let ok = self.declare(n, SymbolKind::Parameter);
            let dim = self.unit(&p.unit);
            if ok {
                let value = if p.value.value.is_finite() {
                    self.literal(&p.value)
                } else {
                    let span = range_of(self.src, &p.value);
                    self.err(Diagnostic::new(
                        "bad-number",
                        "parameter value must be finite",
                        span,
                    ));
                    None
                };
                // a placeholder only where an error is already reported: the spec is refused
                let value = value.unwrap_or_else(|| Decimal::from_f64(0.0));
                self.push_symbol(&n.value, &p.unit.value, dim, Decl::Parameter { value });
            }
        }
        for (n, g) in &raw.gains.0 {
            let ok = self.declare(n, SymbolKind::Gain);
            let dim = self.unit(&g.unit);
            let range = self.pair(&g.range, "gain range");
            if ok {
                let default = g.default.as_ref().map(|d| d.value);
                self.push_symbol(
                    &n.value,
                    &g.unit.value,
                    dim,
                    Decl::Gain {
                        range: range.clone().unwrap_or_else(placeholder),
                        default,
                    },
                );
                if let (Some(d), Some((lo, hi))) = (&g.default, range.map(|r| r.nearest())) {
                    if !(lo..=hi).contains(&d.value) {
                        let span = range_of(self.src, d);
                        self.err(
                            Diagnostic::new(
                                "default-out-of-range",
                                format!(
                                    "default {} is outside the gain range [{lo}, {hi}]",
                                    d.value
                                ),
                                span,
                            )
                            .label("outside the range"),
                        );
                    }
                }
            }
        }
        for (n, r) in &raw.references.0 {
            let ok = self.declare(n, SymbolKind::Reference);
            let dim = self.unit(&r.unit);
            let range = self.pair(&r.range, "reference range");
            let rate_range = self.pair(&r.rate_range, "rate range");
            let rate_ok = self.declare(&r.rate, SymbolKind::Rate);
            if ok {
                self.push_symbol(
                    &n.value,
                    &r.unit.value,
                    dim,
                    Decl::Reference {
                        range: range.unwrap_or_else(placeholder),
                        rate: r.rate.value.clone(),
                    },
                );
            }
            if rate_ok {
                let u = r.unit.value.trim();
                // `m` gives `m/s`; a compound unit is parenthesised: `(m/s)/s`
                let unit = if u.chars().all(|c| c.is_ascii_alphanumeric() || c == '^') {
                    format!("{u}/s")
                } else {
                    format!("({u})/s")
                };
                let rd = dim.div(&parse_unit("s").expect("s is a unit"));
                self.push_symbol(
                    &r.rate.value,
                    &unit,
                    rd,
                    Decl::Rate {
                        range: rate_range.unwrap_or_else(placeholder),
                        reference: n.value.clone(),
                    },
                );
            }
        }
        let mut tracked: HashSet<String> = HashSet::new();
        for (n, s) in &raw.states.0 {
            let ok = self.declare(n, SymbolKind::State);
            let dim = self.unit(&s.unit);
            let mut error = self.pair(&s.error, "error box");
            if let Some((lo, hi)) = error.as_ref().map(Bounds::nearest) {
                let zero = lawsmith_expr::BigRational::default();
                let inside = error
                    .as_ref()
                    .is_some_and(|e| e.lo.exact() < &zero && &zero < e.hi.exact());
                if !inside {
                    self.err(
                        Diagnostic::new(
                            "empty-error-box",
                            format!(
                                "the error box [{lo}, {hi}] of `{}` does not hold zero error inside it",
                                n.value
                            ),
                            range_of(self.src, &s.error),
                        )
                        .label("min must be below 0 and max above")
                        .hint("the proof is about errors around zero; write e.g. [-1, 1]"),
                    );
                    error = None;
                }
            }
            if let (Some(r), Some(e)) = (&s.reference, &s.equilibrium) {
                let _ = r;
                let span = range_of(self.src, e);
                self.err(
                    Diagnostic::new(
                        "state-target",
                        format!("state `{}` has both a reference and an equilibrium", n.value),
                        span,
                    )
                    .hint("keep one: `reference:` for a tracked state, `equilibrium:` for a regulated one"),
                );
            }
            if let Some(r) = &s.reference {
                let span = self.name_span(r);
                match raw.references.0.iter().find(|(k, _)| k.value == r.value) {
                    None => {
                        let names = raw.references.0.iter().map(|(k, _)| k.value.as_str());
                        let mut d = Diagnostic::new(
                            "unknown-symbol",
                            format!(
                                "state `{}` tracks `{}`, which is not a declared reference",
                                n.value, r.value
                            ),
                            span,
                        )
                        .label("not declared under `references`");
                        if let Some(s) = nearest(&r.value, names) {
                            d = d.hint(format!("did you mean `{s}`?"));
                        }
                        self.err(d);
                    }
                    Some((_, rr)) => {
                        if !tracked.insert(r.value.clone()) {
                            self.err(Diagnostic::new(
                                "duplicate-name",
                                format!("reference `{}` is tracked by two states", r.value),
                                span.clone(),
                            ));
                        }
                        let rdim = parse_unit(&rr.unit.value).unwrap_or_default();
                        if rdim != dim {
                            self.err(
                                Diagnostic::new(
                                    "dimension",
                                    format!(
                                        "state `{}` is in {} but its reference `{}` is in {}",
                                        n.value, dim, r.value, rdim
                                    ),
                                    span,
                                )
                                .label("unit differs"),
                            );
                        }
                    }
                }
            }
            if ok {
                let target = match (&s.reference, &s.equilibrium) {
                    (Some(r), _) => Target::Reference(r.value.clone()),
                    (None, None) => Target::Equilibrium(Decimal::from_f64(0.0)),
                    (None, Some(e)) if e.value.is_finite() => Target::Equilibrium(
                        self.literal(e).unwrap_or_else(|| Decimal::from_f64(0.0)),
                    ),
                    (None, Some(e)) => {
                        let span = range_of(self.src, e);
                        self.diags.push(Diagnostic::new(
                            "bad-number",
                            "the equilibrium must be finite",
                            span,
                        ));
                        Target::Equilibrium(Decimal::from_f64(0.0))
                    }
                };
                self.push_symbol(
                    &n.value,
                    &s.unit.value,
                    dim,
                    Decl::State {
                        target,
                        error: error.unwrap_or_else(placeholder),
                    },
                );
            }
        }
        for (n, _) in &raw.references.0 {
            if !tracked.contains(&n.value) {
                let span = self.name_span(n);
                self.err(
                    Diagnostic::new(
                        "reference-without-state",
                        format!("reference `{}` is not tracked by any state", n.value),
                        span,
                    )
                    .label("unused reference")
                    .hint("add `reference: NAME` to the state that follows it, or remove it"),
                );
            }
        }
        for (n, s) in &raw.signals.0 {
            let ok = self.declare(n, SymbolKind::Signal);
            let dim = self.unit(&s.unit);
            let range = self.pair(&s.range, "signal range");
            if ok {
                self.push_symbol(
                    &n.value,
                    &s.unit.value,
                    dim,
                    Decl::Signal {
                        range: range.unwrap_or_else(placeholder),
                    },
                );
            }
        }
        for (n, s) in &raw.inputs.0 {
            let ok = self.declare(n, SymbolKind::Input);
            let dim = self.unit(&s.unit);
            if ok {
                self.push_symbol(&n.value, &s.unit.value, dim, Decl::Input);
                self.inputs.push(n.value.clone());
            }
        }
        for (n, u) in &raw.uncertain.0 {
            self.declare_uncertain(n, u);
        }
        // definitions: energies and `where` names share one namespace with the symbols; they
        // are declared with the `Command` kind (never an input of a formula) and recognised
        // through `defs`
        let mut def_order = Vec::new();
        for (n, f) in raw.energies.0.iter().chain(raw.lyapunov.where_.0.iter()) {
            if !self.declare(n, SymbolKind::Command) {
                continue;
            }
            let parsed = self.parse_formula(f);
            let base = scalar_base(self.src, f);
            self.defs.insert(
                n.value.clone(),
                Def {
                    ast: parsed.map(|p| p.0),
                    base,
                    text: f.value.clone(),
                    lowered: None,
                },
            );
            def_order.push(n.value.clone());
        }
        let mut guidance_cmds = Vec::new();
        for (n, g) in &raw.guidance.0 {
            if self.decl.get(&n.value).map(|d| d.0) != Some(SymbolKind::Reference) {
                let span = self.name_span(n);
                self.err(unknown(
                    "unknown-symbol",
                    &n.value,
                    "reference",
                    span,
                    self.names_of(SymbolKind::Reference),
                ));
            }
            if self.declare(&g.command, SymbolKind::Command) {
                let dim = self
                    .symbols
                    .iter()
                    .find(|s| s.name == n.value)
                    .map_or(Dim::one(), |s| s.dim);
                let unit = self
                    .symbols
                    .iter()
                    .find(|s| s.name == n.value)
                    .map_or(String::from("1"), |s| s.unit.clone());
                self.push_symbol(&g.command.value, &unit, dim, Decl::Command);
            }
            if self.decl.get(&g.gain.value).map(|d| d.0) != Some(SymbolKind::Gain) {
                let span = self.name_span(&g.gain);
                self.err(unknown(
                    "unknown-symbol",
                    &g.gain.value,
                    "gain",
                    span,
                    self.names_of(SymbolKind::Gain),
                ));
            }
            if let Some(rl) = self.pair(&g.rate_limit, "rate limit") {
                guidance_cmds.push(Guidance {
                    reference: n.value.clone(),
                    command: g.command.value.clone(),
                    gain: g.gain.value.clone(),
                    rate_limit: rl.nearest(),
                });
            }
        }
        let claim = self.claim(&raw);

        // 2. structure: dynamics for every state, a law for every input
        let mut dag = Dag::new();
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
        let cand = self.parse_formula(&raw.lyapunov.candidate);
        if let Some((ast, base)) = &cand {
            self.dim(ast, *base, &raw.lyapunov.candidate.value, &mut Vec::new());
        }
        let mut act_asts = Vec::new();
        for (n, a) in &raw.actuators.0 {
            if !self.declare(n, SymbolKind::Command) {
                continue;
            }
            let dim = self.unit(&a.unit);
            let limits = self.pair(&a.limits, "actuator limits");
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
                    a.unit.value.clone(),
                    limits,
                ));
            }
        }
        let mut constraint_asts = Vec::new();
        for c in &raw.constraints {
            if let Some(parsed) = self.parse_constraint(c) {
                constraint_asts.push(parsed);
            }
        }
        if !self.diags.is_empty() {
            return Err(());
        }

        // 4. lowering, in dependency order: dynamics, definitions, laws
        let mut dynamics = Vec::new();
        for (state, (ast, base), text) in &dyn_asts {
            let ctx = Ctx {
                base: *base,
                text: text.clone(),
                law_index: None,
                dynamics: None,
                plant: true,
            };
            if let Some(id) = self.lower_in(&mut dag, ast, &ctx) {
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
            if let Some(id) = self.lower_in(&mut dag, ast, &ctx) {
                self.no_true_values(&dag, id, *base, text, &format!("the law for `{input}`"));
                self.no_law_loop(&dag, id, i, *base, text);
                laws.push((input.clone(), id));
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
            candidate = self.lower_in(&mut dag, ast, &ctx);
            if let Some(id) = candidate {
                let text = raw.lyapunov.candidate.value.clone();
                self.no_true_values(&dag, id, *base, &text, "the candidate");
            }
        }
        let mut actuators = Vec::new();
        for (name, ast, base, text, unit, limits) in &act_asts {
            let ctx = Ctx {
                base: *base,
                text: text.clone(),
                law_index: Some(law_asts.len()),
                dynamics: Some(&dyn_map),
                plant: false,
            };
            if let (Some(id), Some(l)) = (self.lower_in(&mut dag, ast, &ctx), limits) {
                self.no_true_values(&dag, id, *base, text, &format!("actuator `{name}`"));
                actuators.push(Actuator {
                    name: name.clone(),
                    law: id,
                    unit: unit.clone(),
                    limits: l.nearest(),
                });
            }
        }
        let mut constraints = Vec::new();
        for (text, (la, lb), op, (ra, rb)) in &constraint_asts {
            let ctx_l = Ctx {
                base: *lb,
                text: text.clone(),
                law_index: None,
                dynamics: None,
                plant: false,
            };
            let l = self.lower_in(&mut dag, la, &ctx_l);
            let ctx_r = Ctx {
                base: *rb,
                text: text.clone(),
                law_index: None,
                dynamics: None,
                plant: false,
            };
            let r = self.lower_in(&mut dag, ra, &ctx_r);
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
            constraints,
            actuators,
            guidance: guidance_cmds,
        })
    }

    /// Reports a formula of the controller (or the candidate) that came to depend on a true
    /// value through `ddt(…)` of a state, whose dynamics use it.
    fn no_true_values(&mut self, dag: &Dag, id: ExprId, base: usize, text: &str, what: &str) {
        let used: Vec<String> = dag
            .symbols(id)
            .into_iter()
            .filter(|s| self.decl.get(s).map(|d| d.0) == Some(SymbolKind::Uncertain))
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

    /// Declares an uncertain quantity: the plant's true value of a signal or an input.
    fn declare_uncertain(&mut self, n: &SpannedStr, u: &RawUncertain) {
        let ok = self.declare(n, SymbolKind::Uncertain);
        let span = self.name_span(&u.estimate);
        let estimate = self
            .symbols
            .iter()
            .find(|s| s.name == u.estimate.value)
            .map(|s| (s.kind(), s.unit.clone(), s.dim));
        let (unit, dim) = match estimate {
            Some((SymbolKind::Signal | SymbolKind::Input, unit, dim)) => (unit, dim),
            Some((k, _, _)) => {
                self.err(
                    Diagnostic::new(
                        "bad-uncertain",
                        format!(
                            "`{}` is a {}; an uncertain quantity is the true value of a signal or an input",
                            u.estimate.value,
                            k.name()
                        ),
                        span,
                    )
                    .label("not a signal or input"),
                );
                return;
            }
            None => {
                let mut names = self.names_of(SymbolKind::Signal);
                names.extend(self.names_of(SymbolKind::Input));
                self.err(unknown(
                    "unknown-symbol",
                    &u.estimate.value,
                    "signal or input",
                    span,
                    names,
                ));
                return;
            }
        };
        let (form, raw_range) = match (&u.relative, &u.absolute) {
            (Some(r), None) => (ErrorForm::Relative, r),
            (None, Some(a)) => (ErrorForm::Absolute, a),
            _ => {
                let span = self.name_span(n);
                self.err(
                    Diagnostic::new(
                        "bad-uncertain",
                        format!(
                            "uncertain `{}` needs exactly one of `relative: [min, max]` and `absolute: [min, max]`",
                            n.value
                        ),
                        span,
                    )
                    .hint("relative: true = estimate·(1 + error); absolute: true = estimate + error (in the estimate's unit)"),
                );
                return;
            }
        };
        let Some(error) = self.pair(raw_range, "error range") else {
            return;
        };
        let minus_one = -lawsmith_expr::BigRational::from_integer(1.into());
        if form == ErrorForm::Relative && error.lo.exact() <= &minus_one {
            let lo = error.lo.value();
            let span = range_of(self.src, raw_range);
            self.err(
                Diagnostic::new(
                    "bad-uncertain",
                    format!(
                        "a relative error of {lo} would make the true value zero or flip its sign"
                    ),
                    span,
                )
                .label("must be above -1"),
            );
            return;
        }
        if ok {
            let estimate = u.estimate.value.clone();
            let decl = Decl::Uncertain {
                estimate,
                form,
                error,
            };
            self.push_symbol(&n.value, &unit, dim, decl);
        }
    }

    /// The claim, and the required bounds of an ultimate-bound claim.
    fn claim(&mut self, raw: &RawSpec) -> Claim {
        let span = range_of(self.src, &raw.lyapunov.claim);
        let hint = "use negative_definite, negative_semidefinite, { exponential: RATE } or { ultimate_bound: auto | { STATE: BOUND, … } }";
        let states = self.names_of(SymbolKind::State);
        let bad = |what: String| Diagnostic::new("bad-claim", what, span.clone()).hint(hint);
        match &raw.lyapunov.claim.value {
            RawClaim::Named(s) if s == "negative_definite" => return Claim::NegativeDefinite,
            RawClaim::Named(s) if s == "negative_semidefinite" => {
                return Claim::NegativeSemidefinite
            }
            RawClaim::Exponential { exponential }
                if *exponential > 0.0 && exponential.is_finite() =>
            {
                return Claim::Exponential(*exponential)
            }
            RawClaim::Named(s) => self.err(bad(format!("unknown claim `{s}`"))),
            RawClaim::Exponential { exponential } => self.err(bad(format!(
                "exponential rate {exponential} must be positive and finite"
            ))),
            RawClaim::Bound { ultimate_bound } => {
                let required: Vec<(String, f64)> = match ultimate_bound {
                    RawBound::Auto(s) if s == "auto" => Vec::new(),
                    RawBound::Auto(s) => {
                        self.err(bad(format!(
                            "ultimate_bound takes `auto` or bounds per state error, not `{s}`"
                        )));
                        return Claim::UltimateBound { required: vec![] };
                    }
                    RawBound::List(v) => {
                        if v.len() != states.len() {
                            self.err(bad(format!(
                                "ultimate_bound lists {} bounds for {} states ({})",
                                v.len(),
                                states.len(),
                                states.join(", ")
                            )));
                            return Claim::UltimateBound { required: vec![] };
                        }
                        states.iter().cloned().zip(v.iter().copied()).collect()
                    }
                    RawBound::Map(m) => {
                        for k in m.keys() {
                            if !states.contains(k) {
                                let mut d = bad(format!(
                                    "ultimate_bound names `{k}`, which is not a state"
                                ));
                                if let Some(s) = nearest(k, states.iter().map(String::as_str)) {
                                    d = d.hint(format!("did you mean `{s}`?"));
                                }
                                self.err(d);
                            }
                        }
                        states
                            .iter()
                            .filter_map(|s| Some((s.clone(), *m.get(s)?)))
                            .collect()
                    }
                };
                if let Some((s, b)) = required.iter().find(|(_, b)| !(*b > 0.0 && b.is_finite())) {
                    self.err(bad(format!(
                        "the bound on `{s}` must be positive and finite, not {b}"
                    )));
                }
                return Claim::UltimateBound { required };
            }
        }
        Claim::NegativeDefinite
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
    let mut d = Diagnostic::new(class, format!("`{name}` is not a declared {kind}"), span)
        .label(format!("not a {kind}"));
    if let Some(s) = nearest(name, names.iter().map(String::as_str)) {
        d = d.hint(format!("did you mean `{s}`?"));
    } else if !names.is_empty() {
        d = d.hint(format!("declared: {}", names.join(", ")));
    }
    d
}
