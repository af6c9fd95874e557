//! Rewrite rules as named data with side conditions, and the oracle that answers them.
//!
//! A rule whose side condition the oracle refuses is simply not applied: the result stays
//! correct, only less simple. That is how the verifier decides, with intervals over the
//! declared envelope, which rewrites hold (e.g. `sin(asin(u)) → u` needs |u| ≤ 1).

use crate::dag::{Dag, ExprId, Node};
use crate::lower::parse_expr;
use std::collections::HashMap;

/// What a side condition asks of an expression.
#[derive(Copy, Clone, PartialEq, Eq, Hash, Debug)]
pub enum CondKind {
    /// −1 ≤ u ≤ 1.
    UnitInterval,
    /// u ≠ 0.
    NonZero,
    /// u > 0.
    Positive,
    /// u ≥ 0.
    NonNegative,
}

impl CondKind {
    /// Human-readable form of the condition on the printed expression `u`.
    pub fn describe(self, u: &str) -> String {
        match self {
            CondKind::UnitInterval => format!("-1 <= {u} <= 1"),
            CondKind::NonZero => format!("{u} != 0"),
            CondKind::Positive => format!("{u} > 0"),
            CondKind::NonNegative => format!("{u} >= 0"),
        }
    }
}

/// A side condition on a concrete expression.
#[derive(Copy, Clone, PartialEq, Eq, Hash, Debug)]
pub struct Condition {
    /// The kind of question.
    pub kind: CondKind,
    /// The expression it is about (in canonical form).
    pub expr: ExprId,
}

/// Answers side conditions for the simplifier.
pub trait Oracle {
    /// May `rule` be applied, given that `cond` must hold?
    fn allows(&mut self, dag: &Dag, rule: &'static str, cond: Condition) -> bool;

    /// True when the oracle refuses every condition whatever it is: the simplifier then skips
    /// the work (a gcd) of forming conditions that would be refused anyway.
    fn refuses_all(&self) -> bool {
        false
    }
}

/// Grants every side condition and records each one once, so callers can report (and later
/// prove) what the simplified result assumes.
#[derive(Default, Debug)]
pub struct AssumeAll {
    /// The conditions granted, in the order first asked, with the rule that asked.
    pub assumed: Vec<(&'static str, Condition)>,
}

impl Oracle for AssumeAll {
    fn allows(&mut self, _dag: &Dag, rule: &'static str, cond: Condition) -> bool {
        if !self.assumed.iter().any(|(_, c)| *c == cond) {
            self.assumed.push((rule, cond));
        }
        true
    }
}

/// Refuses every side condition: only unconditional rewrites happen.
#[derive(Default, Debug)]
pub struct AssumeNothing;

impl Oracle for AssumeNothing {
    fn allows(&mut self, _dag: &Dag, _rule: &'static str, _cond: Condition) -> bool {
        false
    }

    fn refuses_all(&self) -> bool {
        true
    }
}

/// A named rewrite `lhs → rhs`. The names `u`, `x`, `y` in the patterns are wildcards.
#[derive(Clone, Copy, Debug)]
pub struct Rule {
    /// Stable name, used in reports and by oracles.
    pub name: &'static str,
    /// Pattern.
    pub lhs: &'static str,
    /// Replacement.
    pub rhs: &'static str,
    /// Side condition on a wildcard, if any.
    pub condition: Option<(CondKind, &'static str)>,
}

/// Rules applied by pattern to function calls whose arguments are already canonical.
pub const CALL_RULES: &[Rule] = &[
    Rule {
        name: "sin-asin",
        lhs: "sin(asin(u))",
        rhs: "u",
        condition: Some((CondKind::UnitInterval, "u")),
    },
    Rule {
        name: "cos-acos",
        lhs: "cos(acos(u))",
        rhs: "u",
        condition: Some((CondKind::UnitInterval, "u")),
    },
    Rule {
        name: "cos-asin",
        lhs: "cos(asin(u))",
        rhs: "sqrt(1 - u^2)",
        condition: Some((CondKind::UnitInterval, "u")),
    },
    Rule {
        name: "sin-acos",
        lhs: "sin(acos(u))",
        rhs: "sqrt(1 - u^2)",
        condition: Some((CondKind::UnitInterval, "u")),
    },
    Rule {
        name: "tan-atan",
        lhs: "tan(atan(u))",
        rhs: "u",
        condition: None,
    },
    Rule {
        name: "exp-ln",
        lhs: "exp(ln(u))",
        rhs: "u",
        condition: Some((CondKind::Positive, "u")),
    },
    Rule {
        name: "ln-exp",
        lhs: "ln(exp(u))",
        rhs: "u",
        condition: None,
    },
    Rule {
        name: "abs-abs",
        lhs: "abs(abs(u))",
        rhs: "abs(u)",
        condition: None,
    },
    Rule {
        name: "sqrt-of-square",
        lhs: "sqrt(u^2)",
        rhs: "abs(u)",
        condition: None,
    },
    Rule {
        name: "abs-of-square",
        lhs: "abs(u^2)",
        rhs: "u^2",
        condition: None,
    },
];

/// Rules applied inside the polynomial arithmetic rather than by pattern; listed here so every
/// rewrite the simplifier can make has a name and a documented side condition.
pub const ALGEBRA_RULES: &[Rule] = &[
    Rule {
        name: "cancel-common-factor",
        lhs: "x*y/x",
        rhs: "y",
        condition: Some((CondKind::NonZero, "x")),
    },
    Rule {
        name: "square-of-sqrt",
        lhs: "sqrt(u)^2",
        rhs: "u",
        condition: Some((CondKind::NonNegative, "u")),
    },
    Rule {
        name: "square-of-abs",
        lhs: "abs(u)^2",
        rhs: "u^2",
        condition: None,
    },
];

/// The call rules parsed into a DAG, ready for matching.
pub(crate) struct CompiledRules {
    rules: Vec<(Rule, ExprId, ExprId)>,
}

const WILDCARDS: [&str; 3] = ["u", "x", "y"];

impl CompiledRules {
    pub(crate) fn new(dag: &mut Dag) -> CompiledRules {
        let rules = CALL_RULES
            .iter()
            .map(|r| {
                let lhs = parse_expr(dag, r.lhs).expect("rule patterns parse");
                let rhs = parse_expr(dag, r.rhs).expect("rule patterns parse");
                (*r, lhs, rhs)
            })
            .collect();
        CompiledRules { rules }
    }

    /// The first rule that matches `target`, with the instantiated replacement and condition.
    pub(crate) fn rewrite(
        &self,
        dag: &mut Dag,
        target: ExprId,
        oracle: &mut dyn Oracle,
    ) -> Option<ExprId> {
        for (rule, lhs, rhs) in &self.rules {
            let mut bind = HashMap::new();
            if !matches(dag, *lhs, target, &mut bind) {
                continue;
            }
            if let Some((kind, var)) = rule.condition {
                let cond = Condition {
                    kind,
                    expr: bind[var],
                };
                if !oracle.allows(dag, rule.name, cond) {
                    continue;
                }
            }
            let map: HashMap<String, ExprId> =
                bind.into_iter().map(|(k, v)| (k.to_string(), v)).collect();
            return Some(dag.substitute(*rhs, &map));
        }
        None
    }
}

fn matches(
    dag: &Dag,
    pattern: ExprId,
    target: ExprId,
    bind: &mut HashMap<&'static str, ExprId>,
) -> bool {
    if let Node::Sym(name) = dag.node(pattern) {
        if let Some(w) = WILDCARDS.iter().find(|w| **w == &**name) {
            return match bind.get(w) {
                Some(&b) => b == target,
                None => {
                    bind.insert(w, target);
                    true
                }
            };
        }
    }
    match (dag.node(pattern), dag.node(target)) {
        (Node::Num(a), Node::Num(b)) => a == b,
        (Node::Sym(a), Node::Sym(b)) => a == b,
        (Node::Neg(a), Node::Neg(b)) => matches(dag, *a, *b, bind),
        (Node::Div(a, b), Node::Div(c, d)) | (Node::Pow(a, b), Node::Pow(c, d)) => {
            std::mem::discriminant(dag.node(pattern)) == std::mem::discriminant(dag.node(target))
                && matches(dag, *a, *c, bind)
                && matches(dag, *b, *d, bind)
        }
        (Node::Add(xs), Node::Add(ys)) | (Node::Mul(xs), Node::Mul(ys)) => {
            std::mem::discriminant(dag.node(pattern)) == std::mem::discriminant(dag.node(target))
                && xs.len() == ys.len()
                && xs
                    .iter()
                    .zip(ys.iter())
                    .all(|(x, y)| matches(dag, *x, *y, bind))
        }
        (Node::Call(f, xs), Node::Call(g, ys)) => {
            f == g
                && xs.len() == ys.len()
                && xs
                    .iter()
                    .zip(ys.iter())
                    .all(|(x, y)| matches(dag, *x, *y, bind))
        }
        _ => false,
    }
}
