//! The emitted Rust and C of every spec in `specs/`, locked in insta snapshots; and two emits
//! of the same spec give the same bytes.

use lawsmith_codegen::{generate, Controller, Float, Lang, Provenance};
use lawsmith_verify::{check, sha256_hex, Settings};

fn emit(path: &std::path::Path) -> Vec<(String, String)> {
    let bytes = std::fs::read(path).unwrap();
    let mut spec = lawsmith_spec::load(std::str::from_utf8(&bytes).unwrap()).unwrap();
    let (report, _) = check(&mut spec, &Settings::default(), &|_, _, _| {}).unwrap();
    let c = Controller::new(&spec).unwrap();
    let prov = Provenance {
        spec_file: format!("specs/{}", path.file_name().unwrap().to_string_lossy()),
        spec_sha256: sha256_hex(&bytes),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        claim: report.claim.name(),
        verdict: report.verdict.name().into(),
        figures: lawsmith_verify::report::proof_figures(&report, &"0".repeat(64)),
    };
    generate(&c, &prov, Lang::All, Float::F64).unwrap()
}

#[test]
fn emitted_code_of_every_spec_is_locked() {
    insta::glob!("../../../specs", "*.yaml", |path| {
        let files = emit(path);
        assert_eq!(files.len(), 3);
        for (name, text) in &files {
            insta::assert_snapshot!(name.clone(), text);
        }
    });
}

#[test]
fn two_emits_give_the_same_bytes() {
    let path =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../specs/energy_pitch.yaml");
    let a = emit(&path);
    let b = emit(&path);
    assert_eq!(a, b);
}
