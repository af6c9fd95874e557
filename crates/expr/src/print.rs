//! Printing expressions as formula text (which parses back to the same id) and as LaTeX.

use crate::dag::{Dag, ExprId, Func, Node};
use crate::number::{as_terminating_decimal, decimal_places};
use num_rational::BigRational;
use num_traits::Signed;
use std::collections::HashMap;

// Precedence levels, loosest first.
const P_ADD: u8 = 1;
const P_MUL: u8 = 2;
const P_NEG: u8 = 3;
const P_POW: u8 = 4;
const P_ATOM: u8 = 5;

fn num_prec(v: &BigRational) -> u8 {
    if v.is_negative() {
        P_NEG
    } else if v.is_integer() || decimal_places(v).is_some() {
        P_ATOM
    } else {
        // printed as `p/q`, which parses like a quotient
        P_MUL
    }
}

fn prec(dag: &Dag, id: ExprId) -> u8 {
    match dag.node(id) {
        Node::Num(v) => num_prec(v),
        Node::Sym(_) | Node::Call(..) => P_ATOM,
        Node::Neg(_) => P_NEG,
        Node::Add(_) => P_ADD,
        Node::Mul(_) | Node::Div(..) => P_MUL,
        Node::Pow(..) => P_POW,
    }
}

/// True for a factor printed with a leading minus (`-x`, `-3`).
fn negative_lead(dag: &Dag, id: ExprId) -> bool {
    match dag.node(id) {
        Node::Neg(_) => true,
        Node::Num(v) => v.is_negative(),
        _ => false,
    }
}

fn num_text(v: &BigRational) -> String {
    if v.is_integer() {
        return v.to_integer().to_string();
    }
    if let Some(d) = as_terminating_decimal(v) {
        return d;
    }
    format!("{}/{}", v.numer(), v.denom())
}

/// Formula text for `id`. `parse(print(e))` lowers back to `e` in the same DAG.
pub fn to_text(dag: &Dag, id: ExprId) -> String {
    to_text_memo(&mut TextMemo::new(), dag, id)
}

/// Texts of the numbers already printed, for callers that print many expressions sharing
/// subtrees (the simplifier's atom keys): a decimal of a long rational costs big-integer
/// arithmetic, and the atoms of a power tower would otherwise redo it for every level. A
/// number's text never depends on where it sits (its parent adds any parentheses), so a
/// remembered text is exact. Only numbers are kept, so the memo stays as small as they are.
pub(crate) type TextMemo = HashMap<ExprId, String>;

/// [`to_text`], reusing and filling `memo`.
pub(crate) fn to_text_memo(memo: &mut TextMemo, dag: &Dag, id: ExprId) -> String {
    let mut out = String::new();
    text(memo, dag, id, &mut out);
    out
}

fn wrap(parens: bool, m: &mut TextMemo, dag: &Dag, id: ExprId, out: &mut String) {
    if parens {
        out.push('(');
        text(m, dag, id, out);
        out.push(')');
    } else {
        text(m, dag, id, out);
    }
}

/// The text of the number `v` at `id`, printed on first use.
fn num_memo<'m>(m: &'m mut TextMemo, id: ExprId, v: &BigRational) -> &'m str {
    m.entry(id).or_insert_with(|| num_text(v))
}

/// The text of the negative number `v` at `id` without its sign: [`num_text`] writes every
/// negative number (integer, decimal or `p/q`) as `-` and the text of its magnitude.
fn magnitude_memo<'m>(m: &'m mut TextMemo, id: ExprId, v: &BigRational) -> &'m str {
    let t = num_memo(m, id, v);
    t.strip_prefix('-').unwrap_or(t)
}

/// [`prec`], reading a number's precedence off its remembered text ([`num_text`] writes a
/// `p/q` exactly when [`num_prec`] says quotient) instead of factoring its denominator again.
fn text_prec(m: &mut TextMemo, dag: &Dag, id: ExprId) -> u8 {
    match dag.node(id) {
        Node::Num(v) if v.is_negative() => P_NEG,
        Node::Num(v) if num_memo(m, id, v).contains('/') => P_MUL,
        Node::Num(_) => P_ATOM,
        _ => prec(dag, id),
    }
}

fn text(m: &mut TextMemo, dag: &Dag, id: ExprId, out: &mut String) {
    match dag.node(id) {
        Node::Num(v) => out.push_str(num_memo(m, id, v)),
        Node::Sym(s) => out.push_str(s),
        Node::Neg(a) => {
            out.push('-');
            wrap(text_prec(m, dag, *a) < P_NEG, m, dag, *a, out);
        }
        Node::Add(xs) => {
            for (i, &x) in xs.iter().enumerate() {
                if i == 0 {
                    wrap(text_prec(m, dag, x) <= P_ADD, m, dag, x, out);
                    continue;
                }
                match dag.node(x) {
                    // `a - b*c` would parse as `a + (-b)*c`; keep this form explicit
                    Node::Neg(inner) if matches!(dag.node(*inner), Node::Mul(_)) => {
                        out.push_str(" + -(");
                        text(m, dag, *inner, out);
                        out.push(')');
                    }
                    Node::Neg(inner) => {
                        out.push_str(" - ");
                        wrap(text_prec(m, dag, *inner) <= P_ADD, m, dag, *inner, out);
                    }
                    Node::Num(v) if v.is_negative() => {
                        out.push_str(" - ");
                        out.push_str(magnitude_memo(m, x, v));
                    }
                    Node::Mul(fs) if negative_lead(dag, fs[0]) => {
                        out.push_str(" - ");
                        match dag.node(fs[0]) {
                            Node::Neg(y) => {
                                let nested = matches!(dag.node(*y), Node::Mul(_));
                                wrap(text_prec(m, dag, *y) < P_MUL || nested, m, dag, *y, out);
                            }
                            Node::Num(v) => out.push_str(magnitude_memo(m, fs[0], v)),
                            _ => unreachable!("negative_lead"),
                        }
                        for &f in &fs[1..] {
                            out.push('*');
                            wrap(text_prec(m, dag, f) <= P_MUL, m, dag, f, out);
                        }
                    }
                    _ => {
                        out.push_str(" + ");
                        wrap(text_prec(m, dag, x) <= P_ADD, m, dag, x, out);
                    }
                }
            }
        }
        Node::Mul(xs) => {
            for (i, &x) in xs.iter().enumerate() {
                if i == 0 {
                    let nested = matches!(dag.node(x), Node::Mul(_));
                    wrap(text_prec(m, dag, x) < P_MUL || nested, m, dag, x, out);
                } else {
                    out.push('*');
                    wrap(text_prec(m, dag, x) <= P_MUL, m, dag, x, out);
                }
            }
        }
        Node::Div(a, b) => {
            wrap(text_prec(m, dag, *a) < P_MUL, m, dag, *a, out);
            out.push('/');
            wrap(text_prec(m, dag, *b) <= P_MUL, m, dag, *b, out);
        }
        Node::Pow(a, b) => {
            wrap(text_prec(m, dag, *a) <= P_POW, m, dag, *a, out);
            out.push('^');
            wrap(text_prec(m, dag, *b) < P_NEG, m, dag, *b, out);
        }
        Node::Call(f, xs) => {
            out.push_str(f.name());
            out.push('(');
            for (i, &x) in xs.iter().enumerate() {
                if i > 0 {
                    out.push_str(", ");
                }
                text(m, dag, x, out);
            }
            out.push(')');
        }
    }
}

const GREEK: [&str; 24] = [
    "alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta", "iota", "kappa",
    "lambda", "mu", "nu", "xi", "pi", "rho", "sigma", "tau", "upsilon", "phi", "chi", "psi",
    "omega", "Omega",
];

fn latex_name(name: &str) -> String {
    // an uncertainty coordinate `δx` (the error of an estimate): \delta before the name, so
    // the output stays ASCII and compiles with any TeX engine
    if let Some(rest) = name.strip_prefix('δ') {
        return format!("\\delta {}", latex_name(rest));
    }
    let word = |w: &str| -> String {
        if GREEK.contains(&w) {
            format!("\\{w}")
        } else if w.len() == 1 {
            w.to_string()
        } else {
            format!("\\mathrm{{{}}}", w.replace('_', "\\_"))
        }
    };
    match name.split_once('_') {
        Some((head, tail)) if !head.is_empty() && !tail.is_empty() => {
            format!("{}_{{{}}}", word(head), word(tail))
        }
        _ => word(name),
    }
}

/// LaTeX math (without the surrounding `$`), for reports and papers.
pub fn to_latex(dag: &Dag, id: ExprId) -> String {
    let mut out = String::new();
    latex(dag, id, &mut out);
    out
}

fn latex_wrap(dag: &Dag, id: ExprId, parens: bool, out: &mut String) {
    if parens {
        out.push_str("\\left(");
        latex(dag, id, out);
        out.push_str("\\right)");
    } else {
        latex(dag, id, out);
    }
}

fn latex(dag: &Dag, id: ExprId, out: &mut String) {
    match dag.node(id) {
        Node::Num(v) => {
            if v.is_integer() || decimal_places(v).is_some() {
                out.push_str(&num_text(v));
            } else {
                let sign = if v.is_negative() { "-" } else { "" };
                out.push_str(&format!(
                    "{sign}\\frac{{{}}}{{{}}}",
                    v.numer().abs(),
                    v.denom()
                ));
            }
        }
        Node::Sym(s) => out.push_str(&latex_name(s)),
        Node::Neg(a) => {
            out.push('-');
            latex_wrap(dag, *a, prec(dag, *a) <= P_ADD, out);
        }
        Node::Add(xs) => {
            for (i, &x) in xs.iter().enumerate() {
                let mut term = String::new();
                latex_wrap(dag, x, prec(dag, x) <= P_ADD, &mut term);
                // a term that prints with a leading minus (a negation, a negative number, a
                // product whose first factor is one) is subtracted: `a - b`, not `a + -b`
                match term.strip_prefix('-') {
                    Some(rest) if i > 0 => {
                        out.push_str(" - ");
                        out.push_str(rest);
                    }
                    _ => {
                        if i > 0 {
                            out.push_str(" + ");
                        }
                        out.push_str(&term);
                    }
                }
            }
        }
        Node::Mul(xs) => {
            for (i, &x) in xs.iter().enumerate() {
                if i > 0 {
                    out.push_str(" \\cdot ");
                }
                latex_wrap(
                    dag,
                    x,
                    prec(dag, x) <= P_ADD || (i > 0 && prec(dag, x) == P_NEG),
                    out,
                );
            }
        }
        Node::Div(a, b) => {
            out.push_str("\\frac{");
            latex(dag, *a, out);
            out.push_str("}{");
            latex(dag, *b, out);
            out.push('}');
        }
        Node::Pow(a, b) => {
            out.push('{');
            latex_wrap(dag, *a, prec(dag, *a) <= P_POW, out);
            out.push_str("}^{");
            latex(dag, *b, out);
            out.push('}');
        }
        Node::Call(f, xs) => {
            match f {
                Func::Sqrt => {
                    out.push_str("\\sqrt{");
                    latex(dag, xs[0], out);
                    out.push('}');
                    return;
                }
                Func::Abs => {
                    out.push_str("\\left|");
                    latex(dag, xs[0], out);
                    out.push_str("\\right|");
                    return;
                }
                Func::Sin
                | Func::Cos
                | Func::Tan
                | Func::Exp
                | Func::Ln
                | Func::Min
                | Func::Max => {
                    out.push('\\');
                    out.push_str(f.name());
                }
                Func::Asin => out.push_str("\\arcsin"),
                Func::Acos => out.push_str("\\arccos"),
                Func::Atan => out.push_str("\\arctan"),
                Func::Atan2 | Func::Clamp => {
                    out.push_str("\\operatorname{");
                    out.push_str(f.name());
                    out.push('}');
                }
            }
            out.push_str("\\left(");
            for (i, &x) in xs.iter().enumerate() {
                if i > 0 {
                    out.push_str(", ");
                }
                latex(dag, x, out);
            }
            out.push_str("\\right)");
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::lower::parse_expr;

    fn round_trip(text: &str) -> String {
        let mut d = Dag::new();
        let e = parse_expr(&mut d, text).unwrap();
        let printed = to_text(&d, e);
        let back = parse_expr(&mut d, &printed).unwrap();
        assert_eq!(back, e, "{text} printed as {printed}");
        printed
    }

    #[test]
    fn printing_parses_back() {
        assert_eq!(round_trip("a - b*c"), "a - b*c");
        assert_eq!(round_trip("a - (b + c)"), "a - (b + c)");
        assert_eq!(round_trip("-(a*b)"), "-(a*b)");
        assert_eq!(round_trip("-a*b"), "-a*b");
        assert_eq!(round_trip("-x^2"), "-x^2");
        assert_eq!(round_trip("(-2)^x"), "(-2)^x");
        assert_eq!(round_trip("a^b^c"), "a^b^c");
        assert_eq!(round_trip("(a^b)^c"), "(a^b)^c");
        assert_eq!(round_trip("a/b/c"), "a/b/c");
        assert_eq!(round_trip("a/(b/c)"), "a/(b/c)");
        assert_eq!(round_trip("a*(b*c)"), "a*(b*c)");
        assert_eq!(round_trip("(a*b)*c"), "(a*b)*c");
        assert_eq!(round_trip("x*(1/3)"), "x*(1/3)");
        assert_eq!(round_trip("1/3*x"), "1/3*x");
        assert_eq!(round_trip("x^-1"), "x^-1");
        assert_eq!(round_trip("a - 2 + 9.80665*x"), "a - 2 + 9.80665*x");
        assert_eq!(round_trip("atan2(y, x - 1)"), "atan2(y, x - 1)");
    }

    #[test]
    fn latex_uses_fractions_and_greek() {
        let mut d = Dag::new();
        let e = parse_expr(&mut d, "asin(k_tot*et/(2*mass*g*va)) + gamma^2").unwrap();
        assert_eq!(
            to_latex(&d, e),
            "\\arcsin\\left(\\frac{k_{\\mathrm{tot}} \\cdot \\mathrm{et}}{2 \\cdot \\mathrm{mass} \\cdot g \\cdot \\mathrm{va}}\\right) + {\\gamma}^{2}"
        );
    }
}
