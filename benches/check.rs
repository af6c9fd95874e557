//! Benchmark of `check` on a spec (default: the reference spec), with figures measured in the
//! same run:
//!
//! 1. wall time of the whole check (median of 5; goal ≤ 1 s on the 2-core machine), boxes
//!    evaluated and boxes per second of the claim's branch and bound;
//! 2. the sampling falsifier's evaluations per second (batched tape, one thread) as a ratio
//!    against the same V̇ compiled natively: this benchmark prints V̇ (proof coordinates) as a
//!    Rust function, compiles it with `rustc -C opt-level=3`, and times it on the same points
//!    (goal ≥ 0.3).
//!
//! Usage: cargo bench --bench check -- [SPEC]

use lawsmith_expr::{to_f64, Dag, ExprId, Func, Node, Tape};
use lawsmith_verify::{check, falsify, prepare, search, Budget, Sequence, Settings};
use std::fmt::Write as _;
use std::process::Command;
use std::time::Instant;

/// Points timed in both evaluators.
const POINTS: usize = 200_000;

/// V̇ as a Rust expression over `x[k]`.
fn rust_expr(dag: &Dag, e: ExprId, vars: &[String]) -> String {
    let go = |c: ExprId| rust_expr(dag, c, vars);
    match dag.node(e) {
        Node::Num(v) => format!("({:?}f64)", to_f64(v)),
        Node::Sym(s) => format!("x[{}]", vars.iter().position(|v| v == &**s).expect("a var")),
        Node::Neg(a) => format!("(-{})", go(*a)),
        Node::Add(xs) => format!(
            "({})",
            xs.iter().map(|&x| go(x)).collect::<Vec<_>>().join(" + ")
        ),
        Node::Mul(xs) => format!(
            "({})",
            xs.iter().map(|&x| go(x)).collect::<Vec<_>>().join(" * ")
        ),
        Node::Div(a, b) => format!("({} / {})", go(*a), go(*b)),
        Node::Pow(a, b) => match dag.as_num(*b).filter(|n| n.is_integer()) {
            Some(n) => format!("{}.powi({})", go(*a), n),
            None => format!("{}.powf({})", go(*a), go(*b)),
        },
        Node::Call(f, xs) => {
            let a: Vec<String> = xs.iter().map(|&x| go(x)).collect();
            match f {
                Func::Min | Func::Max | Func::Atan2 => format!("{}.{}({})", a[0], f.name(), a[1]),
                Func::Ln => format!("{}.ln()", a[0]),
                Func::Clamp => format!("{}.clamp({}, {})", a[0], a[1], a[2]),
                _ => format!("{}.{}()", a[0], f.name()),
            }
        }
    }
}

fn main() {
    let path = std::env::args()
        .skip(1)
        .find(|a| a != "--bench")
        .unwrap_or_else(|| "specs/energy_longitudinal.yaml".to_string());
    let source = std::fs::read_to_string(&path).expect("read spec");

    // 1. the whole check
    let mut times = Vec::new();
    let mut boxes = 0;
    for _ in 0..5 {
        let mut spec = lawsmith_spec::load(&source).expect("valid spec");
        let t = Instant::now();
        let (r, _) = check(&mut spec, &Settings::default(), &|_, _, _| {}).expect("check");
        times.push(t.elapsed().as_secs_f64());
        boxes = r.boxes;
        assert_eq!(r.verdict.name(), "proven");
    }
    times.sort_by(f64::total_cmp);
    let mut spec = lawsmith_spec::load(&source).expect("valid spec");
    let p = prepare(&mut spec).expect("prepare");
    let gi = p.goals.len() - 1;
    let claim = &p.goals[gi].compiled;
    let root = p.root(gi);
    let t = Instant::now();
    let rep = search(claim, &root, &Budget::default(), &|_, _| {});
    let search_s = t.elapsed().as_secs_f64();

    // 2. falsifier throughput, one thread, against native code on the same points
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("pool");
    let t = Instant::now();
    let sampled = pool.install(|| falsify(claim, &root, POINTS));
    let tape_s = t.elapsed().as_secs_f64();
    let tape_rate = sampled.evaluated as f64 / tape_s;
    let t = Instant::now();
    let sampled_all = falsify(claim, &root, POINTS);
    let tape_all_rate = sampled_all.evaluated as f64 / t.elapsed().as_secs_f64();

    // the batched tape alone, on the same points as the native code (one thread)
    let names: Vec<&str> = claim.names.iter().map(String::as_str).collect();
    let tape = Tape::compile(&p.problem.dag, &[claim.goal.expr], &names).expect("tape");
    let n = names.len();
    let seq = Sequence::new(root.len());
    let rows: Vec<Vec<f64>> = (1..=POINTS as u64).map(|i| seq.point(i, &root)).collect();
    const LANES: usize = 128;
    let columns: Vec<Vec<f64>> = rows
        .chunks(LANES)
        .map(|c| (0..n).flat_map(|k| c.iter().map(move |r| r[k])).collect())
        .collect();
    let (mut scratch, mut out, mut acc) = (Vec::new(), vec![0.0; LANES], 0.0);
    let mut batch_best = f64::INFINITY;
    for _ in 0..5 {
        let t = Instant::now();
        for cols in &columns {
            let lanes = cols.len() / n;
            tape.eval_batch(cols, lanes, &mut scratch, &mut out);
            acc += out[0];
        }
        batch_best = batch_best.min(t.elapsed().as_secs_f64());
    }
    std::hint::black_box(acc);
    let batch_rate = POINTS as f64 / batch_best;

    let expr = rust_expr(&p.problem.dag, claim.goal.expr, &claim.names);
    let mut pts = String::new();
    for i in 1..=POINTS as u64 {
        for v in seq.point(i, &root) {
            let _ = write!(pts, "{v:?},");
        }
    }
    let dir = std::env::temp_dir().join(format!("lawsmith-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    std::fs::write(dir.join("points.txt"), &pts).expect("write points");
    let program = format!(
        r#"use std::hint::black_box;
#[inline(never)]
fn vdot(x: &[f64; {n}]) -> f64 {{ {expr} }}
fn main() {{
    let text = std::fs::read_to_string(std::env::args().nth(1).unwrap()).unwrap();
    let v: Vec<f64> = text.split(',').filter(|s| !s.is_empty()).map(|s| s.parse().unwrap()).collect();
    let pts: Vec<[f64; {n}]> = v.chunks({n}).map(|c| c.try_into().unwrap()).collect();
    let mut best = f64::INFINITY;
    let mut acc = 0.0;
    for _ in 0..5 {{
        let t = std::time::Instant::now();
        for p in &pts {{ acc += vdot(black_box(p)); }}
        best = best.min(t.elapsed().as_secs_f64());
    }}
    println!("{{}} {{}}", pts.len() as f64 / best, black_box(acc));
}}
"#
    );
    let src = dir.join("native_vdot.rs");
    std::fs::write(&src, program).expect("write native source");
    let rustc = std::env::var("RUSTC").unwrap_or_else(|_| "rustc".into());
    let exe = dir.join("native_vdot");
    let status = Command::new(&rustc)
        .args(["--edition", "2021", "-C", "opt-level=3", "-o"])
        .arg(&exe)
        .arg(&src)
        .status()
        .expect("run rustc");
    assert!(status.success(), "rustc failed on the generated V-dot");
    let out = Command::new(&exe)
        .arg(dir.join("points.txt"))
        .output()
        .expect("run native");
    let native_rate: f64 = String::from_utf8_lossy(&out.stdout)
        .split_whitespace()
        .next()
        .and_then(|s| s.parse().ok())
        .expect("native rate");
    let _ = std::fs::remove_dir_all(&dir);

    println!("spec                          {path}");
    println!(
        "check (whole, median of 5)    {:.3} s   (goal <= 1 s; min {:.3} s)",
        times[2], times[0]
    );
    println!("boxes, all searches           {boxes}");
    println!(
        "claim search                  {} boxes in {:.3} s = {:.0} boxes/s",
        rep.boxes,
        search_s,
        rep.boxes as f64 / search_s
    );
    println!(
        "falsifier, 1 thread           {:.3e} evaluations/s ({} points, tape of {} instructions)",
        tape_rate,
        sampled.evaluated,
        claim.tape_len()
    );
    println!("falsifier, all threads        {tape_all_rate:.3e} evaluations/s");
    println!("native V-dot, rustc -O        {native_rate:.3e} evaluations/s");
    println!("batched tape alone, 1 thread  {batch_rate:.3e} evaluations/s");
    println!(
        "ratio falsifier/native        {:.2}   (goal >= 0.3, one thread each; the falsifier also \
         generates the points, checks constraints and computes margins)",
        tape_rate / native_rate
    );
    println!(
        "ratio batched tape/native     {:.2}   (evaluation alone, same points)",
        batch_rate / native_rate
    );
}
