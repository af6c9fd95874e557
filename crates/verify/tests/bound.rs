//! Ultimate bounds with estimate errors: the textbook scalar case, soundness of the aircraft
//! bound by dense sampling, the reduction to the plain proof with zero error, certificates,
//! required bounds and the margin curve.

use lawsmith_spec::load;
use lawsmith_verify::{
    certificate, check, margin, recheck, BoundOutcome, BoundReport, CheckReport, Interval,
    MarginSettings, Origin, Prepared, Scratch, Sequence, Settings, Verdict,
};

const SCALAR: &str = include_str!("../../../tests/data/bound/scalar_disturbance.yaml");
const AIRCRAFT: &str = include_str!("../../../specs/energy_longitudinal_uncertain.yaml");

/// A named edit of a certificate.
type Edit<'a> = Box<dyn Fn(&mut serde_json::Value) + 'a>;

fn run(text: &str) -> (CheckReport, Prepared) {
    let mut spec = load(text).expect("spec loads");
    check(&mut spec, &Settings::default(), &|_, _, _| {}).expect("check runs")
}

fn bound(r: &CheckReport) -> &BoundReport {
    r.bound.as_ref().expect("an ultimate-bound claim")
}

#[test]
fn the_scalar_bound_is_the_textbook_delta_over_k() {
    // x' = -k x + d, |d| <= delta, V = x^2/2: V-dot < 0 wherever |x| > delta/k, so the
    // ultimate bound is |x| <= delta/k (a standard result of Lyapunov analysis, e.g. Khalil,
    // Nonlinear Systems, ch. 9; from memory). Here delta = 0.5 and the smallest gain is 2.
    let (r, _) = run(SCALAR);
    assert_eq!(r.verdict, Verdict::Proven);
    let b = bound(&r);
    let exact = 0.5 / 2.0;
    let e = &b.bounds[0];
    for end in [e.upper, -e.lower] {
        let rel = (end - exact) / exact;
        assert!(
            (0.0..0.01).contains(&rel),
            "bound {end} vs {exact}: {:.3}%",
            100.0 * rel
        );
    }
    // the level is bracketed by a refuted level below and the proved one above, around the
    // exact (delta/k)^2/2
    let c = exact * exact / 2.0;
    let refuted = b.refuted_level.expect("a refuting point");
    assert!(
        refuted <= c && c <= b.level,
        "{refuted} <= {c} <= {}",
        b.level
    );
    assert!((b.level - c) / c < 0.01);
    println!(
        "scalar: bound [{}, {}] (exact ±{exact}), level {} in ({refuted}, exact {c})",
        e.lower, e.upper, b.level
    );
}

#[test]
fn with_zero_uncertainty_the_claim_is_the_plain_proof() {
    for (text, from, to) in [
        (SCALAR, "absolute: [-0.5, 0.5]", "absolute: [0, 0]"),
        (AIRCRAFT, "relative: [-0.2, 0.2]", "relative: [0, 0]"),
    ] {
        let text = text.replace(from, to);
        let text = text.replace("absolute: [-0.3, 0.3]", "absolute: [0, 0]");
        let (r, _) = run(&text);
        assert_eq!(r.verdict, Verdict::Proven, "{}", r.name);
        let b = bound(&r);
        assert_eq!(b.level, 0.0, "{}", r.name);
        assert!(matches!(b.outcome, BoundOutcome::Proven));
        // the one level proof is the negative-definite proof, closed at the origin by the
        // Hessian test
        let rep = b.level_report.as_ref().unwrap();
        assert!(rep.by_hessian > 0, "{}", r.name);
        assert_eq!(b.steps.len(), 1);
        assert!(b.bounds.iter().all(|e| e.lower == 0.0 && e.upper == 0.0));
    }
}

/// Points of the level goal's domain: the sequence, and every other point moved to the worst
/// vertex of the coordinates the goal is affine in (the estimate errors among them).
fn violations(p: &Prepared, level: f64, n: u64) -> (usize, usize, f64) {
    let gi = p.claim_index().unwrap();
    let g = &p.goals[gi].compiled;
    let root: Vec<Interval> = p.root(gi);
    let seq = Sequence::new(root.len());
    let mut s = Scratch::default();
    let (mut above, mut bad, mut worst) = (0, 0, f64::NEG_INFINITY);
    for i in 1..=n {
        let x = seq.point(i, &root);
        let x = if i % 2 == 0 {
            g.worst_vertex(&x, &root, &mut s).unwrap_or(x)
        } else {
            x
        };
        if !g.feasible_f64(&x, &mut s) {
            continue;
        }
        let v = g.region_value(&x, &mut s).unwrap();
        if v >= level {
            above += 1;
            let vdot = g.value(&x, &mut s);
            worst = worst.max(vdot);
            if vdot >= 0.0 {
                bad += 1;
            }
        }
    }
    (above, bad, worst)
}

#[test]
fn the_aircraft_bound_is_sound_at_a_million_points() {
    let (r, p) = run(AIRCRAFT);
    assert_eq!(r.verdict, Verdict::Proven);
    let b = bound(&r);
    assert!(b.level > 0.0 && b.level < b.attraction);
    let (above, bad, worst) = violations(&p, b.level, 1_000_000);
    println!(
        "level {}: {above} of 1,000,000 points have V >= c, none may have dV/dt >= 0 ({bad}); largest dV/dt there {worst}",
        b.level
    );
    assert!(above > 100_000, "the sample must reach the region V >= c");
    assert_eq!(bad, 0);
    assert!(worst < 0.0);
    // the same sampling does see violations just below the refuted level: it can fail
    let refuted = b.refuted_level.unwrap();
    let (_, below, _) = violations(&p, 0.5 * refuted, 200_000);
    assert!(below > 0, "no violation found at half the refuted level");
    // and the bounds are those of the level set: every sampled point with V <= c lies
    // inside them
    let sub = p.sublevel().unwrap();
    let root = p.sublevel_root();
    let seq = Sequence::new(root.len());
    let mut s = Scratch::default();
    let mut inside = 0;
    for i in 1..=200_000 {
        let x = seq.point(i, &root);
        if sub.value(&x, &mut s) <= b.level {
            inside += 1;
            for (e, &k) in b.bounds.iter().zip(&sub.errors) {
                assert!(x[k] >= e.lower && x[k] <= e.upper, "{} = {}", e.state, x[k]);
            }
        }
    }
    assert!(inside > 1000);
    println!(
        "bounds {:?}",
        b.bounds
            .iter()
            .map(|e| (e.state.as_str(), e.lower, e.upper))
            .collect::<Vec<_>>()
    );
}

#[test]
fn recheck_accepts_the_bound_certificate_and_rejects_edits() {
    let mut spec = load(AIRCRAFT).unwrap();
    let (r, p) = check(&mut spec, &Settings::default(), &|_, _, _| {}).unwrap();
    let origin = Origin {
        file: "energy_longitudinal_uncertain.yaml",
        sha256: "x".into(),
        tool_version: "test",
        settings: serde_json::json!({}),
    };
    let cert = certificate(&r, &p, &origin);
    let ok = recheck(&cert, "x", &p).expect("accepted");
    assert_eq!(ok.verdict, Verdict::Proven);
    println!("{} leaves re-evaluated", ok.leaves);
    let gi = p.claim_index().unwrap();
    let edits: Vec<(&str, Edit)> = vec![
        (
            "a smaller level",
            Box::new(|c| {
                let b = &mut c["goals"][gi]["ultimate_bound"];
                b["level"] = serde_json::json!(b["level"].as_f64().unwrap() * 0.9);
            }),
        ),
        (
            "a tighter bound",
            Box::new(|c| {
                let e = &mut c["goals"][gi]["ultimate_bound"]["bounds"][0];
                e["upper"] = serde_json::json!(e["upper"].as_f64().unwrap() * 0.9);
            }),
        ),
        (
            "a larger region of attraction",
            Box::new(|c| {
                let b = &mut c["goals"][gi]["ultimate_bound"];
                b["attraction"] = serde_json::json!(b["attraction"].as_f64().unwrap() * 1.1);
            }),
        ),
        (
            "a sublevel proof dropped",
            Box::new(|c| {
                let v = c["goals"][gi]["ultimate_bound"]["sublevel"]
                    .as_array_mut()
                    .unwrap();
                v.pop();
            }),
        ),
    ];
    for (what, edit) in edits {
        let mut c = cert.clone();
        edit(&mut c);
        assert!(recheck(&c, "x", &p).is_err(), "{what} was accepted");
    }
}

#[test]
fn required_bounds_are_met_or_refuted() {
    let met = SCALAR.replace("{ ultimate_bound: auto }", "{ ultimate_bound: { x: 0.3 } }");
    let (r, _) = run(&met);
    assert_eq!(r.verdict, Verdict::Proven);
    assert!(bound(&r).required.iter().all(|x| x.2));
    // |x| <= 0.2 cannot be shown with this V: V-dot >= 0 at points with V up to
    // (0.25)^2/2, so every invariant sublevel set reaches |x| = 0.25
    let missed = SCALAR.replace("{ ultimate_bound: auto }", "{ ultimate_bound: [0.2] }");
    let (r, _) = run(&missed);
    assert_eq!(r.verdict, Verdict::Falsified);
    let cx = r.counterexample.as_ref().unwrap();
    assert!(cx.vdot.unwrap() >= 0.0);
}

#[test]
fn a_certificate_retargeted_to_a_spec_requiring_tighter_bounds_is_rejected() {
    // the audit's edit: the certificate of `auto`, its SHA-256 set to the spec that requires
    // |x| <= 0.2 (which `check` falsifies, above) and its own `required` list emptied
    let origin = |sha: &str| Origin {
        file: "scalar_disturbance.yaml",
        sha256: sha.into(),
        tool_version: "test",
        settings: serde_json::json!({}),
    };
    let (r, p) = run(SCALAR);
    let mut cert = certificate(&r, &p, &origin("auto"));
    let strict = SCALAR.replace("{ ultimate_bound: auto }", "{ ultimate_bound: [0.2] }");
    let mut spec = load(&strict).unwrap();
    let p_strict = lawsmith_verify::prepare(&mut spec).unwrap();
    cert["spec"]["sha256"] = serde_json::json!("strict");
    let gi = p.claim_index().unwrap();
    cert["goals"][gi]["ultimate_bound"]["required"] = serde_json::json!([]);
    let e = recheck(&cert, "strict", &p_strict).expect_err("retargeted certificate accepted");
    assert!(e.0.contains("required bounds differ"), "{e}");
    // with the spec's list written back, the proved bound itself fails the requirement
    cert["goals"][gi]["ultimate_bound"]["required"] =
        serde_json::json!([{"state": "x", "bound": 0.2, "met": true}]);
    let e = recheck(&cert, "strict", &p_strict).expect_err("retargeted certificate accepted");
    assert!(e.0.contains("exceeds the spec's required 0.2"), "{e}");
    // and a looser requirement the proved bound meets is accepted
    let loose = SCALAR.replace("{ ultimate_bound: auto }", "{ ultimate_bound: [0.3] }");
    let mut spec = load(&loose).unwrap();
    let p_loose = lawsmith_verify::prepare(&mut spec).unwrap();
    cert["goals"][gi]["ultimate_bound"]["required"] =
        serde_json::json!([{"state": "x", "bound": 0.3, "met": true}]);
    recheck(&cert, "strict", &p_loose).expect("a met requirement is accepted");
}

#[test]
fn the_margin_curve_is_monotone_and_finds_the_largest_error() {
    // the largest input error with |x| <= 0.2 is 0.2*k = 0.4, a factor 0.8 of the declared 0.5
    let r = margin(
        SCALAR,
        "u_true",
        &[("x".into(), 0.2)],
        &Settings::default(),
        &MarginSettings::default(),
        &|_, _, _| {},
    )
    .unwrap();
    let l = r.largest.as_ref().unwrap();
    assert!((l.factor - 0.8).abs() / 0.8 < 0.02, "factor {}", l.factor);
    assert!(l.met && !r.unbounded);
    let mut last = -1.0;
    for p in r.curve.iter().filter(|p| !p.bounds.is_empty()) {
        let b = p.bounds[0].magnitude();
        assert!(b > last, "bound {b} after {last}");
        // and the curve is the textbook one
        let exact = 0.5 * p.factor / 2.0;
        assert!(
            (b - exact).abs() <= 0.01 * exact.max(1e-9),
            "{b} vs {exact}"
        );
        last = b;
    }
}

#[test]
fn the_aircraft_margin_curve_is_monotone() {
    let r = margin(
        AIRCRAFT,
        "drag_true",
        &[("h".into(), 3.0), ("va".into(), 1.0)],
        &Settings::default(),
        &MarginSettings {
            factors: vec![0.0, 0.5, 1.0],
            // coarse: the scalar test above checks the bisection's accuracy
            tolerance: 0.5,
        },
        &|_, _, _| {},
    )
    .unwrap();
    for w in r.curve.windows(2) {
        for (a, b) in w[0].bounds.iter().zip(&w[1].bounds) {
            assert!(
                b.magnitude() > a.magnitude(),
                "{}: {} then {}",
                a.state,
                a.magnitude(),
                b.magnitude()
            );
        }
    }
    let l = r.largest.as_ref().unwrap();
    assert!(l.factor > 0.0 && l.factor < 0.5 && l.met);
    println!(
        "largest drag error meeting |h| <= 3 m, |va| <= 1 m/s: {:.2}%",
        100.0 * l.magnitude
    );
}
