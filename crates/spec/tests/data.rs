//! Tests as data: every file in `tests/data/err` must fail (to load, or to derive) with a
//! located diagnostic of the class its file name starts with (snapshot-locked rendering), every file in `tests/data/ok`
//! must load and derive.

use lawsmith_spec::{derive, load, render};
use std::path::Path;

fn rel(path: &Path) -> String {
    format!(
        "tests/data/{}/{}",
        path.parent()
            .unwrap()
            .file_name()
            .unwrap()
            .to_string_lossy(),
        path.file_name().unwrap().to_string_lossy()
    )
}

#[test]
fn every_bad_input_gets_a_located_diagnostic() {
    insta::glob!("../../../tests/data", "err/*.yaml", |path| {
        let source = std::fs::read_to_string(path).unwrap();
        // rejected by the loader, or (a budget of the derivation) by `derive`
        let diags = match load(&source) {
            Err(diags) => diags,
            Ok(mut spec) => vec![derive(&mut spec)
                .expect_err("must be rejected by load or derive")
                .diagnostic()],
        };
        let stem = path.file_stem().unwrap().to_string_lossy().to_string();
        assert!(
            diags.iter().any(|d| stem.starts_with(d.class)),
            "{stem}: classes {:?}",
            diags.iter().map(|d| d.class).collect::<Vec<_>>()
        );
        for d in &diags {
            assert!(
                d.span.start <= source.len(),
                "{stem}: span outside the file"
            );
        }
        insta::assert_snapshot!(render(&rel(path), &source, &diags));
    });
}

#[test]
fn every_good_spec_loads_and_derives() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../tests/data/ok");
    let mut count = 0;
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        let source = std::fs::read_to_string(&path).unwrap();
        let mut spec =
            load(&source).unwrap_or_else(|d| panic!("{}", render(&rel(&path), &source, &d)));
        let d = derive(&mut spec).unwrap();
        // the examples stay far inside the expansion budget
        assert!(
            d.work * 1000 < lawsmith_expr::DEFAULT_MAX_TERM_PRODUCTS,
            "{}: {} term products",
            path.display(),
            d.work
        );
        count += 1;
    }
    assert!(count >= 4);
}

#[test]
fn there_are_at_least_twelve_classes_of_bad_input() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../tests/data/err");
    assert!(std::fs::read_dir(dir).unwrap().count() >= 12);
}

#[test]
fn an_actuator_in_degrees_has_its_limits_in_radians() {
    // 20° = π/9 rad, 25° = 5π/36 rad (common practice)
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../tests/data/ok");
    let text = std::fs::read_to_string(dir.join("pitch_limits_in_degrees.yaml")).unwrap();
    let spec = load(&text).unwrap();
    let a = spec
        .actuators
        .iter()
        .find(|a| a.name == "pitch_cmd")
        .unwrap();
    assert_eq!(a.unit, "rad");
    let (lo, hi) = a.limits.nearest();
    assert!((lo + std::f64::consts::PI / 9.0).abs() < 1e-15, "{lo}");
    assert!(
        (hi - 5.0 * std::f64::consts::PI / 36.0).abs() < 1e-15,
        "{hi}"
    );
    // anywhere else `deg` is refused, with the reason
    let bad = text.replace("alpha: { unit: rad", "alpha: { unit: deg");
    let d = load(&bad).unwrap_err();
    assert!(
        d.iter()
            .any(|d| d.class == "bad-unit" && d.message.contains("actuator")),
        "{d:?}"
    );
}
