//! `check` with `roundoff`: the bounds of the reference law in both precisions, and a law
//! whose round-off the independent checker cannot redo gets none.

use lawsmith_verify::{check, Settings};
use std::path::PathBuf;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn roundoff_of(file: &str) -> Result<lawsmith_verify::RoundoffReport, String> {
    let text = std::fs::read_to_string(root().join(file)).unwrap();
    let mut spec = lawsmith_spec::load(&text).unwrap();
    let settings = Settings {
        roundoff: true,
        ..Settings::default()
    };
    let (r, _) = check(&mut spec, &settings, &|_, _, _| {}).unwrap();
    r.roundoff.expect("asked for")
}

#[test]
fn the_reference_law_has_a_bound_per_command_and_precision() {
    let ro = roundoff_of("specs/energy_longitudinal.yaml").unwrap();
    assert_eq!(ro.precisions.len(), 2);
    let (f64s, f32s) = (&ro.precisions[0].3, &ro.precisions[1].3);
    assert_eq!(f64s.len(), 2);
    for (a, b) in f64s.iter().zip(f32s) {
        // single precision rounds 2^29 times coarser (IEEE 754: 24 against 53 bits); its
        // bound is larger by about that factor, and both are finite
        assert!(a.bound.is_finite() && b.bound.is_finite(), "{a:?} {b:?}");
        let ratio = b.bound / a.bound;
        assert!(ratio > 1e7 && ratio < 1e10, "{}: {ratio:e}", a.output);
    }
}

#[test]
fn a_law_with_an_operation_the_independent_checker_does_not_analyse_gets_no_bound() {
    let why = roundoff_of("tests/data/check/atan2_right_half_plane.yaml").unwrap_err();
    assert!(why.contains("atan2"), "{why}");
}
