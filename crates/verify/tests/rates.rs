//! The guidance rates that keep every command within its limits: the textbook tracking loop
//! with its exact answer, a set too large for any rate, the claims they are not sought for,
//! and certificates that re-check.

use lawsmith_spec::load;
use lawsmith_verify::{
    certificate, check, prepare, recheck, sha256_hex, CheckReport, Origin, RateLimits,
    RatesOutcome, Settings, Verdict, RATE_STEPS,
};

const TRACKING: &str = include_str!("../../../tests/data/rates/tracking_rate.yaml");

fn rates(text: &str, within: &[(&str, f64)]) -> (CheckReport, String) {
    let mut spec = load(text).expect("spec loads");
    let settings = Settings {
        rates: Some(within.iter().map(|(s, b)| (s.to_string(), *b)).collect()),
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
    (report, cert.to_string())
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
