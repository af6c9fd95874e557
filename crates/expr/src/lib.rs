//! Exact symbolic expressions for lawsmith: the formula parser, a hash-consed DAG,
//! differentiation, canonical simplification and f64 evaluation.
//!
//! **Key decision:** numbers are exact rationals (`9.80665` is `196133/20000`, never a rounded
//! float) and simplification produces a *canonical* rational-function form, so "is V̇ equal to
//! −k·e²?" is answered by comparing two `u32` ids rather than by sampling. Rewrites that need a
//! side condition (`sin(asin(u)) → u` needs |u| ≤ 1) ask an [`Oracle`], so the caller — the
//! verifier, with interval arithmetic over the envelope — decides when they hold.
//!
//! This crate knows nothing of YAML, units or files.
//!
//! ```
//! use lawsmith_expr::{parse_expr, simplify, derivative, to_text, AssumeAll, Dag};
//!
//! let mut dag = Dag::new();
//! let v = parse_expr(&mut dag, "0.5 * m * va^2 + m * g * h").unwrap();
//! let dv = derivative(&mut dag, v, "va");
//! let dv = simplify(&mut dag, dv, &mut AssumeAll::default());
//! assert_eq!(to_text(&dag, dv), "m*va");
//!
//! // canonical: equal rational functions get the same id
//! let a = parse_expr(&mut dag, "x*(y/x) + (x + 1)^2").unwrap();
//! let b = parse_expr(&mut dag, "y + 1 + 2*x + x^2").unwrap();
//! let mut oracle = AssumeAll::default();
//! assert_eq!(simplify(&mut dag, a, &mut oracle), simplify(&mut dag, b, &mut oracle));
//! assert_eq!(oracle.assumed.len(), 1); // it assumed x != 0 to cancel
//! ```
#![deny(missing_docs)]

mod dag;
mod diff;
mod eval;
mod lower;
mod number;
mod parse;
mod poly;
mod print;
pub mod random;
mod rules;
mod simplify;

pub use dag::{Dag, DagLimits, ExprId, Func, Node, DEFAULT_MAX_TERM_PRODUCTS};
pub use diff::derivative;
pub use eval::{apply, eval, pow, powi, Arith, Tape};
pub use lower::{lower, parse_expr, LowerError, PlainSymbols, Resolver};
pub use number::{as_terminating_decimal, parse_decimal, to_f64, Decimal};
pub use parse::{parse, parse_with, Ast, AstKind, ParseError, ParseSettings, Span};
pub use print::{to_latex, to_text};
pub use rules::{
    AssumeAll, AssumeNothing, CondKind, Condition, Oracle, Rule, ALGEBRA_RULES, CALL_RULES,
};
pub use simplify::{simplify, Simplifier, MAX_EXPANDED_POWER};

pub use num_rational::BigRational;

/// The candidate closest to `name` by edit distance, if it is close enough to be a plausible
/// typo: at most a third of the name's length (at least one edit), or one name a prefix of the
/// other (`sec` for `s`).
pub fn nearest<'a>(name: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let limit = (name.chars().count() / 3).max(1);
    candidates
        .into_iter()
        .filter(|c| !c.is_empty() && *c != name)
        .map(|c| (edit_distance(name, c), c))
        .filter(|&(d, c)| d <= limit || name.starts_with(c) || c.starts_with(name))
        .min()
        .map(|(_, c)| c)
}

/// Levenshtein distance with adjacent transpositions counted as one edit.
pub fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut d = vec![vec![0usize; b.len() + 1]; a.len() + 1];
    for (i, row) in d.iter_mut().enumerate() {
        row[0] = i;
    }
    for (j, cell) in d[0].iter_mut().enumerate() {
        *cell = j;
    }
    for i in 1..=a.len() {
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            let mut v = (d[i - 1][j] + 1)
                .min(d[i][j - 1] + 1)
                .min(d[i - 1][j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                v = v.min(d[i - 2][j - 2] + 1);
            }
            d[i][j] = v;
        }
    }
    d[a.len()][b.len()]
}
