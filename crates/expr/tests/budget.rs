//! The expansion budget: a product of many sums, small as a DAG, would expand to
//! exponentially many terms; the simplifier stops at `DagLimits::max_term_products`, returns
//! its input unchanged and says so.

use lawsmith_expr::{AssumeNothing, Dag, DagLimits, ExprId, Node, Simplifier};

/// `(x1 + y1) * (x2 + y2) * … * (xn + yn)`, which expands to 2^n distinct terms (each term
/// picks one summand of every factor: the distributive law, common practice).
fn product_of_sums(dag: &mut Dag, n: usize) -> ExprId {
    let factors = (1..=n)
        .map(|i| {
            let x = dag.sym(&format!("x{i}"));
            let y = dag.sym(&format!("y{i}"));
            dag.add(vec![x, y])
        })
        .collect();
    dag.mul(factors)
}

fn terms(dag: &Dag, e: ExprId) -> usize {
    match dag.node(e) {
        Node::Add(xs) => xs.len(),
        _ => 1,
    }
}

#[test]
fn a_product_of_ten_sums_expands_to_1024_terms_within_the_default_budget() {
    let mut dag = Dag::new();
    let e = product_of_sums(&mut dag, 10);
    let mut none = AssumeNothing;
    let mut s = Simplifier::new(&mut dag, &mut none);
    let out = s.simplify(&mut dag, e);
    assert!(!s.exhausted());
    assert_eq!(terms(&dag, out), 1024);
    // each step multiplies the terms so far by a two-term sum: at least 2 + 4 + … + 1024
    assert!(s.work() >= 2046, "{}", s.work());
}

#[test]
fn a_product_of_thirty_sums_stops_at_the_budget_and_returns_its_input() {
    let mut dag = Dag::with_limits(DagLimits {
        max_term_products: 100_000,
        ..DagLimits::default()
    });
    // 2^30 terms: about a billion, far past any budget
    let e = product_of_sums(&mut dag, 30);
    let mut none = AssumeNothing;
    let mut s = Simplifier::new(&mut dag, &mut none);
    let before = dag.len();
    let out = s.simplify(&mut dag, e);
    assert!(s.exhausted());
    assert_eq!(out, e, "an exhausted simplifier returns its input");
    assert!(s.work() <= 100_000, "{}", s.work());
    // what was expanded before the budget ran out never reached the arena
    assert_eq!(dag.len(), before);
    // and it stays exhausted: later calls return their inputs too
    let x = dag.sym("x1");
    let y = dag.sym("x1");
    let sum = dag.add(vec![x, y]);
    assert_eq!(s.simplify(&mut dag, sum), sum);
}

#[test]
fn big_coefficients_are_charged_by_their_size() {
    // (x·10^40 + y·3^-80 + 7)^30 has only 496 terms (C(32, 2)), but coefficients of
    // thousands of bits: counted by terms alone it would fit 100,000 products many times over
    let mut dag = Dag::with_limits(DagLimits {
        max_term_products: 100_000,
        ..DagLimits::default()
    });
    let text = "(x*10^40 + y*3^(-80) + 7)^30";
    let ast = lawsmith_expr::parse(text).unwrap();
    let mut errors = Vec::new();
    let e = lawsmith_expr::lower(
        &mut dag,
        &ast,
        &mut lawsmith_expr::PlainSymbols,
        &mut errors,
    )
    .unwrap();
    let mut none = AssumeNothing;
    let mut s = Simplifier::new(&mut dag, &mut none);
    assert_eq!(s.simplify(&mut dag, e), e);
    assert!(s.exhausted());
    // the same power with small coefficients expands within the same budget
    let small = lawsmith_expr::parse("(x + y + 7)^30").unwrap();
    let e = lawsmith_expr::lower(
        &mut dag,
        &small,
        &mut lawsmith_expr::PlainSymbols,
        &mut errors,
    )
    .unwrap();
    let mut s = Simplifier::new(&mut dag, &mut none);
    let out = s.simplify(&mut dag, e);
    assert!(!s.exhausted(), "{} term products", s.work());
    assert_eq!(terms(&dag, out), 496);
}
