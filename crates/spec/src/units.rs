//! SI units and dimensions: parsing unit strings and the algebra of dimensions.

use num_rational::Rational32;
use num_traits::{One, Zero};
use std::fmt;

const BASE: [&str; 5] = ["kg", "m", "s", "A", "K"];

/// A physical dimension: rational exponents of kg, m, s, A, K. Angles are dimensionless.
#[derive(Clone, Copy, PartialEq, Eq, Debug, Hash, Default)]
pub struct Dim(pub [Rational32; 5]);

impl Dim {
    /// Dimensionless.
    pub fn one() -> Dim {
        Dim::default()
    }

    fn base(i: usize) -> Dim {
        let mut d = Dim::one();
        d.0[i] = Rational32::one();
        d
    }

    /// True for a dimensionless quantity.
    pub fn is_one(&self) -> bool {
        self.0.iter().all(Zero::is_zero)
    }

    /// Product of dimensions.
    pub fn mul(&self, o: &Dim) -> Dim {
        let mut d = *self;
        for (a, b) in d.0.iter_mut().zip(o.0.iter()) {
            *a += b;
        }
        d
    }

    /// Quotient of dimensions.
    pub fn div(&self, o: &Dim) -> Dim {
        self.mul(&o.pow(Rational32::from_integer(-1)))
    }

    /// Rational power.
    pub fn pow(&self, k: Rational32) -> Dim {
        let mut d = *self;
        for a in d.0.iter_mut() {
            *a *= k;
        }
        d
    }
}

impl fmt::Display for Dim {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.is_one() {
            return f.write_str("1 (dimensionless)");
        }
        let mut num = Vec::new();
        let mut den = Vec::new();
        for (i, e) in self.0.iter().enumerate() {
            let (list, e) = if *e > Rational32::zero() {
                (&mut num, *e)
            } else if *e < Rational32::zero() {
                (&mut den, -*e)
            } else {
                continue;
            };
            list.push(if e.is_one() {
                BASE[i].to_string()
            } else {
                format!("{}^{}", BASE[i], e)
            });
        }
        let n = if num.is_empty() {
            "1".to_string()
        } else {
            num.join("*")
        };
        if den.is_empty() {
            write!(f, "{n}")
        } else if den.len() == 1 {
            write!(f, "{n}/{}", den[0])
        } else {
            write!(f, "{n}/({})", den.join("*"))
        }
    }
}

/// The unit names accepted in unit strings, with their dimensions.
pub fn named_units() -> Vec<(&'static str, Dim)> {
    let (kg, m, s, a, k) = (
        Dim::base(0),
        Dim::base(1),
        Dim::base(2),
        Dim::base(3),
        Dim::base(4),
    );
    let newton = kg.mul(&m).div(&s.pow(2.into()));
    let joule = newton.mul(&m);
    vec![
        ("1", Dim::one()),
        ("rad", Dim::one()),
        ("kg", kg),
        ("m", m),
        ("s", s),
        ("A", a),
        ("K", k),
        ("N", newton),
        ("J", joule),
        ("W", joule.div(&s)),
        ("Pa", newton.div(&m.pow(2.into()))),
        ("Hz", Dim::one().div(&s)),
    ]
}

/// π to 50 decimals, for degrees (an actuator's limits may be written in `deg`).
const PI_50: &str = "3.14159265358979323846264338327950288419716939937510";

/// The nearest f64 of an angle of `deg` degrees in radians (π taken to 50 decimals, far
/// below an ulp).
pub fn degrees_to_radians(deg: &lawsmith_expr::BigRational) -> f64 {
    let pi = lawsmith_expr::parse_decimal(PI_50).expect("a decimal");
    lawsmith_expr::to_f64(&(deg * pi / lawsmith_expr::BigRational::from_integer(180.into())))
}

/// Parses a unit string such as `m/s^2`, `kg*m^2`, `1/s`, `N` or `1`.
/// Errors carry the byte offset of the problem and, for a typo, the nearest known unit.
pub fn parse_unit(text: &str) -> Result<Dim, (usize, String)> {
    let units = named_units();
    let bytes = text.as_bytes();
    let mut pos = 0;
    let mut dim = Dim::one();
    let mut dividing = false;
    let skip_ws = |pos: &mut usize| {
        while *pos < bytes.len() && bytes[*pos] == b' ' {
            *pos += 1;
        }
    };
    if text.trim().is_empty() {
        return Err((
            0,
            "empty unit; write `1` for a dimensionless quantity".into(),
        ));
    }
    loop {
        skip_ws(&mut pos);
        let start = pos;
        while pos < bytes.len() && (bytes[pos].is_ascii_alphanumeric() || bytes[pos] == b'_') {
            pos += 1;
        }
        let name = &text[start..pos];
        if name.is_empty() {
            return Err((start, "expected a unit name".into()));
        }
        if name == "deg" {
            return Err((
                start,
                "`deg` is accepted only as the unit of an actuator (its limits are then read in degrees); everywhere else angles are in rad".into(),
            ));
        }
        let Some((_, d)) = units.iter().find(|(n, _)| *n == name) else {
            // `s2` for `s^2`: a unit followed by its exponent without the `^`
            let base = name.trim_end_matches(|c: char| c.is_ascii_digit());
            if base.len() < name.len() && units.iter().any(|(n, _)| *n == base) {
                let exponent = &name[base.len()..];
                return Err((
                    start,
                    format!("unknown unit `{name}`; did you mean `{base}^{exponent}`?"),
                ));
            }
            let names = units.iter().map(|(n, _)| *n);
            let hint = match lawsmith_expr::nearest(name, names) {
                Some(s) => format!("unknown unit `{name}`; did you mean `{s}`?"),
                None => format!(
                    "unknown unit `{name}`; known units: {}",
                    units.iter().map(|(n, _)| *n).collect::<Vec<_>>().join(", ")
                ),
            };
            return Err((start, hint));
        };
        let mut factor = *d;
        skip_ws(&mut pos);
        if pos < bytes.len() && bytes[pos] == b'^' {
            pos += 1;
            skip_ws(&mut pos);
            let es = pos;
            if pos < bytes.len() && bytes[pos] == b'-' {
                pos += 1;
            }
            while pos < bytes.len() && bytes[pos].is_ascii_digit() {
                pos += 1;
            }
            let e: i32 = text[es..pos]
                .parse()
                .map_err(|_| (es, "expected an integer exponent after `^`".to_string()))?;
            factor = factor.pow(e.into());
        }
        dim = if dividing {
            dim.div(&factor)
        } else {
            dim.mul(&factor)
        };
        skip_ws(&mut pos);
        match bytes.get(pos) {
            None => return Ok(dim),
            Some(b'*') => dividing = false,
            Some(b'/') => dividing = true,
            Some(_) => {
                // the whole character, which may be more than one byte
                let c = text[pos..].chars().next().unwrap_or('?');
                return Err((pos, format!("unexpected `{c}` in unit")));
            }
        }
        pos += 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn units_parse_to_si_dimensions() {
        let n = parse_unit("N").unwrap();
        assert_eq!(n, parse_unit("kg*m/s^2").unwrap());
        assert_eq!(parse_unit("J").unwrap(), parse_unit("N*m").unwrap());
        assert_eq!(parse_unit("W").unwrap(), parse_unit("J/s").unwrap());
        assert_eq!(parse_unit("1/s").unwrap().to_string(), "1/s");
        assert_eq!(parse_unit("kg*m^2").unwrap().to_string(), "kg*m^2");
        assert!(parse_unit("rad").unwrap().is_one());
        let (at, msg) = parse_unit("m/sec").unwrap_err();
        assert_eq!(at, 2);
        assert!(msg.contains("did you mean `s`"), "{msg}");
        assert!(parse_unit("deg").unwrap_err().1.contains("actuator"));
        let r = degrees_to_radians(&lawsmith_expr::parse_decimal("20").unwrap());
        assert_eq!(r, 20.0f64.to_radians());
        let (at, msg) = parse_unit("m/s2").unwrap_err();
        assert_eq!(at, 2);
        assert!(msg.contains("did you mean `s^2`"), "{msg}");
    }
}
