//! Acceptance checks of the derivation on the example specs.

use lawsmith_expr::{lower, parse, simplify, to_text, AssumeAll, AssumeNothing, PlainSymbols};
use lawsmith_spec::{derive, derive_with, load, Spec};
use std::collections::HashMap;

fn spec(name: &str) -> Spec {
    let path = format!("{}/../../specs/{name}.yaml", env!("CARGO_MANIFEST_DIR"));
    load(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// Lowers `text` in the spec's DAG with the `where` names replaced by their definitions.
fn in_where_names(spec: &mut Spec, text: &str) -> lawsmith_expr::ExprId {
    let ast = parse(text).unwrap();
    let mut errors = Vec::new();
    let e = lower(&mut spec.dag, &ast, &mut PlainSymbols, &mut errors).unwrap();
    let map: HashMap<String, _> = spec.where_defs.iter().cloned().collect();
    spec.dag.substitute(e, &map)
}

// The reference law's closed loop gives V̇ = −k_tot·et² − k_bal·eb² (derived by hand and
// verified with SymPy in ../shared/checkvalues.md §5), under the well-posedness side conditions.
#[test]
fn energy_law_vdot_is_minus_gains_times_squared_errors() {
    for name in ["energy_longitudinal", "energy_pitch"] {
        let mut s = spec(name);
        let d = derive(&mut s).unwrap();
        let expected = in_where_names(&mut s, "-k_tot*et^2 - k_bal*eb^2");
        let expected = simplify(&mut s.dag, expected, &mut AssumeAll::default());
        assert_eq!(d.vdot, expected, "{name}: {}", to_text(&s.dag, d.vdot));
        // the simplification relied on sin(asin(u)) = u
        assert!(d.assumptions.iter().any(|(rule, _)| *rule == "sin-asin"));
    }
}

#[test]
fn without_the_side_conditions_vdot_does_not_collapse() {
    let mut s = spec("energy_longitudinal");
    let d = derive_with(&mut s, &mut AssumeNothing).unwrap();
    let text = to_text(&s.dag, d.vdot);
    assert!(text.contains("sin(asin("), "{text}");
}

#[test]
fn pendulum_damping_vdot_is_semidefinite_form() {
    let mut s = spec("pendulum_damping");
    let d = derive(&mut s).unwrap();
    assert_eq!(to_text(&s.dag, d.vdot), "-k_d*omega^2");
}

#[test]
fn energy_relations_match_the_check_values() {
    // ../shared/checkvalues.md §4 (Lambregts 1983, from memory): m = 7.5 kg, h = 120 m,
    // V = 22 m/s, g = 9.80665 → Ep = 8825.985 J, Ek = 1815.000 J, Et = 10640.985 J.
    let s = spec("energy_longitudinal");
    let env: HashMap<String, f64> = [("mass", 7.5), ("g", 9.80665), ("h", 120.0), ("va", 22.0)]
        .into_iter()
        .map(|(k, v)| (k.to_string(), v))
        .collect();
    let get = |n: &str| {
        let e = s.energies.iter().find(|(k, _)| k == n).unwrap().1;
        lawsmith_expr::eval(&s.dag, e, &env).unwrap()
    };
    assert!((get("e_pot") - 8825.985).abs() < 1e-9);
    assert!((get("e_kin") - 1815.000).abs() < 1e-9);
    assert!((get("e_tot") - 10640.985).abs() < 1e-9);
}

#[test]
fn a_100000_deep_formula_is_an_error_not_a_crash() {
    let base = std::fs::read_to_string(format!(
        "{}/../../tests/data/ok/spring_tracking.yaml",
        env!("CARGO_MANIFEST_DIR")
    ))
    .unwrap();
    let deep = format!("{}v{}", "(".repeat(100_000), ")".repeat(100_000));
    let source = base.replace("  x: v\n", &format!("  x: {deep}\n"));
    let diags = load(&source).unwrap_err();
    assert!(diags
        .iter()
        .any(|d| d.class == "syntax" && d.message.contains("deeper than")));
}
