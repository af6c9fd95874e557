//! The fuzz harnesses (fuzz/harness.rs) over their seed corpus: every spec of specs/ and
//! tests/data, each also cut short at several points and with bytes flipped, and the formulas
//! of fuzz/corpus/formula. This builds and exercises the harness on every `cargo test`; the
//! long libFuzzer runs are described in fuzz/README.md.

#[path = "../fuzz/harness.rs"]
mod harness;

use std::path::{Path, PathBuf};

fn files(dir: &Path, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            files(&p, out);
        } else if p.extension().is_some_and(|x| x == "yaml") {
            out.push(p);
        }
    }
}

fn specs() -> Vec<Vec<u8>> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut paths = Vec::new();
    for d in ["specs", "tests/data"] {
        files(&root.join(d), &mut paths);
    }
    paths.sort();
    paths.iter().map(|p| std::fs::read(p).unwrap()).collect()
}

/// The input, some prefixes of it and some single-byte edits (deterministic).
fn variants(data: &[u8]) -> Vec<Vec<u8>> {
    let mut v = vec![data.to_vec()];
    for k in 1..8 {
        v.push(data[..data.len() * k / 8].to_vec());
    }
    for k in 0..16 {
        if data.is_empty() {
            break;
        }
        let i = (k * 7919 + 13) % data.len();
        for b in [b'(', b'-', b':', b'[', b'\n', 0xff] {
            let mut d = data.to_vec();
            d[i] = b;
            v.push(d);
        }
    }
    v
}

/// The inputs fuzzing found problems with (fuzz/regressions/TARGET/): each must now pass.
fn regressions(target: &str) -> Vec<Vec<u8>> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fuzz/regressions")
        .join(target);
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    v.sort();
    v.iter().map(|p| std::fs::read(p).unwrap()).collect()
}

#[test]
fn inputs_fuzzing_found_are_handled() {
    // `x^-r^ey^-6^-666666663 - -y` once took minutes (6^-666666663 computed exactly), and a
    // 60-digit decimal to the power -303 seconds: exact powers are bounded in bits now
    for d in regressions("formula") {
        harness::formula(&d);
    }
    // a byte-order mark inside a unit once panicked the unit parser (slicing inside a char)
    for d in regressions("spec") {
        harness::spec(&d);
        let text = String::from_utf8(d).unwrap();
        let diags = lawsmith_spec::load(&text).expect_err("a unit with U+FEFF is invalid");
        assert!(diags.iter().any(|d| d.class == "bad-unit"), "{diags:?}");
    }
}

#[test]
fn the_spec_harness_survives_its_corpus() {
    let mut n = 0;
    for s in specs() {
        for d in variants(&s) {
            harness::spec(&d);
            n += 1;
        }
    }
    println!("spec harness: {n} inputs");
    assert!(n > 1000);
}

#[test]
fn the_formula_harness_survives_its_corpus() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut n = 0;
    let mut seeds: Vec<Vec<u8>> = std::fs::read_dir(root.join("fuzz/corpus/formula"))
        .unwrap()
        .map(|e| std::fs::read(e.unwrap().path()).unwrap())
        .collect();
    // and every formula-looking line of the specs
    for s in specs() {
        for line in String::from_utf8_lossy(&s).lines() {
            if let Some((_, f)) = line.split_once(": ") {
                if f.contains(['*', '+', '(']) && !f.contains('{') {
                    seeds.push(f.as_bytes().to_vec());
                }
            }
        }
    }
    for s in &seeds {
        for d in variants(s) {
            harness::formula(&d);
            n += 1;
        }
    }
    println!("formula harness: {n} inputs");
    assert!(n > 1000);
}

#[test]
fn the_check_emit_harness_survives_its_corpus() {
    // the small specs (the whole path is slow on the aircraft specs)
    let mut n = 0;
    for s in specs().into_iter().filter(|s| s.len() < 1500) {
        for d in variants(&s).into_iter().step_by(5) {
            harness::check_emit(&d);
            n += 1;
        }
    }
    println!("check/emit harness: {n} inputs");
    assert!(n > 50);
}
