//! Well-posedness: the conditions under which the laws, the actuators, V, V̇ and the closed
//! loop are defined (each division, `asin`/`acos`, root, logarithm, power, `tan`, `atan2`), and
//! the side conditions the simplifier assumed, as goals.

use crate::goal::{Goal, Test};
use crate::problem::{Problem, ProofForms};
use lawsmith_expr::{to_text, BigRational, CondKind, Dag, ExprId, Func, Node};
use lawsmith_spec::Derivation;
use std::collections::HashSet;

/// A well-posedness condition before it becomes a goal.
struct Cond {
    kind: CondKind,
    expr: ExprId,
    in_proof: bool,
    source: String,
}

/// Collects the domain conditions of every function and division in `e`: a function with a
/// pole or an undefined point gets the condition that keeps its argument away from it.
fn conditions_of(dag: &mut Dag, e: ExprId, source: &str, out: &mut Vec<Cond>) {
    let mut stack = vec![e];
    let mut seen = HashSet::new();
    while let Some(id) = stack.pop() {
        if !seen.insert(id) {
            continue;
        }
        let node = dag.node(id).clone();
        let zero = BigRational::from_integer(0.into());
        let cond = match &node {
            Node::Div(_, b) => Some((CondKind::NonZero, *b)),
            Node::Pow(a, b) => match dag.as_num(*b) {
                Some(k) if k.is_integer() => (k < &zero).then_some((CondKind::NonZero, *a)),
                Some(k) if k > &zero => Some((CondKind::NonNegative, *a)),
                _ => Some((CondKind::Positive, *a)),
            },
            Node::Call(Func::Asin | Func::Acos, xs) => Some((CondKind::UnitInterval, xs[0])),
            Node::Call(Func::Sqrt, xs) => Some((CondKind::NonNegative, xs[0])),
            Node::Call(Func::Ln, xs) => Some((CondKind::Positive, xs[0])),
            // tan has its poles where cos vanishes
            Node::Call(Func::Tan, xs) => {
                Some((CondKind::NonZero, dag.call(Func::Cos, vec![xs[0]])))
            }
            // atan2(y, x) is undefined at y = x = 0 and jumps by 2π across the half-line
            // y = 0, x < 0; off that closed half-line, and only there, sqrt(x^2 + y^2) + x > 0
            // (the half-angle form 2*atan(y/(sqrt(x^2 + y^2) + x)) of atan2). The closed loop,
            // and the mean-value forms of the proof, need a continuous law.
            Node::Call(Func::Atan2, xs) => {
                let (y, x) = (xs[0], xs[1]);
                let (x2, y2) = (dag.powi(x, 2), dag.powi(y, 2));
                let r2 = dag.add(vec![x2, y2]);
                let r = dag.call(Func::Sqrt, vec![r2]);
                Some((CondKind::Positive, dag.add(vec![r, x])))
            }
            _ => None,
        };
        if let Some((kind, expr)) = cond {
            out.push(Cond {
                kind,
                expr,
                in_proof: false,
                source: source.to_string(),
            });
        }
        stack.extend(node.children_vec());
    }
}

fn condition_goal(problem: &mut Problem, c: &Cond) -> (Goal, Vec<Cond>) {
    let (u, assumed) = if c.in_proof {
        problem.simplify(c.expr)
    } else {
        problem.express(c.expr)
    };
    let text = |p: &Problem, e| to_text(&p.dag, e);
    let (label, expr, test) = match c.kind {
        CondKind::UnitInterval => (
            format!("-1 <= {} <= 1", text(problem, u)),
            u,
            Test::Within { lo: -1.0, hi: 1.0 },
        ),
        CondKind::NonZero => (format!("{} != 0", text(problem, u)), u, Test::NonZero),
        CondKind::Positive | CondKind::NonNegative => {
            let neg = problem.dag.neg(u);
            let (nu, _) = problem.simplify(neg);
            let strict = c.kind == CondKind::Positive;
            let op = if strict { ">" } else { ">=" };
            (
                format!("{} {op} 0", text(problem, u)),
                nu,
                Test::Negative { strict },
            )
        }
    };
    let more = assumed
        .into_iter()
        .map(|(rule, k)| Cond {
            kind: k.kind,
            expr: k.expr,
            in_proof: true,
            source: format!("assumed by the simplifier ({rule})"),
        })
        .collect();
    (
        Goal {
            label,
            expr,
            test,
            origin: false,
            exempt: None,
            region: None,
        },
        more,
    )
}

/// The well-posedness goals of a derivation, each with its source, in a fixed order
/// (laws, actuators, V, V̇, the closed-loop dynamics, the simplifier's assumptions), one per
/// distinct test and expression.
pub(crate) fn goals(
    problem: &mut Problem,
    derivation: &Derivation,
    forms: &ProofForms,
) -> Vec<(String, Goal)> {
    let mut conds = Vec::new();
    for (n, e) in &derivation.laws {
        conditions_of(&mut problem.dag, *e, &format!("law `{n}`"), &mut conds);
    }
    for (n, e) in &derivation.actuators {
        conditions_of(&mut problem.dag, *e, &format!("actuator `{n}`"), &mut conds);
    }
    conditions_of(&mut problem.dag, derivation.candidate, "V", &mut conds);
    conditions_of(&mut problem.dag, derivation.vdot, "dV/dt", &mut conds);
    // the plant model closed with the laws must be defined wherever the proof looks
    for (n, e) in &derivation.closed_loop {
        conditions_of(
            &mut problem.dag,
            *e,
            &format!("dynamics of `{n}`"),
            &mut conds,
        );
    }
    // the simplifier's assumptions: in base symbols (the derivation's) or already in proof
    // coordinates (those of the rewriting)
    let assumed = derivation
        .assumptions
        .iter()
        .map(|a| (a, false))
        .chain(forms.assumed.iter().map(|a| (a, true)));
    for ((rule, c), in_proof) in assumed {
        conds.push(Cond {
            kind: c.kind,
            expr: c.expr,
            in_proof,
            source: format!("assumed by the simplifier ({rule})"),
        });
    }

    let mut goals = Vec::new();
    let mut seen: HashSet<(String, ExprId)> = HashSet::new();
    let mut i = 0;
    while i < conds.len() {
        let (g, more) = condition_goal(problem, &conds[i]);
        // a condition on a constant that holds (a parameter's `7.5 != 0`) is no goal; one
        // that fails stays, to be refuted
        let trivial = holds(&problem.dag, &g);
        if !trivial && seen.insert((format!("{:?}", g.test), g.expr)) {
            goals.push((conds[i].source.clone(), g));
        }
        conds.extend(more);
        i += 1;
    }
    goals
}

/// True when the goal's expression is a number for which its test holds, decided exactly.
fn holds(dag: &Dag, g: &Goal) -> bool {
    let Some(v) = dag.as_num(g.expr) else {
        return false;
    };
    let zero = BigRational::from_integer(0.into());
    let one = BigRational::from_integer(1.into());
    match g.test {
        Test::NonZero => v != &zero,
        Test::Negative { strict: true } => v < &zero,
        Test::Negative { strict: false } => v <= &zero,
        // the only interval test a condition has is [-1, 1]
        Test::Within { lo, hi } => lo == -1.0 && hi == 1.0 && -&one <= *v && v <= &one,
    }
}
