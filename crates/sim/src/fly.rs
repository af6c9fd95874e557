//! One closed-loop flight: the truth model integrated by RK4 at the plant rate, the controller
//! run at its own rate (zero-order hold), the guidance filters of the spec producing the
//! references, turbulence and sensor noise drawn from the scenario's seed.

use crate::airframe::{Airframe, Controls, State, Wind};
use crate::atmosphere::{at_altitude, G0};
use crate::linear::Trim;
use crate::pilots::{Measured, Pilot, References};
use crate::scenario::{Arithmetic, Scenario};
use crate::turbulence::{w20_of, Dryden, Noise};
use lawsmith_codegen::Controller;
use std::collections::BTreeMap;

/// One recorded control step.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Sample {
    /// Time, s.
    pub t: f64,
    /// Altitude, m.
    pub h: f64,
    /// Airspeed, m/s.
    pub va: f64,
    /// Pitch attitude, rad.
    pub theta: f64,
    /// Pitch rate, rad/s.
    pub q: f64,
    /// Angle of attack, rad.
    pub alpha: f64,
    /// Elevator position, rad.
    pub elevator: f64,
    /// Throttle position.
    pub throttle: f64,
    /// Elevator command, rad.
    pub elevator_cmd: f64,
    /// Throttle command.
    pub throttle_cmd: f64,
    /// Altitude command, m.
    pub h_cmd: f64,
    /// Airspeed command, m/s.
    pub va_cmd: f64,
    /// Altitude reference (guidance), m.
    pub h_r: f64,
    /// Airspeed reference, m/s.
    pub va_r: f64,
    /// Total energy error as a height, `(h_r − h) + (va_r² − va²)/(2g)`, m.
    pub energy_error: f64,
    /// Energy balance error as a height, `(h_r − h) − (va_r² − va²)/(2g)`, m.
    pub balance_error: f64,
    /// The energy law raised its domain flag.
    pub domain: bool,
    /// The elevator command is at its limit.
    pub elevator_saturated: bool,
    /// The throttle command is at 0 or 1.
    pub throttle_saturated: bool,
    /// The state error is outside the spec's proved error box.
    pub outside_box: bool,
    /// The law's estimate of the relative drag error (NaN for a law without one).
    pub drag_error_estimate: f64,
    /// The relative error of the drag the law was told: the truth airframe's drag at the
    /// true angle of attack over it, minus one (NaN for a controller told no drag).
    pub drag_error: f64,
}

/// The recorded flight of one controller.
#[derive(Clone, Debug, PartialEq)]
pub struct Flight {
    /// Controller name.
    pub pilot: String,
    /// The samples at the control rate.
    pub samples: Vec<Sample>,
}

/// What changes between Monte Carlo runs (nominal: all neutral).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Perturbation {
    /// Steady wind added to the scenario's, (x, z), m/s.
    pub wind: (f64, f64),
    /// Seed offset for turbulence and noise.
    pub seed: u64,
}

impl Default for Perturbation {
    fn default() -> Self {
        Perturbation {
            wind: (0.0, 0.0),
            seed: 0,
        }
    }
}

/// The proved error box of the spec's altitude and airspeed states, if it declares them.
pub fn proved_box(law: &Controller) -> Option<((f64, f64), (f64, f64))> {
    let get = |n: &str| law.states.iter().find(|s| s.name == n).map(|s| s.error);
    Some((get("h")?, get("va")?))
}

/// Flies `pilot` through the scenario on the truth airframe `truth`, trimmed at `trim`.
pub fn fly(
    scenario: &Scenario,
    truth: &Airframe,
    trim: &Trim,
    law: &Controller,
    gains: &[f64],
    pilot: &mut dyn Pilot,
    p: Perturbation,
) -> Flight {
    let dt = 1.0 / scenario.rates.plant;
    let n_sub = (scenario.rates.plant / scenario.rates.control).round() as usize;
    let dtc = dt * n_sub as f64;
    let steps = (scenario.duration / dtc).round() as usize;
    let seed = scenario.seed.wrapping_add(p.seed.wrapping_mul(0x9E37_79B9));
    let mut turbulence = Dryden::new(w20_of(&scenario.wind.turbulence).unwrap_or(0.0), seed);
    let mut noise = Noise::new(seed ^ 0xA5A5_5A5A);
    let wind_x = scenario.wind.x + p.wind.0;
    let wind_z = scenario.wind.z + p.wind.1;
    let (mut gust_u, mut gust_w) = (0.0, 0.0);
    let boxes = proved_box(law);
    // guidance: filters in the spec's order; references start at the initial trim
    let mut refs: Vec<f64> = law
        .filters
        .iter()
        .map(|f| match law.references[f.reference].name.as_str() {
            "h_r" => scenario.initial.h,
            _ => scenario.initial.va,
        })
        .collect();
    let mut rates = vec![0.0; refs.len()];
    // which filter produces which reference, looked up once
    let filter_of = |n: &str| {
        law.filters
            .iter()
            .position(|f| law.references[f.reference].name == n)
    };
    let (fh, fv) = (filter_of("h_r"), filter_of("va_r"));
    let mut commands = vec![0.0; refs.len()];
    // the trim is relative to the air: the aircraft starts at its trimmed airspeed in the wind
    let mut s: State = trim.state;
    let (st0, ct0) = (libm::sin(s.theta), libm::cos(s.theta));
    s.u += wind_x * ct0 - wind_z * st0;
    s.w += wind_x * st0 + wind_z * ct0;
    let mut samples = Vec::with_capacity(steps + 1);
    let mut ws = lawsmith_codegen::Workspace::default();
    for k in 0..=steps {
        let t = k as f64 * dtc;
        let (h_cmd, va_cmd) = scenario.command_at(t);
        let r = References {
            h: fh.map_or(h_cmd, |i| refs[i]),
            hdot: fh.map_or(0.0, |i| rates[i]),
            va: fv.map_or(va_cmd, |i| refs[i]),
            vadot: fv.map_or(0.0, |i| rates[i]),
        };
        let wind = Wind {
            x: wind_x,
            z: wind_z,
            gust_u,
            gust_w,
        };
        let air = truth.air_data(&s, &wind, at_altitude(s.h).density);
        let (st, ct) = (libm::sin(s.theta), libm::cos(s.theta));
        let n = &scenario.noise;
        // a draw only for a noisy sensor: noise-free scenarios skip the Gaussian source
        let mut noisy = |sigma: f64| {
            if sigma > 0.0 {
                sigma * noise.gaussian()
            } else {
                0.0
            }
        };
        let m = Measured {
            h: s.h + noisy(n.h),
            hdot: s.u * st - s.w * ct,
            va: air.airspeed + noisy(n.va),
            theta: s.theta + noisy(n.theta),
            q: s.q + noisy(n.q),
            alpha: air.alpha,
            uw: (s.u, s.w),
        };
        let (c, notes): (Controls, _) = pilot.step(&m, &r, dtc);
        let truth_drag = 0.5
            * air.density
            * air.airspeed
            * air.airspeed
            * truth.area
            * truth.cd(truth.cl0 + truth.cl_alpha * air.alpha);
        let elevator_saturated = c.elevator.abs() >= truth.elevator_limit - 1e-12;
        let throttle_saturated = c.throttle <= 0.0 || c.throttle >= 1.0;
        let ek = (r.va * r.va - air.airspeed * air.airspeed) / (2.0 * G0);
        let outside_box = boxes.is_some_and(|((hl, hh), (vl, vh))| {
            let (eh, ev) = (s.h - r.h, air.airspeed - r.va);
            !(eh >= hl && eh <= hh && ev >= vl && ev <= vh)
        });
        samples.push(Sample {
            t,
            h: s.h,
            va: air.airspeed,
            theta: s.theta,
            q: s.q,
            alpha: air.alpha,
            elevator: s.elevator,
            throttle: s.throttle,
            elevator_cmd: c.elevator,
            throttle_cmd: c.throttle,
            h_cmd,
            va_cmd,
            h_r: r.h,
            va_r: r.va,
            energy_error: (r.h - s.h) + ek,
            balance_error: (r.h - s.h) - ek,
            domain: notes.domain,
            elevator_saturated,
            throttle_saturated,
            outside_box,
            drag_error_estimate: notes.drag_error_estimate,
            drag_error: truth_drag / notes.drag_estimate - 1.0,
        });
        if k == steps {
            break;
        }
        if let Some(i) = fh {
            commands[i] = h_cmd;
        }
        if let Some(i) = fv {
            commands[i] = va_cmd;
        }
        match scenario.arithmetic {
            Arithmetic::Double => {
                law.update_in(&mut refs, &mut rates, &commands, gains, dtc, &mut ws);
            }
            Arithmetic::Single => {
                // the filters advance in f32 too, as the f32 code's do
                let single = |v: &[f64]| v.iter().map(|&x| x as f32).collect::<Vec<f32>>();
                let (mut r, mut q) = (single(&refs), single(&rates));
                law.update(
                    &mut r,
                    &mut q,
                    &single(&commands),
                    &single(gains),
                    dtc as f32,
                );
                refs = r.iter().map(|&x| f64::from(x)).collect();
                rates = q.iter().map(|&x| f64::from(x)).collect();
            }
        }
        // density over the control step (it changes by parts per million in 20 ms)
        let rho = air.density;
        for _ in 0..n_sub {
            let (gu, gw) = turbulence.step(dt, air.airspeed, s.h);
            gust_u = gu;
            gust_w = gw;
            let wind = Wind {
                x: wind_x,
                z: wind_z,
                gust_u,
                gust_w,
            };
            s = truth.rk4_in(&s, &c, &wind, dt, rho);
        }
    }
    Flight {
        pilot: pilot.name().to_string(),
        samples,
    }
}

/// The metrics, in report order: key (as in JSON), unit, and what the table calls it. The
/// airspeed deviation during an altitude change is from the guidance reference (what the
/// controller is asked to fly then), over each altitude step until it settles. Overshoot is
/// the first peak beyond the commanded value after the response first reaches it (a later
/// excursion, a gust's, is not an overshoot); settling is into 5% of the step and staying
/// there; both per step of the command, the worst step reported.
pub const METRICS: [(&str, &str, &str); 15] = [
    (
        "peak_airspeed_deviation_in_altitude_change",
        "m/s",
        "peak airspeed deviation during an altitude change",
    ),
    ("altitude_overshoot", "%", "altitude overshoot, first peak"),
    (
        "altitude_settling_time",
        "s",
        "altitude settling time, to 5% of the step",
    ),
    ("airspeed_overshoot", "%", "airspeed overshoot, first peak"),
    (
        "airspeed_settling_time",
        "s",
        "airspeed settling time, to 5% of the step",
    ),
    ("energy_error_rms", "m", "energy error rms"),
    (
        "steady_energy_error",
        "m",
        "steady energy error, mean magnitude over the last 20%",
    ),
    ("balance_error_rms", "m", "balance error rms"),
    ("elevator_rate_rms", "rad/s", "elevator rate rms"),
    ("throttle_rate_rms", "1/s", "throttle rate rms"),
    (
        "time_in_saturation",
        "s",
        "time with an actuator at its limit",
    ),
    (
        "time_elevator_saturated",
        "s",
        "time with the elevator at its limit",
    ),
    (
        "time_throttle_saturated",
        "s",
        "time with the throttle at 0 or 1",
    ),
    (
        "time_outside_proved_box",
        "s",
        "time outside the proved box",
    ),
    (
        "first_exit_from_proved_box",
        "s",
        "first exit from the proved box",
    ),
];

/// The table label of a metric, with its unit: `energy error rms (m)`.
pub fn metric_label(key: &str) -> String {
    METRICS.iter().find(|m| m.0 == key).map_or_else(
        || key.replace('_', " "),
        |(_, unit, label)| format!("{label} ({unit})"),
    )
}

/// Settling band: 5% of the step.
const BAND: f64 = 0.05;

/// One step response in a signal: (overshoot %, settling time s, index range of the event).
fn step_response(
    samples: &[Sample],
    value: impl Fn(&Sample) -> f64,
    command: impl Fn(&Sample) -> f64,
) -> Vec<(f64, f64, usize, usize)> {
    let mut out = Vec::new();
    let mut start = None;
    for i in 1..=samples.len() {
        let changed = i == samples.len() || command(&samples[i]) != command(&samples[i - 1]);
        if changed {
            if let Some(s0) = start.take() {
                let s0: usize = s0;
                let target = command(&samples[s0]);
                let before = command(&samples[s0 - 1]);
                let step = target - before;
                let seg = &samples[s0..i];
                // the first peak: from the first sample at or past the target to the next
                // one back on the near side
                let beyond = |x: &Sample| (value(x) - target) * step.signum();
                let first = seg.iter().position(|x| beyond(x) >= 0.0);
                let over = first.map_or(0.0, |k| {
                    seg[k..]
                        .iter()
                        .map(beyond)
                        .take_while(|&b| b >= 0.0)
                        .fold(0.0f64, f64::max)
                }) / step.abs()
                    * 100.0;
                let last_out = seg
                    .iter()
                    .rposition(|x| (value(x) - target).abs() > BAND * step.abs());
                let settle = match last_out {
                    None => 0.0,
                    Some(j) if j + 1 < seg.len() => seg[j + 1].t - seg[0].t,
                    Some(_) => f64::NAN,
                };
                let end = if settle.is_nan() {
                    i
                } else {
                    s0 + last_out.map_or(0, |j| j + 1)
                };
                out.push((over, settle, s0, end.max(s0 + 1)));
            }
            if i < samples.len() {
                start = Some(i);
            }
        }
    }
    out
}

fn rms(v: impl Iterator<Item = f64>) -> f64 {
    let (mut s, mut n) = (0.0, 0.0);
    for x in v {
        s += x * x;
        n += 1.0;
    }
    if n > 0.0 {
        (s / n).sqrt()
    } else {
        f64::NAN
    }
}

/// The metrics of a flight. A step metric is the worst over the scenario's steps (NaN when the
/// scenario has no such step, or when a step never settles).
pub fn metrics(f: &Flight) -> BTreeMap<String, f64> {
    let s = &f.samples;
    let dtc = if s.len() > 1 { s[1].t - s[0].t } else { 0.0 };
    let mut m = BTreeMap::new();
    let worst = |v: &[(f64, f64, usize, usize)], pick: fn(&(f64, f64, usize, usize)) -> f64| {
        if v.is_empty() {
            f64::NAN
        } else {
            v.iter().map(pick).fold(f64::NEG_INFINITY, |a, b| {
                if b.is_nan() || a.is_nan() {
                    f64::NAN
                } else {
                    a.max(b)
                }
            })
        }
    };
    let alt = step_response(s, |x| x.h, |x| x.h_cmd);
    let spd = step_response(s, |x| x.va, |x| x.va_cmd);
    let peak_dv = if alt.is_empty() {
        f64::NAN
    } else {
        alt.iter()
            .map(|&(_, _, a, b)| {
                s[a..b]
                    .iter()
                    .map(|x| (x.va - x.va_r).abs())
                    .fold(0.0, f64::max)
            })
            .fold(0.0, f64::max)
    };
    m.insert("peak_airspeed_deviation_in_altitude_change".into(), peak_dv);
    m.insert("altitude_overshoot".into(), worst(&alt, |e| e.0));
    m.insert("altitude_settling_time".into(), worst(&alt, |e| e.1));
    m.insert("airspeed_overshoot".into(), worst(&spd, |e| e.0));
    m.insert("airspeed_settling_time".into(), worst(&spd, |e| e.1));
    m.insert(
        "energy_error_rms".into(),
        rms(s.iter().map(|x| x.energy_error)),
    );
    // the steady error an estimate error leaves: the energy error (a height: the total-energy
    // error over m·g) averaged in magnitude over the last fifth of the flight
    let tail = s.len() - s.len() / 5;
    let last = &s[tail.min(s.len().saturating_sub(1))..];
    m.insert(
        "steady_energy_error".into(),
        last.iter().map(|x| x.energy_error.abs()).sum::<f64>() / last.len().max(1) as f64,
    );
    m.insert(
        "balance_error_rms".into(),
        rms(s.iter().map(|x| x.balance_error)),
    );
    let rate = |g: fn(&Sample) -> f64| rms(s.windows(2).map(|w| (g(&w[1]) - g(&w[0])) / dtc));
    m.insert("elevator_rate_rms".into(), rate(|x| x.elevator));
    m.insert("throttle_rate_rms".into(), rate(|x| x.throttle));
    let count = |p: fn(&Sample) -> bool| s.iter().filter(|x| p(x)).count() as f64 * dtc;
    m.insert(
        "time_in_saturation".into(),
        count(|x| x.elevator_saturated || x.throttle_saturated),
    );
    m.insert(
        "time_elevator_saturated".into(),
        count(|x| x.elevator_saturated),
    );
    m.insert(
        "time_throttle_saturated".into(),
        count(|x| x.throttle_saturated),
    );
    m.insert("time_outside_proved_box".into(), count(|x| x.outside_box));
    m.insert(
        "first_exit_from_proved_box".into(),
        s.iter().find(|x| x.outside_box).map_or(f64::NAN, |x| x.t),
    );
    m
}
