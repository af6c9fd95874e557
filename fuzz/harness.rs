//! The fuzz harnesses, shared by the libFuzzer targets in `fuzz/fuzz_targets/` and by the
//! workspace test `tests/fuzz_corpus.rs`, which runs them over the seed corpus on every
//! `cargo test` (so the harness is built and exercised in CI even where fuzzing is not run).
//!
//! Each harness must return normally on every input: a panic, an abort or a hang is a bug.

use std::time::Duration;

/// The expansion budget of the harnesses: milliseconds of work (tens in an instrumented build).
const FUZZ_TERM_PRODUCTS: u64 = 5_000;

/// The derivation's limits in the harnesses.
fn fuzz_limits() -> lawsmith_expr::DagLimits {
    lawsmith_expr::DagLimits {
        max_term_products: FUZZ_TERM_PRODUCTS,
        ..Default::default()
    }
}

/// A formula: parse, and on success lower, print, differentiate and simplify.
pub fn formula(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(ast) = lawsmith_expr::parse(text) else {
        return;
    };
    // a tight expansion budget keeps every input fast; hitting it is a normal outcome
    let mut dag = lawsmith_expr::Dag::with_limits(fuzz_limits());
    let mut errors = Vec::new();
    if let Some(e) = lawsmith_expr::lower(
        &mut dag,
        &ast,
        &mut lawsmith_expr::PlainSymbols,
        &mut errors,
    ) {
        let printed = lawsmith_expr::to_text(&dag, e);
        // printing is faithful: the printed text parses again
        assert!(lawsmith_expr::parse(&printed).is_ok(), "{printed}");
        let _ = lawsmith_expr::to_latex(&dag, e);
        for s in dag.symbols(e).into_iter().take(2) {
            let d = lawsmith_expr::derivative(&mut dag, e, &s);
            if dag.over_budget() {
                return;
            }
            let _ = lawsmith_expr::simplify(&mut dag, d, &mut lawsmith_expr::AssumeNothing);
        }
    }
}

/// A spec: load (all diagnostics rendered), and derive what loads.
pub fn spec(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match lawsmith_spec::load(text) {
        Err(diags) => {
            let _ = lawsmith_spec::render("fuzz.yaml", text, &diags);
        }
        Ok(mut s) => {
            s.dag.set_limits(fuzz_limits());
            let _ = lawsmith_spec::derive(&mut s);
        }
    }
}

/// The whole path on a small spec: load, check with small budgets, and emit Rust and C.
pub fn check_emit(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(mut s) = lawsmith_spec::load(text) else {
        return;
    };
    let settings = lawsmith_verify::Settings {
        samples: 50,
        budget: lawsmith_verify::Budget {
            max_boxes: 200,
            max_queue: 2_000,
            time_limit: Duration::from_millis(50),
        },
        dag: fuzz_limits(),
        ..Default::default()
    };
    let Ok((report, _)) = lawsmith_verify::check(&mut s, &settings, &|_, _, _| {}) else {
        return;
    };
    let Ok(controller) = lawsmith_codegen::Controller::new(&s) else {
        return;
    };
    let prov = lawsmith_codegen::Provenance {
        spec_file: "fuzz.yaml".into(),
        spec_sha256: String::new(),
        tool_version: String::new(),
        claim: report.claim.name(),
        verdict: report.verdict.name().to_string(),
        figures: lawsmith_verify::report::proof_figures(&report, ""),
    };
    let _ = lawsmith_codegen::generate(
        &controller,
        &prov,
        lawsmith_codegen::Lang::All,
        lawsmith_codegen::Float::F64,
    );
}
