//! A fixed-rate control task around the generated Rust of `specs/energy_longitudinal.yaml`,
//! as firmware would run it: a 50 Hz loop on a simulated clock that reads the measurements,
//! calls `step`, sends the commands, then advances the guidance filters with `update`.
//!
//! In firmware the crate root declares the generated module, e.g.
//! `#[path = "generated/energy_longitudinal/energy_longitudinal.rs"] mod law;`, and the loop
//! below runs in the timer task. Here the aircraft is the spec's own point-mass model
//! (h' = va·sin γ, va' = (T − D)/m − g·sin γ) with a perfect inner pitch loop (γ = θ − α), so
//! the example runs anywhere; `tests/emitted` runs it and checks where it ends.

use super::law;

/// Where the task ends: the aircraft's state and what the law reported on the way.
pub struct Flight {
    /// Seconds flown.
    pub t: f64,
    /// Altitude (m) and airspeed (m/s) at the end.
    pub h: f64,
    /// Airspeed at the end (m/s).
    pub va: f64,
    /// Periods with a limit bit set.
    pub limited: usize,
    /// Periods with the domain flag raised.
    pub outside: usize,
}

/// Flies `seconds` from trim at 120 m and 22 m/s towards `h_cmd` and `va_cmd`.
pub fn fly(h_cmd: f64, va_cmd: f64, seconds: f64) -> Flight {
    const PERIOD: f64 = 0.02; // 50 Hz
    const SUBSTEPS: usize = 20; // the plant integrated finer than the task runs
    const MASS: f64 = 7.5; // kg, the spec's parameter
    const G: f64 = 9.80665; // m/s^2
    const DRAG: f64 = 8.0; // N, taken as known exactly here
    const ALPHA: f64 = 0.05; // rad
    let (mut h, mut va) = (120.0, 22.0);
    let gains = law::Gains::DEFAULT;
    let targets = law::Targets { h_cmd, va_cmd };
    // the filters start at rest at the aircraft's state, then follow the commands
    let mut references = law::References::start(&law::Targets {
        h_cmd: h,
        va_cmd: va,
    });
    let (mut limited, mut outside) = (0, 0);
    let periods = (seconds / PERIOD).round() as usize;
    for _ in 0..periods {
        // 1. read the sensors and the reference filters; 2. compute the commands
        let reading = law::Reading {
            h,
            va,
            h_r: references.h_r,
            va_r: references.va_r,
            hdot_r: references.hdot_r,
            vadot_r: references.vadot_r,
            drag: DRAG,
            alpha: ALPHA,
        };
        let out = law::compute_commands(&reading, &gains);
        limited += usize::from(out.limits != 0);
        outside += usize::from(out.domain);
        // 3. the actuators hold the commands over the period
        let gamma = out.pitch_cmd - ALPHA;
        let dt = PERIOD / SUBSTEPS as f64;
        for _ in 0..SUBSTEPS {
            let hdot = va * libm::sin(gamma);
            let vadot = (out.thrust_cmd - DRAG) / MASS - G * libm::sin(gamma);
            h += dt * hdot;
            va += dt * vadot;
        }
        // 4. advance the references for the next period
        law::advance_references(&mut references, &targets, &gains, PERIOD);
    }
    Flight {
        t: periods as f64 * PERIOD,
        h,
        va,
        limited,
        outside,
    }
}
