//! Benchmark: wall time of a Monte Carlo campaign of 1,000 dispersed runs of the 120 s
//! `combined` scenario (each run flies the energy law, PID and LQR: 3,000 flights), on every
//! thread and on one, and the speed-up. Goal: ≤ 10 s on the 2-core development machine.
//!
//! Usage: cargo bench --bench montecarlo -- [RUNS]

use lawsmith_sim::montecarlo::campaign;
use lawsmith_sim::run::Setup;
use lawsmith_sim::scenario::Scenario;
use std::time::Instant;

fn main() {
    let runs: usize = std::env::args()
        .skip(1)
        .find(|a| a != "--bench")
        .and_then(|a| a.parse().ok())
        .unwrap_or(1000);
    let text = std::fs::read_to_string("specs/scenarios/combined.yaml").expect("scenario");
    let scenario = Scenario::parse(&text).expect("valid scenario");
    assert_eq!(scenario.duration, 120.0);
    let spec = lawsmith_spec::load(
        &std::fs::read_to_string("specs/energy_longitudinal.yaml").expect("spec"),
    )
    .expect("valid spec");
    let setup = Setup::new(scenario, &spec).expect("setup");
    let threads = rayon::current_num_threads();
    let t = Instant::now();
    let all = campaign(&setup, runs, 1).expect("campaign");
    let wall = t.elapsed().as_secs_f64();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("pool");
    let t = Instant::now();
    let one = pool.install(|| campaign(&setup, runs, 1).expect("campaign"));
    let single = t.elapsed().as_secs_f64();
    // bit for bit (NaN marks undefined metrics, so `==` would not do)
    let bits = |c: &lawsmith_sim::montecarlo::Campaign| -> Vec<u64> {
        c.values
            .values()
            .flat_map(|m| m.values().flatten().map(|x| x.to_bits()))
            .collect()
    };
    assert!(
        bits(&all) == bits(&one),
        "results must not depend on the thread count"
    );
    let flights = runs * all.values.len();
    println!("Monte Carlo: {runs} dispersed runs x 120 s of `combined` ({flights} flights, plant RK4 at {} Hz)", setup.scenario.rates.plant);
    println!("  {threads} threads   {wall:.2} s   (goal <= 10 s)");
    println!("  1 thread    {single:.2} s");
    println!("  speed-up    {:.2}x", single / wall);
    println!(
        "  per flight  {:.2} ms of one core",
        1000.0 * single / flights as f64
    );
}
