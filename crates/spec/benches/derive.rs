//! Times load + derive + simplify of a spec in-process (release build) and prints the median
//! per-run time. `bench/derive_vs_sympy.py` runs this and SymPy's derivation of the same spec
//! in the same session and prints the ratio.
//!
//! Usage: cargo bench -p lawsmith-spec --bench derive -- [SPEC] [RUNS] (the spec's path is
//! read from the package directory, `crates/spec`, so give it absolute).

use std::time::Instant;

fn main() {
    let mut args = std::env::args().skip(1).filter(|a| a != "--bench");
    let path = args
        .next()
        .unwrap_or_else(|| "specs/energy_longitudinal.yaml".to_string());
    let runs: usize = args.next().and_then(|s| s.parse().ok()).unwrap_or(200);
    let source = std::fs::read_to_string(&path).expect("read spec");
    let mut times = Vec::with_capacity(runs);
    let mut size = 0;
    for _ in 0..runs {
        let t0 = Instant::now();
        let mut spec = lawsmith_spec::load(&source).expect("valid spec");
        let d = lawsmith_spec::derive(&mut spec).expect("derive");
        times.push(t0.elapsed().as_secs_f64());
        size = spec.dag.size(d.vdot);
    }
    times.sort_by(f64::total_cmp);
    let median = times[runs / 2];
    println!(
        "{{\"spec\": \"{path}\", \"runs\": {runs}, \"median_s\": {median:.6e}, \"min_s\": {:.6e}, \"vdot_nodes\": {size}}}",
        times[0]
    );
}
