//! Exact decimal literals: parsing to rationals and printing back.

use num_bigint::BigInt;
use num_integer::Integer;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

/// Largest decimal exponent accepted in a literal. `1e400` already overflows f64; a bound keeps
/// a literal such as `1e999999999` from allocating a gigantic integer.
pub const MAX_DECIMAL_EXPONENT: i64 = 400;

/// Parses a decimal literal (`12`, `0.5`, `9.80665`, `1.5e-3`) into an exact rational.
/// Returns `None` when the text is not a literal or its exponent is out of range.
pub fn parse_decimal(text: &str) -> Option<BigRational> {
    let (mantissa, exponent) = match text.find(['e', 'E']) {
        Some(i) => (&text[..i], text[i + 1..].parse::<i64>().ok()?),
        None => (text, 0),
    };
    let (int_part, frac_part) = match mantissa.find('.') {
        Some(i) => (&mantissa[..i], &mantissa[i + 1..]),
        None => (mantissa, ""),
    };
    if int_part.is_empty() && frac_part.is_empty() {
        return None;
    }
    if !int_part
        .bytes()
        .chain(frac_part.bytes())
        .all(|b| b.is_ascii_digit())
    {
        return None;
    }
    let digits = format!("{int_part}{frac_part}");
    let numer: BigInt = digits.parse().ok()?;
    let scale = exponent - frac_part.len() as i64;
    if scale.abs() > MAX_DECIMAL_EXPONENT + 64 {
        return None;
    }
    let ten = BigInt::from(10);
    let p = num_traits::pow(ten, scale.unsigned_abs() as usize);
    Some(if scale >= 0 {
        BigRational::from_integer(numer * p)
    } else {
        BigRational::new(numer, p)
    })
}

/// The exact decimal expansion of `v` if its denominator has no prime factor other than 2 and 5.
pub fn as_terminating_decimal(v: &BigRational) -> Option<String> {
    let mut den = v.denom().clone();
    let two = BigInt::from(2);
    let five = BigInt::from(5);
    let mut twos = 0usize;
    let mut fives = 0usize;
    while den.is_even() {
        den /= &two;
        twos += 1;
    }
    while (&den % &five).is_zero() {
        den /= &five;
        fives += 1;
    }
    if !den.is_one() {
        return None;
    }
    let places = twos.max(fives);
    let scaled = v * BigRational::from_integer(num_traits::pow(BigInt::from(10), places));
    debug_assert!(scaled.is_integer());
    let n = scaled.to_integer();
    let neg = n.is_negative();
    let digits = n.abs().to_string();
    let text = if places == 0 {
        digits
    } else {
        let padded = format!("{digits:0>width$}", width = places + 1);
        let (i, f) = padded.split_at(padded.len() - places);
        format!("{i}.{f}")
    };
    Some(if neg { format!("-{text}") } else { text })
}

/// The nearest f64 to an exact rational (correct to within an ulp or so, which is all the
/// f64 evaluators need; exact work stays rational).
pub fn to_f64(v: &BigRational) -> f64 {
    if let (Some(n), Some(d)) = (v.numer().to_f64(), v.denom().to_f64()) {
        if n.is_finite() && d.is_finite() && n.abs() < 9.0e15 && d < 9.0e15 {
            return n / d;
        }
    }
    v.to_f64().unwrap_or(f64::NAN)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn r(n: i64, d: i64) -> BigRational {
        BigRational::new(n.into(), d.into())
    }

    #[test]
    fn decimals_are_exact() {
        assert_eq!(parse_decimal("9.80665"), Some(r(196133, 20000)));
        assert_eq!(parse_decimal("0.5"), Some(r(1, 2)));
        assert_eq!(parse_decimal("1.5e-3"), Some(r(3, 2000)));
        assert_eq!(parse_decimal("2E2"), Some(r(200, 1)));
        assert_eq!(parse_decimal(".25"), Some(r(1, 4)));
        assert_eq!(parse_decimal("1e999999"), None);
        assert_eq!(parse_decimal("."), None);
    }

    #[test]
    fn terminating_decimals_print_back() {
        for t in ["9.80665", "0.5", "0.0015", "45", "-0.35", "0.05"] {
            let v = if let Some(s) = t.strip_prefix('-') {
                -parse_decimal(s).unwrap()
            } else {
                parse_decimal(t).unwrap()
            };
            assert_eq!(as_terminating_decimal(&v).as_deref(), Some(t));
        }
        assert_eq!(as_terminating_decimal(&r(1, 3)), None);
    }
}
