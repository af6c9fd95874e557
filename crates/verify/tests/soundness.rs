//! Interval soundness on random expressions and boxes.
//!
//! 1. 100,000 random expressions (every function of the formula language) on random boxes:
//!    the interval over the box must meet the interval at each of several points of the box
//!    (both contain the exact value there; disjoint means one is unsound).
//! 2. 20,000 of them are sent to mpmath (reference: mpmath, 50-digit reals and `mpmath.iv`)
//!    by tests/python/interval_vs_mpmath.py: every 50-digit point value must lie inside our
//!    interval, and mpmath's interval enclosure must intersect ours. Zero violations allowed.

use lawsmith_expr::random::{random_expr, Gen, Rng, VARS};
use lawsmith_expr::{to_text, Dag, Tape};
use lawsmith_verify::Interval;
use std::process::Command;

const GEN: Gen = Gen {
    smooth_only: false,
    rational_only: false,
    all_functions: true,
};

fn random_box(rng: &mut Rng) -> Vec<Interval> {
    let widths = [0.0, 1e-9, 1e-3, 0.3, 2.0, 8.0];
    VARS.iter()
        .map(|_| {
            let c = -3.0 + 6.0 * rng.unit();
            let w = widths[rng.below(widths.len() as u64) as usize];
            Interval::new(c - w * rng.unit(), c + w * rng.unit())
        })
        .collect()
}

fn run(tape: &Tape, xs: &[Interval], scratch: &mut Vec<Interval>) -> Interval {
    let mut out = [Interval::point(0.0)];
    tape.run(xs, scratch, &mut out);
    out[0]
}

struct Case {
    expr: String,
    bx: Vec<Interval>,
    result: Interval,
}

fn cases(n: usize, seed: u64) -> (Vec<Case>, usize, usize) {
    let mut rng = Rng(seed);
    let mut dag = Dag::new();
    let mut scratch = Vec::new();
    let (mut checked, mut violations) = (0, 0);
    let mut out = Vec::new();
    for _ in 0..n {
        let e = random_expr(&mut dag, &mut rng, 4, GEN);
        let tape = Tape::compile(&dag, &[e], &VARS).unwrap();
        let bx = random_box(&mut rng);
        let whole = run(&tape, &bx, &mut scratch);
        for k in 0..4 {
            let p: Vec<Interval> = bx
                .iter()
                .map(|i| match k {
                    0 => Interval::point(i.lo()),
                    1 => Interval::point(i.hi()),
                    2 => Interval::point(i.mid()),
                    _ => Interval::point(i.lo() + (i.hi() - i.lo()) * rng.unit()),
                })
                .collect();
            let at = run(&tape, &p, &mut scratch);
            if at.is_empty() || whole.is_empty() {
                continue;
            }
            checked += 1;
            if at.hi() < whole.lo() || at.lo() > whole.hi() {
                violations += 1;
                eprintln!(
                    "{}: box {:?} gives {:?} but point {:?} gives {:?}",
                    to_text(&dag, e),
                    bx,
                    whole,
                    p,
                    at
                );
            }
        }
        out.push(Case {
            expr: to_text(&dag, e),
            bx,
            result: whole,
        });
    }
    (out, checked, violations)
}

#[test]
fn box_intervals_meet_point_intervals_on_100000_random_expressions() {
    let (_, checked, violations) = cases(100_000, 11);
    println!("{checked} point checks, {violations} violations");
    assert!(checked > 200_000, "too few defined points: {checked}");
    assert_eq!(violations, 0);
}

#[test]
fn intervals_contain_mpmath_values_and_meet_mpmath_intervals() {
    let (cases, _, _) = cases(20_000, 12);
    let json: Vec<serde_json::Value> = cases
        .iter()
        .filter(|c| !c.result.is_empty())
        .map(|c| {
            let bound = |x: f64| if x.is_finite() { serde_json::json!(x) } else { serde_json::Value::Null };
            let bx: serde_json::Map<String, serde_json::Value> = VARS
                .iter()
                .zip(&c.bx)
                .map(|(v, i)| (v.to_string(), serde_json::json!([i.lo(), i.hi()])))
                .collect();
            serde_json::json!({"expr": c.expr, "box": bx, "result": [bound(c.result.lo()), bound(c.result.hi())]})
        })
        .collect();
    let dir = std::env::temp_dir().join(format!("lawsmith-iv-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("cases.json");
    std::fs::write(&file, serde_json::to_string(&json).unwrap()).unwrap();
    let script = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../tests/python/interval_vs_mpmath.py"
    );
    let out = Command::new("python3")
        .arg(script)
        .arg(&file)
        .output()
        .expect("python3 with mpmath (see .ci/run)");
    let text =
        String::from_utf8_lossy(&out.stdout).to_string() + &String::from_utf8_lossy(&out.stderr);
    println!("{text}");
    std::fs::remove_dir_all(&dir).unwrap();
    assert!(out.status.success(), "{text}");
    assert!(text.contains("point violations 0"), "{text}");
}
