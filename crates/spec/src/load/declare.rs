//! Phase 1 of loading: the declarations. Every symbol, definition and guidance filter with
//! its unit, range and kind, each number read as the decimal it was written as.

use super::{placeholder, range_of, scalar_base, unknown, Def, Loader};
use crate::diag::Diagnostic;
use crate::model::Range as Bounds;
use crate::model::*;
use crate::schema::*;
use crate::units::{parse_unit, Dim};
use lawsmith_expr::{nearest, Decimal};
use serde_saphyr::Spanned;
use std::collections::HashSet;

impl Loader<'_> {
    /// Declares every symbol of the spec; returns the definitions in order and the guidance
    /// filters.
    pub(super) fn declarations(&mut self, raw: &RawSpec) -> (Vec<String>, Vec<Guidance>) {
        self.declare_parameters(raw);
        self.declare_gains(raw);
        self.declare_references(raw);
        self.declare_states(raw);
        self.declare_signals(raw);
        self.declare_memory(raw);
        let def_order = self.declare_definitions(raw);
        (def_order, self.declare_guidance(raw))
    }

    fn declare_parameters(&mut self, raw: &RawSpec) {
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
    }

    fn declare_gains(&mut self, raw: &RawSpec) {
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
    }

    fn declare_references(&mut self, raw: &RawSpec) {
        for (n, r) in &raw.references.0 {
            let ok = self.declare(n, SymbolKind::Reference);
            let dim = self.unit(&r.unit);
            let range = self.pair(&r.range, "reference range");
            let rate_range = self.pair(&r.rate_range, "rate range");
            let rate_ok = self.declare(&r.rate, SymbolKind::Rate);
            // the rate's own rate, when the laws need ddt of it
            let accel = match (&r.accel, &r.accel_range) {
                (Some(a), Some(ar)) => {
                    let range = self.pair(ar, "accel range");
                    self.declare(a, SymbolKind::Rate).then_some((a, range))
                }
                (None, None) => None,
                (a, _) => {
                    let at = self.name_span(a.as_ref().unwrap_or(n));
                    self.err(
                        Diagnostic::new(
                            "bad-range",
                            format!(
                                "reference `{}` needs both `accel:` (the name of its rate's rate) and `accel_range:`",
                                n.value
                            ),
                            at,
                        )
                        .hint("e.g. accel: hddot_r, accel_range: [-0.5, 0.5]"),
                    );
                    None
                }
            };
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
                        rate: accel.as_ref().map(|(a, _)| a.value.clone()),
                    },
                );
            }
            if let (Some((a, range)), true) = (&accel, rate_ok) {
                let u = r.unit.value.trim();
                let unit = if u.chars().all(|c| c.is_ascii_alphanumeric() || c == '^') {
                    format!("{u}/s^2")
                } else {
                    format!("({u})/s^2")
                };
                let s = parse_unit("s").expect("s is a unit");
                let ad = dim.div(&s).div(&s);
                self.push_symbol(
                    &a.value,
                    &unit,
                    ad,
                    Decl::Rate {
                        range: range.clone().unwrap_or_else(placeholder),
                        reference: r.rate.value.clone(),
                        rate: None,
                    },
                );
            }
        }
    }

    fn declare_states(&mut self, raw: &RawSpec) {
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
                // a state may track a reference, or a reference's rate (a velocity tracking
                // the rate of a position reference): its unit then the reference's per second
                let of_rate = raw
                    .references
                    .0
                    .iter()
                    .find(|(_, v)| v.rate.value == r.value);
                let found = match of_rate {
                    Some((k, v)) => Some((k, v, true)),
                    None => raw
                        .references
                        .0
                        .iter()
                        .find(|(k, _)| k.value == r.value)
                        .map(|(k, v)| (k, v, false)),
                };
                match found {
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
                    Some((_, rr, is_rate)) => {
                        if !tracked.insert(r.value.clone()) {
                            self.err(Diagnostic::new(
                                "duplicate-name",
                                format!("reference `{}` is tracked by two states", r.value),
                                span.clone(),
                            ));
                        }
                        let mut rdim = parse_unit(&rr.unit.value).unwrap_or_default();
                        if is_rate {
                            rdim = rdim.div(&parse_unit("s").expect("s is a unit"));
                        }
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
    }

    /// Signals, inputs and uncertain quantities.
    fn declare_signals(&mut self, raw: &RawSpec) {
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
    }

    fn declare_definitions(&mut self, raw: &RawSpec) -> Vec<String> {
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
        def_order
    }

    fn declare_guidance(&mut self, raw: &RawSpec) -> Vec<Guidance> {
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
        guidance_cmds
    }

    /// A `[min, max]` range, each end read as the decimal it was written as.
    pub(super) fn pair(&mut self, r: &RawRange, what: &str) -> Option<Bounds> {
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
    pub(super) fn literal(&mut self, n: &Spanned<f64>) -> Option<Decimal> {
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

    /// Declares an uncertain quantity: the plant's true value of a signal or an input (its
    /// error optionally named), or a constant unknown.
    fn declare_uncertain(&mut self, n: &SpannedStr, u: &RawUncertain) {
        if let Some(range) = &u.constant {
            self.declare_constant(n, u, range);
            return;
        }
        let ok = self.declare(n, SymbolKind::Uncertain);
        let Some(est) = &u.estimate else {
            let span = self.name_span(n);
            self.err(
                Diagnostic::new(
                    "bad-uncertain",
                    format!(
                        "uncertain `{}` needs `estimate:` (the signal or input it is the true value of) or `constant: [min, max]`",
                        n.value
                    ),
                    span,
                )
                .hint("true value of an estimate: { estimate: drag, relative: [-0.2, 0.2] }; a constant unknown: { constant: [-40, 40], unit: W }"),
            );
            return;
        };
        if let Some(unit) = &u.unit {
            let span = self.name_span(unit);
            self.err(
                Diagnostic::new(
                    "bad-uncertain",
                    format!(
                        "uncertain `{}` takes the unit of its estimate; `unit:` belongs to a constant unknown",
                        n.value
                    ),
                    span,
                )
                .label("not allowed here"),
            );
        }
        let span = self.name_span(est);
        let estimate = self
            .symbols
            .iter()
            .find(|s| s.name == est.value)
            .map(|s| (s.kind(), s.unit.clone(), s.dim));
        let (unit, dim) = match estimate {
            Some((SymbolKind::Signal | SymbolKind::Input, unit, dim)) => (unit, dim),
            Some((k, _, _)) => {
                self.err(
                    Diagnostic::new(
                        "bad-uncertain",
                        format!(
                            "`{}` is a {}; an uncertain quantity is the true value of a signal or an input",
                            est.value,
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
                    &est.value,
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
        // the error, constant in time, under a name of its own when the spec gives one
        let delta = match &u.error {
            Some(e) => {
                if self.declare(e, SymbolKind::Unknown) {
                    let (du, dd) = match form {
                        ErrorForm::Relative => ("1".to_string(), Dim::one()),
                        ErrorForm::Absolute => (unit.clone(), dim),
                    };
                    let decl = Decl::Unknown {
                        range: error.clone(),
                        of: Some(n.value.clone()),
                    };
                    self.push_symbol(&e.value, &du, dd, decl);
                }
                e.value.clone()
            }
            None => uncertainty_name(&n.value),
        };
        if ok {
            let decl = Decl::Uncertain {
                estimate: est.value.clone(),
                form,
                error,
                delta,
            };
            self.push_symbol(&n.value, &unit, dim, decl);
        }
    }

    /// A constant unknown: `{ constant: [min, max], unit }`.
    fn declare_constant(&mut self, n: &SpannedStr, u: &RawUncertain, range: &RawRange) {
        let extra = [
            (u.estimate.is_some(), "estimate"),
            (u.relative.is_some(), "relative"),
            (u.absolute.is_some(), "absolute"),
            (u.error.is_some(), "error"),
        ];
        if let Some((_, key)) = extra.iter().find(|(set, _)| *set) {
            let span = self.name_span(n);
            self.err(
                Diagnostic::new(
                    "bad-uncertain",
                    format!(
                        "constant unknown `{}` takes `constant: [min, max]` and `unit:` only, not `{key}:`",
                        n.value
                    ),
                    span,
                )
                .hint("the true value of an estimate is { estimate: NAME, relative: [min, max] }"),
            );
            return;
        }
        let Some(unit) = &u.unit else {
            let span = self.name_span(n);
            self.err(
                Diagnostic::new(
                    "bad-uncertain",
                    format!("constant unknown `{}` needs `unit:`", n.value),
                    span,
                )
                .hint("e.g. { constant: [-40, 40], unit: W }"),
            );
            return;
        };
        let ok = self.declare(n, SymbolKind::Unknown);
        let dim = self.unit(unit);
        let range = self.pair(range, "constant range");
        if let (true, Some(range)) = (ok, range) {
            let decl = Decl::Unknown { range, of: None };
            self.push_symbol(&n.value, &unit.value, dim, decl);
        }
    }

    /// Controller states: unit, initial value, limits, and what each settles at.
    fn declare_memory(&mut self, raw: &RawSpec) {
        for (n, m) in &raw.memory.0 {
            let ok = self.declare(n, SymbolKind::Memory);
            let dim = self.unit(&m.unit);
            let limits = self.pair(&m.limits, "limits");
            let initial = if m.initial.value.is_finite() {
                self.literal(&m.initial)
            } else {
                let span = range_of(self.src, &m.initial);
                self.err(Diagnostic::new(
                    "bad-number",
                    "the initial value must be finite",
                    span,
                ));
                None
            };
            let settle = match (&m.estimates, &m.equilibrium) {
                (Some(_), Some(e)) => {
                    let span = range_of(self.src, e);
                    self.err(
                        Diagnostic::new(
                            "memory-target",
                            format!(
                                "controller state `{}` has both `estimates` and `equilibrium`",
                                n.value
                            ),
                            span,
                        )
                        .hint("keep one: `estimates: UNKNOWN` for an adaptive estimate, `equilibrium: NUMBER` for an integrator that settles at a known value"),
                    );
                    None
                }
                (Some(u), None) => self.estimated(n, u, dim),
                (None, Some(e)) => self
                    .literal(e)
                    .map(|d| (Settle::Value(d.clone()), d.clone(), d)),
                (None, None) => {
                    let zero = Decimal::from_f64(0.0);
                    Some((Settle::Value(zero.clone()), zero.clone(), zero))
                }
            };
            let (Some(limits), Some(initial), Some((settle, slo, shi))) = (limits, initial, settle)
            else {
                // declared all the same (the error is reported, so the spec is refused), so
                // formulas that use it raise no further error
                if ok {
                    let decl = Decl::Memory {
                        initial: Decimal::from_f64(0.0),
                        limits: placeholder(),
                        settle: Settle::Value(Decimal::from_f64(0.0)),
                    };
                    self.push_symbol(&n.value, &m.unit.value, dim, decl);
                }
                continue;
            };
            let span = range_of(self.src, &m.limits);
            if !(limits.lo.exact() <= slo.exact() && shi.exact() <= limits.hi.exact()) {
                let what = match &settle {
                    Settle::Value(v) => format!("its equilibrium {}", v.value()),
                    Settle::Unknown(u) => {
                        format!("the range [{}, {}] of `{u}`", slo.value(), shi.value())
                    }
                };
                self.err(
                    Diagnostic::new(
                        "memory-limits",
                        format!(
                            "the limits [{}, {}] of `{}` do not hold {what}",
                            limits.lo.value(),
                            limits.hi.value(),
                            n.value
                        ),
                        span.clone(),
                    )
                    .label("too narrow")
                    .hint("the state must be able to reach what it settles at; widen the limits"),
                );
            }
            if !(limits.lo.exact() <= initial.exact() && initial.exact() <= limits.hi.exact()) {
                self.err(
                    Diagnostic::new(
                        "memory-limits",
                        format!(
                            "the initial value {} of `{}` is outside its limits [{}, {}]",
                            initial.value(),
                            n.value,
                            limits.lo.value(),
                            limits.hi.value()
                        ),
                        range_of(self.src, &m.initial),
                    )
                    .label("outside the limits"),
                );
            }
            if ok {
                let decl = Decl::Memory {
                    initial,
                    limits,
                    settle,
                };
                self.push_symbol(&n.value, &m.unit.value, dim, decl);
            }
        }
    }

    /// What an estimate settles at: the unknown it names, with that unknown's range.
    fn estimated(
        &mut self,
        n: &SpannedStr,
        u: &SpannedStr,
        dim: Dim,
    ) -> Option<(Settle, Decimal, Decimal)> {
        let span = self.name_span(u);
        let found = self
            .symbols
            .iter()
            .find(|s| s.name == u.value)
            .map(|s| (s.decl.clone(), s.dim, s.unit.clone()));
        match found {
            Some((Decl::Unknown { range, .. }, udim, uunit)) => {
                if udim != dim {
                    self.err(
                        Diagnostic::new(
                            "dimension",
                            format!(
                                "controller state `{}` is in {dim} but the unknown `{}` it estimates is in {udim} ({uunit})",
                                n.value, u.value
                            ),
                            span,
                        )
                        .label("unit differs"),
                    );
                    return None;
                }
                Some((Settle::Unknown(u.value.clone()), range.lo, range.hi))
            }
            _ => {
                let names = self.names_of(SymbolKind::Unknown);
                let mut d = unknown("unknown-symbol", &u.value, "unknown constant", span, names);
                if d.hint.is_none() {
                    d = d.hint(
                        "an estimate names a constant unknown: `NAME: { constant: [min, max], unit }` or the `error:` of an uncertain quantity, under `uncertain`",
                    );
                }
                self.err(d);
                None
            }
        }
    }

    /// The claim, and the required bounds of an ultimate-bound claim.
    pub(super) fn claim(&mut self, raw: &RawSpec) -> Claim {
        let span = range_of(self.src, &raw.lyapunov.claim);
        let hint = "use negative_definite, negative_semidefinite, { exponential: RATE }, { ultimate_bound: auto | { STATE: BOUND, … } } or { negative_definite_in: [STATE, …] }";
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
            RawClaim::DefiniteIn {
                negative_definite_in: names,
            } => {
                let mut known = states.clone();
                known.extend(self.names_of(SymbolKind::Memory));
                for k in names {
                    if !known.contains(k) {
                        let mut d = bad(format!(
                            "negative_definite_in names `{k}`, which is not a state or a controller state"
                        ));
                        if let Some(s) = nearest(k, known.iter().map(String::as_str)) {
                            d = d.hint(format!("did you mean `{s}`?"));
                        }
                        self.err(d);
                    }
                }
                if names.is_empty() {
                    self.err(bad("negative_definite_in lists no state".into()));
                }
                // in declaration order, each once
                let ordered = known.into_iter().filter(|k| names.contains(k)).collect();
                return Claim::NegativeDefiniteIn(ordered);
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
}
