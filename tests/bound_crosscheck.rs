//! The proved ultimate bound of the uncertain spec against flights it did not see: the energy
//! law flown on the rigid-body truth model (pitch loop, actuator lags, thrust along the body
//! axis; none of them in the proof's point-mass model) with drag and thrust estimate errors
//! drawn inside the declared uncertainty. Once inside {V ≤ c} no run may leave, and the
//! errors observed there must lie inside the guaranteed bounds.

use lawsmith_sim::bounded::cross_check;
use lawsmith_sim::run::Setup;
use lawsmith_sim::scenario::Scenario;
use lawsmith_verify::{check, Settings};
use std::path::Path;

#[test]
fn monte_carlo_flights_never_leave_the_proved_bound() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let sc_path = root.join("specs/scenarios/uncertain_estimates.yaml");
    let scenario = Scenario::parse(&std::fs::read_to_string(&sc_path).unwrap()).unwrap();
    let spec_text =
        std::fs::read_to_string(sc_path.parent().unwrap().join(&scenario.spec)).unwrap();
    let mut spec = lawsmith_spec::load(&spec_text).unwrap();
    let (report, _) = check(&mut spec, &Settings::default(), &|_, _, _| {}).unwrap();
    let bound = report.bound.as_ref().expect("an ultimate-bound claim");
    assert!(bound.level > 0.0);
    // the estimate errors the scenario draws must lie inside the declared uncertainty, or
    // the check would prove nothing: drag estimate factor f in 1 ± 0.15 means the plant's
    // drag is drag/f, i.e. relative error 1/f - 1 in [-0.131, +0.176] (declared ±0.2)
    let d = scenario.dispersions;
    assert!(1.0 / (1.0 - d.drag_estimate) - 1.0 <= 0.2 && d.thrust_bias <= 0.3);
    let setup = Setup::new(scenario, &spec).unwrap();
    let runs = 400;
    let c = cross_check(&setup, &spec, bound.level, runs, 7).unwrap();
    let (h, va) = (c.h_error(), c.va_error());
    let guaranteed = |state: &str| {
        let b = bound.bounds.iter().find(|b| b.state == state).unwrap();
        (b.lower, b.upper)
    };
    let (gh, gva) = (guaranteed("h"), guaranteed("va"));
    println!(
        "{runs} runs, level {:.4e}: entered {}, left {}, worst V/c {:.4}; \
         h error [{:.3}, {:.3}] m inside [{:.3}, {:.3}], va error [{:.3}, {:.3}] m/s inside [{:.3}, {:.3}]",
        c.level,
        c.entered(),
        c.left(),
        c.worst_ratio(),
        h.0,
        h.1,
        gh.0,
        gh.1,
        va.0,
        va.1,
        gva.0,
        gva.1
    );
    assert_eq!(c.entered(), runs, "every run starts in trim, at V = 0");
    assert_eq!(c.left(), 0, "a run left the proved sublevel set");
    assert!(c.worst_ratio() <= 1.0);
    assert!(gh.0 <= h.0 && h.1 <= gh.1 && gva.0 <= va.0 && va.1 <= gva.1);
    // and the draws were not all harmless: some run shows a visible error
    assert!(h.1 - h.0 > 0.05 || va.1 - va.0 > 0.05);
}
