//! The simulation's models against outside references: SciPy's Riccati solver, the textbook
//! LQR table of checkvalues §2, Lanchester's phugoid.

use lawsmith_sim::airframe::Airframe;
use lawsmith_sim::linear::{care, linearise, lqr, phugoid, trim};
use nalgebra::DMatrix;
use std::io::Write;
use std::process::{Command, Stdio};

fn m(rows: usize, cols: usize, v: &[f64]) -> DMatrix<f64> {
    DMatrix::from_row_slice(rows, cols, v)
}

fn rows(a: &DMatrix<f64>) -> Vec<Vec<f64>> {
    (0..a.nrows())
        .map(|i| a.row(i).iter().copied().collect())
        .collect()
}

#[test]
fn riccati_solutions_match_scipy_to_1e_9() {
    // two coupled spring-mass-dampers (4 states, 2 inputs; checkvalues §2) and the LQR design
    // problem of the demo airframe at trim (7 states with the integrators), solved by SciPy's
    // solve_continuous_are in this run (reference: SciPy)
    let a4 = m(
        4,
        4,
        &[
            0., 1., 0., 0., -2., -0.5, 1., 0., 0., 0., 0., 1., 1., 0., -2., -0.5,
        ],
    );
    let b4 = m(4, 2, &[0., 0., 1., 0., 0., 0., 0., 1.]);
    let q4 = DMatrix::from_diagonal(&nalgebra::DVector::from_row_slice(&[10., 1., 10., 1.]));
    let r4 = DMatrix::from_diagonal(&nalgebra::DVector::from_row_slice(&[1., 0.5]));
    let af = Airframe::default();
    let t = trim(&af, 22.0, 120.0, 0.0).unwrap();
    let (a, b) = linearise(&af, &t);
    let q5 = DMatrix::from_diagonal(&nalgebra::DVector::from_row_slice(&[
        1.0, 1.0, 25.0, 100.0, 0.25,
    ]));
    let r5 = DMatrix::from_diagonal(&nalgebra::DVector::from_row_slice(&[100.0, 25.0]));
    let cases = [(a4, b4, q4, r4), (a, b, q5, r5)];
    let json: Vec<serde_json::Value> = cases
        .iter()
        .map(|(a, b, q, r)| serde_json::json!({"a": rows(a), "b": rows(b), "q": rows(q), "r": rows(r)}))
        .collect();
    let mut child = Command::new("python3")
        .arg(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../../tests/python/care_scipy.py"
        ))
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .spawn()
        .expect("python3 with scipy (see .ci/run)");
    child
        .stdin
        .take()
        .unwrap()
        .write_all(serde_json::to_string(&json).unwrap().as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let scipy: Vec<Vec<Vec<f64>>> = serde_json::from_slice(&out.stdout).unwrap();
    for ((a, b, q, r), want) in cases.iter().zip(&scipy) {
        let p = care(a, b, q, r).unwrap();
        let scale = p.iter().fold(0.0f64, |s, x| s.max(x.abs()));
        let mut worst = 0.0f64;
        for (i, row) in want.iter().enumerate() {
            for (j, w) in row.iter().enumerate() {
                // relative to the entry, or to the largest entry for entries near zero
                worst = worst.max((p[(i, j)] - w).abs() / w.abs().max(1e-6 * scale));
            }
        }
        println!(
            "{}x{} Riccati: max relative difference from SciPy {worst:.2e}",
            a.nrows(),
            a.nrows()
        );
        assert!(worst < 1e-9, "{worst:e}\n{p}\n{want:?}");
    }
    // the 4-state solution also against the 12-digit table of checkvalues §2 (SciPy and a
    // 50-digit mpmath solution agree on it)
    let (a, b, q, r) = &cases[0];
    let k = lqr(a, b, q, r).unwrap();
    let table = [
        [1.79491931440, 1.68909968713, 0.504962446716, 0.154403997052],
        [0.555956314694, 0.308807994105, 3.05073020876, 2.38162787828],
    ];
    for (i, row) in table.iter().enumerate() {
        for (j, w) in row.iter().enumerate() {
            assert!(
                (k[(i, j)] - w).abs() / w < 1e-10,
                "K[{i},{j}] = {} vs {w}",
                k[(i, j)]
            );
        }
    }
}

#[test]
fn the_phugoid_period_is_lanchesters_within_ten_percent() {
    // Lanchester's approximation T = π·√2·V/g (Lanchester 1908; Etkin & Reid; from memory),
    // 10% tolerance for a rigid-body model with drag (common practice), at two speeds
    let af = Airframe::default();
    for v in [18.0, 22.0] {
        let t = trim(&af, v, 120.0, 0.0).unwrap();
        assert!(t.residual < 1e-9, "trim residual {}", t.residual);
        let (a, _) = linearise(&af, &t);
        let (period, zeta) = phugoid(&a).expect("a phugoid");
        let lanchester = std::f64::consts::PI * 2f64.sqrt() * v / 9.80665;
        println!("phugoid at {v} m/s: period {period:.3} s (Lanchester {lanchester:.3} s), damping {zeta:.3}");
        assert!(
            (period - lanchester).abs() / lanchester < 0.10,
            "{period} vs {lanchester}"
        );
    }
}
