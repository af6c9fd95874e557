//! The guidance rates that keep every command within its limits: the textbook tracking loop
//! with its exact answer, a set too large for any rate, the claims they are not sought for,
//! and certificates that re-check. Then the region of attraction of the saturated law: an
//! unstable plant with its exact region, and a chain of three integrators, which saturated
//! feedback cannot stabilize globally.

use lawsmith_spec::load;
use lawsmith_verify::{
    certificate, check, prepare, recheck, sha256_hex, CheckReport, Origin, ProvedRegion,
    RateLimits, RatesOutcome, SaturatedRegion, Settings, Verdict, RATE_STEPS,
};

const TRACKING: &str = include_str!("../../../tests/data/rates/tracking_rate.yaml");
const UNSTABLE: &str = include_str!("../../../tests/data/rates/unstable_saturated.yaml");
const TRIPLE: &str = include_str!("../../../tests/data/rates/triple_integrator.yaml");

fn rates(text: &str, within: &[(&str, f64)]) -> (CheckReport, String) {
    let (r, cert, _) = rates_region(text, within);
    (r, cert)
}

/// The check with --rates, its certificate, and the saturated region the re-check confirms.
fn rates_region(text: &str, within: &[(&str, f64)]) -> (CheckReport, String, Option<ProvedRegion>) {
    let mut spec = load(text).expect("spec loads");
    let settings = Settings {
        rates: Some(within.iter().map(|(s, b)| (s.to_string(), *b)).collect()),
        saturated: true,
        ..Settings::default()
    };
    let (report, prepared) = check(&mut spec, &settings, &|_, _, _| {}).expect("check runs");
    // the certificate re-checks, the rates with it
    let sha = sha256_hex(text.as_bytes());
    let cert = certificate(
        &report,
        &prepared,
        &Origin {
            file: "spec.yaml",
            sha256: sha.clone(),
            tool_version: "test",
            settings: serde_json::json!({}),
        },
    );
    let mut again = load(text).unwrap();
    let p = prepare(&mut again).unwrap();
    let ok = recheck(&cert, &sha, &p).unwrap_or_else(|e| panic!("{}", e.0));
    let proved = |r: &RateLimits| matches!(r.outcome, RatesOutcome::Proven);
    assert_eq!(
        ok.rates.is_some(),
        report
            .rates
            .as_ref()
            .is_some_and(|r| r.as_ref().is_ok_and(proved))
    );
    // the region of attraction with saturation re-checks exactly when one is proved
    let region = report
        .rates
        .as_ref()
        .and_then(|r| r.as_ref().ok())
        .and_then(|r| r.saturated.as_ref())
        .and_then(|s| s.as_ref().ok())
        .filter(|s| s.proof.is_some());
    assert_eq!(ok.saturated.as_ref().map(|s| s.0), region.map(|s| s.level));
    (report, cert.to_string(), ok.saturated)
}

fn region(r: &CheckReport) -> &SaturatedRegion {
    let sat = limits(r)
        .saturated
        .as_ref()
        .expect("sought after the rates");
    sat.as_ref().unwrap_or_else(|why| panic!("{why}"))
}

/// A coordinate of a counterexample by name.
fn at(point: &[(String, f64)], name: &str) -> f64 {
    point
        .iter()
        .find(|(n, _)| n == name)
        .expect("a coordinate")
        .1
}

fn limits(r: &CheckReport) -> &RateLimits {
    r.rates.as_ref().expect("asked").as_ref().expect("sought")
}

#[test]
fn the_tracking_loop_gets_the_exact_rate_bound() {
    // u = xdot_r - k*e, |u| <= 4, |e| <= 0.5 on the set, k <= 3: every command within its
    // limits exactly when |xdot_r| <= 4 - 3*0.5 = 2.5 (elementary; tracking_rate.yaml)
    let (r, _) = rates(TRACKING, &[("x", 0.5)]);
    assert_eq!(r.verdict, Verdict::Proven);
    let l = limits(&r);
    assert!(matches!(l.outcome, RatesOutcome::Proven));
    // the set: V = e^2/2 <= level within |e| <= 0.5, the level just below 0.125
    assert!(
        l.level <= 0.125 && l.level > 0.125 * (1.0 - 2e-3),
        "{}",
        l.level
    );
    let p = &l.rates[0];
    let step = 5.0 / (1u64 << RATE_STEPS) as f64;
    for end in [-p.proved.0, p.proved.1] {
        assert!(end <= 2.5 && end >= 2.5 - step, "{:?}", p.proved);
    }
    // the filter's declared [-5, 5] is beyond it: a warning with both figures
    assert!(l.warnings[0].contains("[-5, 5]") && l.warnings[0].contains("[-2.5, 2.5]"));
}

#[test]
fn a_set_where_even_zero_rates_saturate_gets_a_point() {
    // limits of 1: at zero rate |u| = k*|e| reaches 3*0.5 = 1.5 on the set
    let text = TRACKING.replace("limits: [-4, 4]", "limits: [-1, 1]");
    let (r, cert) = rates(&text, &[("x", 0.5)]);
    let l = limits(&r);
    let RatesOutcome::Refuted(actuator, cx) = &l.outcome else {
        panic!("{:?}", l.outcome)
    };
    assert_eq!(actuator, "u_cmd");
    assert!(cx.value.abs() > 1.0, "{}", cx.value);
    // no rates are stated, so the certificate carries none
    assert!(cert.contains("\"rate_limits\":null"));
    // with a set small enough (|e| <= 0.2: k*|e| <= 0.6) the rates are 0.4
    let (r, _) = rates(&text, &[("x", 0.2)]);
    let p = &limits(&r).rates[0];
    assert!(
        p.proved.1 <= 0.4 && p.proved.1 >= 0.4 - 5.0 / 256.0,
        "{:?}",
        p.proved
    );
}

#[test]
fn rates_are_not_sought_for_an_ultimate_bound() {
    let text = include_str!("../../../tests/data/bound/scalar_disturbance.yaml");
    let (r, _) = rates(text, &[]);
    let why = r.rates.as_ref().unwrap().as_ref().unwrap_err();
    assert!(why.contains("ultimate-bound"), "{why}");
}

#[test]
fn the_unstable_plant_gets_close_to_its_exact_region_of_attraction() {
    // x' = x + sat(-2x), |sat| <= 1: exactly |x| < 1 (checkvalues.md §9); V = x^2/2, so the
    // exact level is 1/2
    let (r, _, rechecked) = rates_region(UNSTABLE, &[("x", 0.4)]);
    assert_eq!(r.verdict, Verdict::Proven);
    let l = limits(&r);
    assert!(matches!(l.outcome, RatesOutcome::Proven));
    let sat = region(&r);
    assert!(sat.proof.is_some());
    // inside the exact region and within 0.5% of its level (|x| within 0.25% of 1)
    assert!(
        sat.level < 0.5 && sat.level > 0.5 * (1.0 - 5e-3),
        "{}",
        sat.level
    );
    let (level, bounds) = rechecked.expect("re-checked");
    assert_eq!(level, sat.level);
    // the proved bounds hold the set {x^2/2 <= level} and stay within the exact region's
    // closure
    let (lo, hi) = bounds[0].1;
    let reach = (2.0 * level).sqrt();
    assert!(
        lo <= -reach && hi >= reach && lo >= -1.0 && hi <= 1.0,
        "{lo} {hi}"
    );
    // the level above it is refuted at a point beyond |x| = 1, where V-dot of the saturated
    // law, x*(x + clamp(-2x, -1, 1)), is not negative (computed here, not by the tool)
    let (refuted, cx) = sat.refuted.as_ref().expect("a refuted level");
    assert!(*refuted > 0.5 && *refuted < sat.level * 1.02, "{refuted}");
    let x = at(&cx.coordinates, "Δx");
    assert!(x.abs() > 1.0 && 0.5 * x * x <= *refuted, "{x}");
    assert!(x * (x + (-2.0 * x).clamp(-1.0, 1.0)) >= 0.0);
}

#[test]
fn three_integrators_under_saturated_feedback_are_not_proved_over_the_whole_box() {
    // x1' = x2, x2' = x3, x3' = sat(-(x1 + 3 x2 + 3 x3)): not globally stabilizable by
    // saturated linear feedback (checkvalues.md §9), so the region must stop short of the box
    let (r, _, rechecked) = rates_region(TRIPLE, &[("x1", 0.1), ("x2", 0.1), ("x3", 0.1)]);
    let sat = region(&r);
    assert!(
        sat.proof.is_some(),
        "a region beyond the saturation-free set"
    );
    assert!(sat.level > sat.free && sat.level < 1e-2 * sat.box_level);
    assert_eq!(rechecked.map(|x| x.0), Some(sat.level));
    // the refuted level's point: V-dot of the saturated law computed here from the model, with
    // P the solution of A'P + PA = -I (SciPy, tests/data/rates/triple_integrator.yaml)
    let (refuted, cx) = sat.refuted.as_ref().expect("a refuted level");
    let x = [
        at(&cx.coordinates, "Δx1"),
        at(&cx.coordinates, "Δx2"),
        at(&cx.coordinates, "Δx3"),
    ];
    let p = [
        [37.0 / 16.0, 31.0 / 16.0, 0.5],
        [31.0 / 16.0, 13.0 / 4.0, 13.0 / 16.0],
        [0.5, 13.0 / 16.0, 7.0 / 16.0],
    ];
    let u = (-(x[0] + 3.0 * x[1] + 3.0 * x[2])).clamp(-1.0, 1.0);
    let xdot = [x[1], x[2], u];
    let mut v = 0.0;
    let mut vdot = 0.0;
    for i in 0..3 {
        for j in 0..3 {
            v += x[i] * p[i][j] * x[j];
            vdot += 2.0 * x[i] * p[i][j] * xdot[j];
        }
    }
    assert!(vdot >= 0.0, "{vdot} at {x:?}");
    assert!(
        v <= refuted * (1.0 + 1e-9) && v >= sat.free,
        "{v} {refuted}"
    );
    assert!(*refuted < sat.box_level);
}

#[test]
fn a_command_that_is_not_its_input_plus_other_terms_is_not_saturated() {
    // u_cmd = 2*u: clamping the command does not say what the plant receives
    let text = UNSTABLE.replace(
        "law: u, unit: m/s, limits: [-1, 1]",
        "law: 2 * u, unit: m/s, limits: [-2, 2]",
    );
    assert_ne!(text, UNSTABLE);
    let (r, cert) = rates(&text, &[("x", 0.4)]);
    let why = limits(&r).saturated.as_ref().unwrap().as_ref().unwrap_err();
    assert!(
        why.contains("is not its input `u` plus terms of no input"),
        "{why}"
    );
    assert!(cert.contains("\"saturated\":null"));
}
