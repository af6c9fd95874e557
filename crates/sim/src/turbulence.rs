//! Dryden turbulence, low-altitude forms of MIL-F-8785C / MIL-HDBK-1797, and the seeded
//! random numbers that drive it.
//!
//! `H_u(s) = σu·√(2Lu/(πV)) / (1 + (Lu/V)s)`,
//! `H_w(s) = σw·√(Lw/(πV))·(1 + √3(Lw/V)s) / (1 + (Lw/V)s)²`, driven by white noise of
//! autocorrelation π·δ(τ), so that each gust has variance σ². Below 1000 ft (h in feet):
//! `Lw = h`, `Lu = h/(0.177 + 0.000823h)^1.2`, `σw = 0.1·W20`, `σu = σw/(0.177 + 0.000823h)^0.4`,
//! with W20 the wind speed at 20 ft (15, 30, 45 kt for light, moderate, severe). The forms
//! are used up to 1000 ft and held there above (the scenarios fly below it).
//!
//! Discretisation: `H_u` is first order, so its exact discrete equivalent is a sampled
//! Ornstein–Uhlenbeck process `x ← a·x + σ·√(1 − a²)·n` with `a = exp(−dt·V/L)`. `H_w` is the
//! cascade of two first-order stages `x₁ = n/(1 + Ts)`, `x₂ = x₁/(1 + Ts)` with output
//! `K·(√3·x₁ + (1 − √3)·x₂)`; the first stage is sampled exactly the same way, the second
//! integrates the first exactly over each step (first-order hold is not needed at the steps
//! used, dt ≪ T).

/// Feet per metre.
const FT: f64 = 1.0 / 0.3048;
/// Metres per second per knot.
const KT: f64 = 0.514_444_444;

/// splitmix64 random numbers with Gaussian samples (Box–Muller), deterministic from a seed.
#[derive(Clone, Debug)]
pub struct Noise {
    state: u64,
    spare: Option<f64>,
}

impl Noise {
    /// A generator from a seed.
    pub fn new(seed: u64) -> Noise {
        Noise {
            state: seed ^ 0x5DEE_CE66_D1CE_4E5B,
            spare: None,
        }
    }

    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.state = self.state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in (0, 1).
    pub fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// Uniform in [lo, hi].
    pub fn between(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.uniform()
    }

    /// A standard normal sample.
    pub fn gaussian(&mut self) -> f64 {
        if let Some(s) = self.spare.take() {
            return s;
        }
        let (u1, u2) = (self.uniform(), self.uniform());
        let r = libm::sqrt(-2.0 * libm::log(u1));
        let t = 2.0 * std::f64::consts::PI * u2;
        self.spare = Some(r * libm::sin(t));
        r * libm::cos(t)
    }
}

/// Intensity and scale lengths at one altitude.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DrydenParams {
    /// σ of the longitudinal gust, m/s.
    pub sigma_u: f64,
    /// σ of the vertical gust, m/s.
    pub sigma_w: f64,
    /// Longitudinal scale length, m.
    pub length_u: f64,
    /// Vertical scale length, m.
    pub length_w: f64,
}

/// The low-altitude Dryden parameters for wind speed `w20` (m/s, at 20 ft) at altitude `h` (m).
pub fn dryden_params(w20: f64, h: f64) -> DrydenParams {
    let hf = (h * FT).clamp(10.0, 1000.0);
    let k = 0.177 + 0.000823 * hf;
    let sigma_w = 0.1 * w20;
    DrydenParams {
        sigma_u: sigma_w / libm::pow(k, 0.4),
        sigma_w,
        length_u: hf / libm::pow(k, 1.2) / FT,
        length_w: hf / FT,
    }
}

/// The wind speed at 20 ft of a named intensity (MIL-F-8785C: 15, 30, 45 kt).
pub fn w20_of(intensity: &str) -> Option<f64> {
    match intensity {
        "none" => Some(0.0),
        "light" => Some(15.0 * KT),
        "moderate" => Some(30.0 * KT),
        "severe" => Some(45.0 * KT),
        _ => None,
    }
}

/// The gust filters' state.
#[derive(Clone, Debug)]
pub struct Dryden {
    w20: f64,
    params: Option<(f64, DrydenParams)>,
    u: f64,
    w1: f64,
    w2: f64,
    noise: Noise,
}

impl Dryden {
    /// Turbulence of wind speed `w20` (m/s at 20 ft), started at rest.
    pub fn new(w20: f64, seed: u64) -> Dryden {
        Dryden {
            w20,
            params: None,
            u: 0.0,
            w1: 0.0,
            w2: 0.0,
            noise: Noise::new(seed),
        }
    }

    /// Advances the gusts by `dt` at airspeed `v` and altitude `h`; returns (u_g, w_g) in m/s.
    pub fn step(&mut self, dt: f64, v: f64, h: f64) -> (f64, f64) {
        if self.w20 <= 0.0 {
            return (0.0, 0.0);
        }
        // the parameters change with altitude only slowly: recomputed per metre
        let p = match self.params {
            Some((h0, p)) if (h0 - h).abs() < 1.0 => p,
            _ => {
                let p = dryden_params(self.w20, h);
                self.params = Some((h, p));
                p
            }
        };
        let v = v.max(1.0);
        let au = libm::exp(-dt * v / p.length_u);
        self.u = au * self.u + p.sigma_u * libm::sqrt(1.0 - au * au) * self.noise.gaussian();
        // vertical: unit-variance first stage, exact second stage over the step
        let tw = p.length_w / v;
        let aw = libm::exp(-dt / tw);
        let x1_old = self.w1;
        self.w1 = aw * self.w1 + libm::sqrt(1.0 - aw * aw) * self.noise.gaussian();
        let x1_mid = 0.5 * (x1_old + self.w1);
        self.w2 = aw * self.w2 + (1.0 - aw) * x1_mid;
        // the cascade's output; the factor makes its variance σw² (the stages have variances
        // 1 and 1/2 and covariance 1/2, so √3·x₁ + (1 − √3)·x₂ has variance
        // 3 + (1 − √3)²/2 + √3·(1 − √3) = 2: hence σw/√2)
        let s3 = 3f64.sqrt();
        let out = p.sigma_w / 2f64.sqrt() * (s3 * self.w1 + (1.0 - s3) * self.w2);
        (self.u, out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn low_altitude_parameters_match_the_handbook_example() {
        // MIL-F-8785C low-altitude forms, W20 = 15 kt at h = 50 m (checkvalues §6, from memory)
        let p = dryden_params(w20_of("light").unwrap(), 50.0);
        assert!((p.sigma_w - 0.771_667).abs() < 1e-5, "{p:?}");
        assert!((p.sigma_u - 1.229_601).abs() < 1e-5, "{p:?}");
        assert!((p.length_w - 50.0).abs() < 1e-9);
        assert!((p.length_u - 202.290).abs() < 1e-3, "{p:?}");
    }

    #[test]
    fn the_shaping_filters_have_unit_gain_over_frequency() {
        // ∫₀^∞ |H(jω)|² dω = σ² for the forms above driven by noise of autocorrelation π·δ
        // (checkvalues §6): trapezoid rule on a log grid
        let (sigma, l, v) = (1.3, 120.0, 20.0);
        let t = l / v;
        let hu =
            |w: f64| sigma * sigma * 2.0 * l / (std::f64::consts::PI * v) / (1.0 + (t * w).powi(2));
        let hw = |w: f64| {
            sigma * sigma * l / (std::f64::consts::PI * v) * (1.0 + 3.0 * (t * w).powi(2))
                / (1.0 + (t * w).powi(2)).powi(2)
        };
        for h in [&hu as &dyn Fn(f64) -> f64, &hw] {
            let mut total = 0.0;
            let n = 200_000;
            for i in 0..n {
                let (a, b) = (1e-6 * 1.0001f64.powi(i), 1e-6 * 1.0001f64.powi(i + 1));
                total += 0.5 * (h(a) + h(b)) * (b - a);
            }
            assert!(
                (total - sigma * sigma).abs() / (sigma * sigma) < 2e-3,
                "{total}"
            );
        }
    }

    #[test]
    fn simulated_gusts_have_the_declared_variance() {
        let mut d = Dryden::new(w20_of("moderate").unwrap(), 3);
        let p = dryden_params(w20_of("moderate").unwrap(), 100.0);
        let (mut su, mut sw, mut n) = (0.0, 0.0, 0.0);
        for k in 0..4_000_000 {
            let (u, w) = d.step(0.01, 20.0, 100.0);
            if k > 10_000 {
                su += u * u;
                sw += w * w;
                n += 1.0;
            }
        }
        let (vu, vw) = ((su / n).sqrt(), (sw / n).sqrt());
        assert!(
            (vu - p.sigma_u).abs() / p.sigma_u < 0.05,
            "{vu} vs {}",
            p.sigma_u
        );
        assert!(
            (vw - p.sigma_w).abs() / p.sigma_w < 0.05,
            "{vw} vs {}",
            p.sigma_w
        );
    }
}
