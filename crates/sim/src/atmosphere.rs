//! The standard atmosphere's troposphere (U.S. Standard Atmosphere 1976, the same as the ICAO
//! standard atmosphere below 11 km): a linear temperature lapse from sea level.

/// Sea-level temperature, K.
pub const T0: f64 = 288.15;
/// Sea-level pressure, Pa.
pub const P0: f64 = 101_325.0;
/// Temperature lapse rate, K/m.
pub const LAPSE: f64 = 0.0065;
/// Specific gas constant of dry air, J/(kg·K).
pub const R_AIR: f64 = 287.052_87;
/// Standard gravity, m/s².
pub const G0: f64 = 9.806_65;
/// Ratio of specific heats of air.
pub const GAMMA: f64 = 1.4;
/// Earth radius for geopotential altitude, m.
pub const R_EARTH: f64 = 6_356_766.0;
/// Top of the troposphere (geopotential), m.
pub const TROPOPAUSE: f64 = 11_000.0;

/// The state of the air at one altitude.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Air {
    /// Temperature, K.
    pub temperature: f64,
    /// Pressure, Pa.
    pub pressure: f64,
    /// Density, kg/m³.
    pub density: f64,
    /// Speed of sound, m/s.
    pub speed_of_sound: f64,
}

/// Geopotential altitude of a geometric altitude: `H = r₀·Z/(r₀ + Z)`.
pub fn geopotential(z: f64) -> f64 {
    R_EARTH * z / (R_EARTH + z)
}

/// The air at geopotential altitude `h` (m), clamped to the troposphere [−1000 m, 11 km].
pub fn at_geopotential(h: f64) -> Air {
    let h = h.clamp(-1000.0, TROPOPAUSE);
    let t = T0 - LAPSE * h;
    let p = P0 * libm::pow(t / T0, G0 / (R_AIR * LAPSE));
    Air {
        temperature: t,
        pressure: p,
        density: p / (R_AIR * t),
        speed_of_sound: libm::sqrt(GAMMA * R_AIR * t),
    }
}

/// The air at geometric altitude `z` (m).
pub fn at_altitude(z: f64) -> Air {
    at_geopotential(geopotential(z))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_troposphere_matches_the_standard_tables() {
        // U.S. Standard Atmosphere 1976 / ICAO standard atmosphere, at geopotential altitude
        // (values recomputed from the standard's constants, as listed in checkvalues §1)
        let table = [
            (0.0, 288.15, 101_325.00, 1.225_000, 340.2940),
            (1000.0, 281.65, 89_874.56, 1.111_643, 336.4340),
            (2000.0, 275.15, 79_495.20, 1.006_490, 332.5292),
            (5000.0, 255.65, 54_019.89, 0.736_116, 320.5294),
            (11_000.0, 216.65, 22_632.04, 0.363_918, 295.0695),
        ];
        for (h, t, p, rho, a) in table {
            let air = at_geopotential(h);
            for (got, want, what) in [
                (air.temperature, t, "T"),
                (air.pressure, p, "p"),
                (air.density, rho, "rho"),
                (air.speed_of_sound, a, "a"),
            ] {
                assert!(
                    (got - want).abs() / want < 1e-3,
                    "{what} at {h} m: {got} vs {want}"
                );
            }
        }
        // geometric 11,000 m is geopotential 10,981 m: density 0.3648 (tables by geometric
        // altitude, from memory)
        assert!((at_altitude(11_000.0).density - 0.3648).abs() / 0.3648 < 1e-3);
    }
}
