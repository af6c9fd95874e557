//! The truth model: rigid-body longitudinal dynamics of a small electric aircraft, with
//! first-order actuators limited in position and rate.
//!
//! The default airframe is the invented 7.5 kg survey aircraft of lawsmith's examples (not a
//! real aircraft): S = 0.75 m², b = 2.6 m, c̄ = 0.29 m, Iyy = 0.9 kg·m²; CL = 0.30 + 5.2·α +
//! 6.0·q̂ + 0.35·δe, CD = 0.035 + CL²/(π·e·AR) with e = 0.8; Cm = 0.02 − 1.8·α − 8·q̂ − 1.1·δe
//! (q̂ = q·c̄/(2V)); thrust = δt·45 N·(1 − V/45 m/s); elevator ±0.45 rad at 2 rad/s; throttle
//! 0..1.
//!
//! The design's first numbers had Cmα = −0.9 and Cmq = −12: a static margin of 17% chord with
//! strong pitch damping, whose phugoid is 26% longer than Lanchester's (measured on the
//! linearisation and on the nonlinear model alike). The airframe is invented, so it is tuned
//! to a stiffer, less damped pitch (static margin 35% chord, plausible for a stable survey
//! aircraft), whose phugoid is within 8% of Lanchester's from 16 to 22 m/s.
//!
//! Axes: body x forward, z down; earth x forward, z down, altitude `h = −z`. State
//! `(u, w, q, θ, h, x)` plus the elevator and throttle positions.

use crate::atmosphere::{at_altitude, G0};

/// Airframe data.
#[derive(Clone, Debug, PartialEq)]
pub struct Airframe {
    /// Mass, kg.
    pub mass: f64,
    /// Wing area, m².
    pub area: f64,
    /// Span, m.
    pub span: f64,
    /// Mean aerodynamic chord, m.
    pub chord: f64,
    /// Pitch inertia, kg·m².
    pub iyy: f64,
    /// Lift coefficient at zero α.
    pub cl0: f64,
    /// Lift slope, 1/rad.
    pub cl_alpha: f64,
    /// Lift due to pitch rate (per q̂).
    pub cl_q: f64,
    /// Lift due to elevator, 1/rad.
    pub cl_de: f64,
    /// Zero-lift drag.
    pub cd0: f64,
    /// Oswald efficiency.
    pub oswald: f64,
    /// Pitching moment at zero α.
    pub cm0: f64,
    /// Pitch stiffness, 1/rad.
    pub cm_alpha: f64,
    /// Pitch damping (per q̂).
    pub cm_q: f64,
    /// Elevator power, 1/rad.
    pub cm_de: f64,
    /// Static thrust at full throttle, N.
    pub thrust_static: f64,
    /// Airspeed at which the propeller gives no thrust, m/s.
    pub thrust_zero_speed: f64,
    /// Elevator limit, rad (symmetric).
    pub elevator_limit: f64,
    /// Elevator rate limit, rad/s.
    pub elevator_rate: f64,
    /// Elevator time constant, s.
    pub elevator_tau: f64,
    /// Throttle rate limit, 1/s.
    pub throttle_rate: f64,
    /// Throttle (motor) time constant, s.
    pub throttle_tau: f64,
}

impl Default for Airframe {
    fn default() -> Airframe {
        Airframe {
            mass: 7.5,
            area: 0.75,
            span: 2.6,
            chord: 0.29,
            iyy: 0.9,
            cl0: 0.30,
            cl_alpha: 5.2,
            cl_q: 6.0,
            cl_de: 0.35,
            cd0: 0.035,
            oswald: 0.8,
            cm0: 0.02,
            cm_alpha: -1.8,
            cm_q: -8.0,
            cm_de: -1.1,
            thrust_static: 45.0,
            thrust_zero_speed: 45.0,
            elevator_limit: 0.45,
            elevator_rate: 2.0,
            // servo and motor lags: invented, plausible for a model-scale airframe
            elevator_tau: 0.05,
            throttle_rate: 2.0,
            throttle_tau: 0.15,
        }
    }
}

/// The aircraft's state.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct State {
    /// Body forward velocity (earth-relative), m/s.
    pub u: f64,
    /// Body downward velocity (earth-relative), m/s.
    pub w: f64,
    /// Pitch rate, rad/s.
    pub q: f64,
    /// Pitch attitude, rad.
    pub theta: f64,
    /// Altitude, m.
    pub h: f64,
    /// Distance flown, m.
    pub x: f64,
    /// Elevator position, rad.
    pub elevator: f64,
    /// Throttle position, 0..1.
    pub throttle: f64,
}

impl State {
    /// The state as an array.
    pub fn to_array(&self) -> [f64; 8] {
        [
            self.u,
            self.w,
            self.q,
            self.theta,
            self.h,
            self.x,
            self.elevator,
            self.throttle,
        ]
    }

    /// A state from an array.
    pub fn from_array(a: [f64; 8]) -> State {
        State {
            u: a[0],
            w: a[1],
            q: a[2],
            theta: a[3],
            h: a[4],
            x: a[5],
            elevator: a[6],
            throttle: a[7],
        }
    }
}

/// The air the aircraft flies in: steady wind plus gusts.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct Wind {
    /// Steady horizontal wind along earth x (a tailwind is positive), m/s.
    pub x: f64,
    /// Steady vertical wind, positive down, m/s.
    pub z: f64,
    /// Gust along body x, m/s.
    pub gust_u: f64,
    /// Gust along body z, m/s.
    pub gust_w: f64,
}

/// The actuator commands.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct Controls {
    /// Elevator command, rad.
    pub elevator: f64,
    /// Throttle command, 0..1.
    pub throttle: f64,
}

/// Air data and forces at a state.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct AirData {
    /// True airspeed, m/s.
    pub airspeed: f64,
    /// Angle of attack, rad.
    pub alpha: f64,
    /// Dynamic pressure, Pa.
    pub qbar: f64,
    /// Lift coefficient.
    pub cl: f64,
    /// Drag, N.
    pub drag: f64,
    /// Lift, N.
    pub lift: f64,
    /// Thrust, N.
    pub thrust: f64,
    /// Air density, kg/m³.
    pub density: f64,
}

impl Airframe {
    /// Aspect ratio `b²/S`.
    pub fn aspect_ratio(&self) -> f64 {
        self.span * self.span / self.area
    }

    /// Drag coefficient for a lift coefficient (the drag polar).
    pub fn cd(&self, cl: f64) -> f64 {
        self.cd0 + cl * cl / (std::f64::consts::PI * self.oswald * self.aspect_ratio())
    }

    /// Thrust of the propulsion model at a throttle position and airspeed, N.
    pub fn thrust(&self, throttle: f64, airspeed: f64) -> f64 {
        throttle * self.thrust_static * (1.0 - airspeed / self.thrust_zero_speed)
    }

    /// Air data and forces at a state in a wind, with air density `rho`.
    pub fn air_data(&self, s: &State, wind: &Wind, rho: f64) -> AirData {
        self.air_data_at(s, wind, rho, libm::sin(s.theta), libm::cos(s.theta))
            .0
    }

    /// [`Airframe::air_data`] given sin θ and cos θ; also returns sin α and cos α.
    fn air_data_at(
        &self,
        s: &State,
        wind: &Wind,
        rho: f64,
        st: f64,
        ct: f64,
    ) -> (AirData, f64, f64) {
        // earth wind in body axes, plus the gusts (already along the body axes)
        let ua = s.u - (wind.x * ct - wind.z * st) - wind.gust_u;
        let wa = s.w - (wind.x * st + wind.z * ct) - wind.gust_w;
        let norm = libm::sqrt(ua * ua + wa * wa);
        let v = norm.max(1.0);
        let alpha = libm::atan2(wa, ua);
        // sin α and cos α from the velocity itself: no further trigonometry
        let (sa, ca) = if norm > 0.0 {
            (wa / norm, ua / norm)
        } else {
            (0.0, 1.0)
        };
        let qbar = 0.5 * rho * v * v;
        let qhat = s.q * self.chord / (2.0 * v);
        let cl = self.cl0 + self.cl_alpha * alpha + self.cl_q * qhat + self.cl_de * s.elevator;
        (
            AirData {
                airspeed: v,
                alpha,
                qbar,
                cl,
                drag: qbar * self.area * self.cd(cl),
                lift: qbar * self.area * cl,
                thrust: self.thrust(s.throttle, v),
                density: rho,
            },
            sa,
            ca,
        )
    }

    /// The state derivative. `rho` is the density (constant over one integration step).
    pub fn derivative(&self, s: &State, c: &Controls, wind: &Wind, rho: f64) -> State {
        let (st, ct) = (libm::sin(s.theta), libm::cos(s.theta));
        let (a, sa, ca) = self.air_data_at(s, wind, rho, st, ct);
        let fx = a.thrust - a.drag * ca + a.lift * sa;
        let fz = -a.drag * sa - a.lift * ca;
        let qhat = s.q * self.chord / (2.0 * a.airspeed);
        let cm = self.cm0 + self.cm_alpha * a.alpha + self.cm_q * qhat + self.cm_de * s.elevator;
        let m = a.qbar * self.area * self.chord * cm;
        let de_target = c.elevator.clamp(-self.elevator_limit, self.elevator_limit);
        let dt_target = c.throttle.clamp(0.0, 1.0);
        State {
            u: fx / self.mass - G0 * st - s.q * s.w,
            w: fz / self.mass + G0 * ct + s.q * s.u,
            q: m / self.iyy,
            theta: s.q,
            h: s.u * st - s.w * ct,
            x: s.u * ct + s.w * st,
            elevator: ((de_target - s.elevator) / self.elevator_tau)
                .clamp(-self.elevator_rate, self.elevator_rate),
            throttle: ((dt_target - s.throttle) / self.throttle_tau)
                .clamp(-self.throttle_rate, self.throttle_rate),
        }
    }

    /// One classic fourth-order Runge–Kutta step of `dt` seconds (controls and wind held).
    pub fn rk4(&self, s: &State, c: &Controls, wind: &Wind, dt: f64) -> State {
        self.rk4_in(s, c, wind, dt, at_altitude(s.h).density)
    }

    /// [`Airframe::rk4`] with the air density given (held over the step).
    pub fn rk4_in(&self, s: &State, c: &Controls, wind: &Wind, dt: f64, rho: f64) -> State {
        let add = |a: &State, k: &State, h: f64| {
            let (x, y) = (a.to_array(), k.to_array());
            State::from_array(std::array::from_fn(|i| x[i] + h * y[i]))
        };
        let k1 = self.derivative(s, c, wind, rho);
        let k2 = self.derivative(&add(s, &k1, 0.5 * dt), c, wind, rho);
        let k3 = self.derivative(&add(s, &k2, 0.5 * dt), c, wind, rho);
        let k4 = self.derivative(&add(s, &k3, dt), c, wind, rho);
        let (x, a, b, cc, d) = (
            s.to_array(),
            k1.to_array(),
            k2.to_array(),
            k3.to_array(),
            k4.to_array(),
        );
        let mut next = State::from_array(std::array::from_fn(|i| {
            x[i] + dt / 6.0 * (a[i] + 2.0 * b[i] + 2.0 * cc[i] + d[i])
        }));
        // the actuator positions stay inside their limits
        next.elevator = next
            .elevator
            .clamp(-self.elevator_limit, self.elevator_limit);
        next.throttle = next.throttle.clamp(0.0, 1.0);
        next
    }
}
