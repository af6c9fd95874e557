//! Dimension inference over formulas, with positioned mismatch diagnostics.

use super::Loader;
use crate::diag::Diagnostic;
use crate::model::SymbolKind;
use crate::units::{parse_unit, Dim};
use lawsmith_expr::{nearest, Ast, AstKind, Func};
use num_rational::Rational32;
use std::ops::Range;

impl Loader<'_> {
    pub(super) fn def_dim(&mut self, name: &str, stack: &mut Vec<String>) -> Option<Dim> {
        if let Some(d) = self.def_dims.get(name) {
            return *d;
        }
        if let Some(pos) = stack.iter().position(|s| s == name) {
            let cycle = stack[pos..].join(" → ");
            let span = self.decl.get(name).map(|d| d.1.clone()).unwrap_or(0..0);
            self.err(
                Diagnostic::new(
                    "cycle",
                    format!("definitions refer to each other in a cycle: {cycle} → {name}"),
                    span,
                )
                .label("part of the cycle")
                .hint(
                    "a definition may use only symbols and definitions that do not come back to it",
                ),
            );
            self.def_dims.insert(name.to_string(), None);
            return None;
        }
        let (ast, base, text) = {
            let d = self.defs.get(name)?;
            (d.ast.clone()?, d.base, d.text.clone())
        };
        stack.push(name.to_string());
        let dim = self.dim(&ast, base, &text, stack);
        stack.pop();
        self.def_dims.insert(name.to_string(), dim);
        dim
    }

    pub(super) fn expect_dim(
        &mut self,
        ast: &Ast,
        base: usize,
        text: &str,
        want: Option<Dim>,
        what: &str,
    ) {
        let got = self.dim(ast, base, text, &mut Vec::new());
        if let (Some(g), Some(w)) = (got, want) {
            if g != w {
                let span = self.file_span(base, text, ast.span);
                self.err(
                    Diagnostic::new(
                        "dimension",
                        format!("the {what} is in {g} but should be in {w}"),
                        span,
                    )
                    .label(format!("this is {g}")),
                );
            }
        }
    }

    /// Infers the dimension of a formula; reports mismatches; `None` when unknown after an
    /// error (so one mistake is reported once).
    pub(super) fn dim(
        &mut self,
        ast: &Ast,
        base: usize,
        text: &str,
        stack: &mut Vec<String>,
    ) -> Option<Dim> {
        let here = |l: &Self, a: &Ast| l.file_span(base, text, a.span);
        match &ast.kind {
            AstKind::Num(_) => Some(Dim::one()),
            AstKind::Sym(name) => {
                if let Some(d) = self.dim_of_symbol(name) {
                    if self.decl.get(name).map(|d| d.0) == Some(SymbolKind::Command)
                        && !self.defs.contains_key(name)
                    {
                        // actuator and command names are outputs, not inputs of formulas
                        let span = here(self, ast);
                        self.err(Diagnostic::new(
                            "unknown-symbol",
                            format!("`{name}` is a command output and cannot be used in a formula"),
                            span,
                        ));
                        return None;
                    }
                    return Some(d);
                }
                if self.defs.contains_key(name) {
                    return self.def_dim(name, stack);
                }
                let span = here(self, ast);
                let d = self.unknown_symbol(name, span);
                self.err(d);
                None
            }
            AstKind::Neg(a) => self.dim(a, base, text, stack),
            AstKind::Add(xs) => {
                let mut first: Option<(Dim, &Ast)> = None;
                let mut ok = true;
                for x in xs {
                    let d = self.dim(x, base, text, stack);
                    match (d, first) {
                        (Some(d), None) => first = Some((d, x)),
                        (Some(d), Some((f, _))) if d != f => {
                            let span = here(self, x);
                            self.err(
                                Diagnostic::new(
                                    "dimension",
                                    format!("cannot add {d} to {f}"),
                                    span,
                                )
                                .label(format!("this term is {d}"))
                                .hint("every term of a sum must have the same unit"),
                            );
                            ok = false;
                        }
                        (None, _) => ok = false,
                        _ => {}
                    }
                }
                if ok {
                    first.map(|f| f.0)
                } else {
                    None
                }
            }
            AstKind::Mul(xs) => {
                let mut acc = Dim::one();
                let mut ok = true;
                for x in xs {
                    match self.dim(x, base, text, stack) {
                        Some(d) => acc = acc.mul(&d),
                        None => ok = false,
                    }
                }
                ok.then_some(acc)
            }
            AstKind::Div(a, b) => {
                let da = self.dim(a, base, text, stack);
                let db = self.dim(b, base, text, stack);
                Some(da?.div(&db?))
            }
            AstKind::Pow(a, b) => {
                let da = self.dim(a, base, text, stack)?;
                let db = self.dim(b, base, text, stack)?;
                if !db.is_one() {
                    let span = here(self, b);
                    self.err(Diagnostic::new(
                        "dimension",
                        format!("an exponent must be dimensionless, this one is {db}"),
                        span,
                    ));
                    return None;
                }
                if da.is_one() {
                    return Some(da);
                }
                match const_exponent(b) {
                    Some(k) => Some(da.pow(k)),
                    None => {
                        let span = here(self, b);
                        self.err(Diagnostic::new(
                            "dimension",
                            format!("a quantity in {da} can only be raised to a constant power"),
                            span,
                        ));
                        None
                    }
                }
            }
            AstKind::Call { name, args, .. } => {
                let dims: Vec<Option<Dim>> = args
                    .iter()
                    .map(|a| self.dim(a, base, text, stack))
                    .collect();
                let arity_ok = match Func::from_name(name) {
                    Some(f) => f.arity() == args.len(),
                    None => (name == "ref" || name == "ddt") && args.len() == 1,
                };
                if !arity_ok {
                    // lowering reports unknown functions and argument counts with suggestions
                    return None;
                }
                let dims: Vec<Dim> = dims.into_iter().collect::<Option<_>>()?;
                match name.as_str() {
                    "ref" => Some(dims[0]),
                    "ddt" => Some(dims[0].div(&second())),
                    "sqrt" => Some(dims[0].pow(Rational32::new(1, 2))),
                    "abs" => Some(dims[0]),
                    "min" | "max" | "clamp" | "atan2" => {
                        for (i, d) in dims.iter().enumerate().skip(1) {
                            if *d != dims[0] {
                                let span = here(self, &args[i]);
                                self.err(Diagnostic::new(
                                    "dimension",
                                    format!("`{name}` compares {} with {d}", dims[0]),
                                    span,
                                ));
                                return None;
                            }
                        }
                        Some(if name == "atan2" { Dim::one() } else { dims[0] })
                    }
                    _ => {
                        if !dims[0].is_one() {
                            let span = here(self, &args[0]);
                            self.err(
                                Diagnostic::new(
                                    "dimension",
                                    format!("the argument of `{name}` must be dimensionless, this one is {}", dims[0]),
                                    span,
                                )
                                .label(format!("this is {}", dims[0])),
                            );
                            return None;
                        }
                        Some(Dim::one())
                    }
                }
            }
        }
    }

    pub(super) fn unknown_symbol(&self, name: &str, span: Range<usize>) -> Diagnostic {
        let mut names: Vec<&str> = self.decl.keys().map(String::as_str).collect();
        names.sort();
        let mut d = Diagnostic::new("unknown-symbol", format!("unknown symbol `{name}`"), span)
            .label("not declared");
        if let Some(s) = nearest(name, names.iter().copied()) {
            d = d.hint(format!("did you mean `{s}`?"));
        } else {
            d = d.hint("declare it under parameters, gains, states, references, signals, inputs, uncertain or memory");
        }
        d
    }
}

pub(super) fn second() -> Dim {
    parse_unit("s").expect("s is a unit")
}

fn const_exponent(a: &Ast) -> Option<Rational32> {
    match &a.kind {
        AstKind::Num(v) => {
            let n = i32::try_from(v.numer()).ok()?;
            let d = i32::try_from(v.denom()).ok()?;
            Some(Rational32::new(n, d))
        }
        AstKind::Neg(x) => const_exponent(x).map(|k| -k),
        AstKind::Div(x, y) => Some(
            const_exponent(x)? / const_exponent(y).filter(|k| *k != Rational32::from_integer(0))?,
        ),
        _ => None,
    }
}
