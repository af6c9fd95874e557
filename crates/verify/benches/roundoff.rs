//! Round-off bounds of formulas over input boxes, for `bench/roundoff_vs_published.py`.
//!
//! Reads a JSON list of kernels on stdin, `[{"name", "expr", "vars": [[name, lo, hi]],
//! "samples": N, "leaves": L}]`, and writes one JSON line per kernel: the formula as
//! lawsmith's code computes it (`Program::of_formula`: constants folded exactly, like terms collected),
//! the proved binary64 bound of |computed − exact| over the box (`roundoff`, L leaves), the
//! seconds it took, and N points of the box (a seeded sequence plus the corners) with the
//! computed value at each, for the script to compare with an exact evaluation.

use lawsmith_codegen::{Float, Program};
use lawsmith_expr::random::Rng;
use lawsmith_verify::{roundoff, InputMap, Interval};
use serde_json::{json, Value};
use std::io::Read as _;

fn main() {
    let mut text = String::new();
    std::io::stdin().read_to_string(&mut text).expect("stdin");
    let kernels: Vec<Value> = serde_json::from_str(&text).expect("a JSON list of kernels");
    for k in kernels {
        let name = k["name"].as_str().expect("name");
        let vars: Vec<(String, f64, f64)> = k["vars"]
            .as_array()
            .expect("vars")
            .iter()
            .map(|v| {
                (
                    v[0].as_str().expect("a name").to_string(),
                    v[1].as_f64().expect("lo"),
                    v[2].as_f64().expect("hi"),
                )
            })
            .collect();
        let names: Vec<&str> = vars.iter().map(|v| v.0.as_str()).collect();
        let p = Program::of_formula(k["expr"].as_str().expect("expr"), &names, name)
            .unwrap_or_else(|err| panic!("{name}: {err}"));
        let boxes: Vec<Interval> = vars.iter().map(|v| Interval::new(v.1, v.2)).collect();
        let leaves = k["leaves"].as_u64().unwrap_or(100_000) as usize;
        let t = std::time::Instant::now();
        let r = roundoff(
            &p,
            &InputMap::identity(boxes.len()),
            &boxes,
            Float::F64,
            leaves,
        );
        let seconds = t.elapsed().as_secs_f64();
        let n = k["samples"].as_u64().unwrap_or(10_000) as usize;
        let mut rng = Rng(7);
        let mut slots = Vec::new();
        let mut points = Vec::with_capacity(n + (1 << vars.len()));
        for corner in 0..(1usize << vars.len()) {
            let x: Vec<f64> = (0..vars.len())
                .map(|i| {
                    if corner >> i & 1 == 0 {
                        vars[i].1
                    } else {
                        vars[i].2
                    }
                })
                .collect();
            let y = p.run(&x, &mut slots)[0];
            points.push(json!([x, y]));
        }
        for _ in 0..n {
            let x: Vec<f64> = vars
                .iter()
                .map(|v| (v.1 + (v.2 - v.1) * rng.unit()).clamp(v.1, v.2))
                .collect();
            let y = p.run(&x, &mut slots)[0];
            points.push(json!([x, y]));
        }
        println!(
            "{}",
            json!({
                "name": name,
                "bound": r[0].bound,
                "leaves": r[0].boxes,
                "seconds": seconds,
                "ops": p.op_count(),
                "points": points,
            })
        );
    }
}
