//! Exact decimal literals: parsing to rationals and printing back.

use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::{Signed, ToPrimitive};

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

/// A number as a spec wrote it: its exact rational value, and the f64 nearest to it.
///
/// The proof works with the exact value (or with f64 bounds rounded outward from it, so a
/// box always contains what the spec declared); generated code and simulation hold the
/// nearest f64.
#[derive(Clone, Debug, PartialEq)]
pub struct Decimal {
    exact: BigRational,
    nearest: f64,
}

impl Decimal {
    /// A decimal literal with an optional sign (`-0.05`, `+2`, `1.5e-3`), read exactly; None
    /// when the text is not one.
    pub fn parse(text: &str) -> Option<Decimal> {
        let t = text.trim();
        let (neg, digits) = match t.as_bytes().first() {
            Some(b'-') => (true, &t[1..]),
            Some(b'+') => (false, &t[1..]),
            _ => (false, t),
        };
        let v = parse_decimal(digits)?;
        let exact = if neg { -v } else { v };
        // Rust's parse is correctly rounded: the nearest f64 to the same text
        let nearest: f64 = t.parse().ok()?;
        nearest.is_finite().then_some(Decimal { exact, nearest })
    }

    /// The shortest decimal that reads back as `x` (`9.80665` for the double nearest it):
    /// how a number that arrives as an f64 was most likely written. Non-finite values give 0.
    pub fn from_f64(x: f64) -> Decimal {
        if !x.is_finite() {
            return Decimal::from_f64(0.0);
        }
        let text = format!("{:e}", x.abs());
        let v = parse_decimal(&text)
            .or_else(|| BigRational::from_float(x.abs()))
            .unwrap_or_default();
        Decimal {
            exact: if x < 0.0 { -v } else { v },
            nearest: x,
        }
    }

    /// The f64 itself, as an exact value: for numbers that are binary by nature (an f64
    /// computed from others), where no decimal was written.
    pub fn binary(x: f64) -> Decimal {
        Decimal {
            exact: BigRational::from_float(x).unwrap_or_default(),
            nearest: if x.is_finite() { x } else { 0.0 },
        }
    }

    /// A decimal of an exact rational whose expansion terminates (a sum or difference of
    /// decimals), with its correctly rounded nearest f64; None for one that does not
    /// terminate (1/3).
    pub fn from_exact(v: &BigRational) -> Option<Decimal> {
        Decimal::parse(&as_terminating_decimal(v)?)
    }

    /// The exact value.
    pub fn exact(&self) -> &BigRational {
        &self.exact
    }

    /// The f64 nearest to the exact value.
    pub fn value(&self) -> f64 {
        self.nearest
    }

    /// True when the nearest f64 is the exact value.
    pub fn is_exact(&self) -> bool {
        BigRational::from_float(self.nearest).as_ref() == Some(&self.exact)
    }

    /// The largest f64 at or below the exact value.
    pub fn down(&self) -> f64 {
        match BigRational::from_float(self.nearest) {
            Some(v) if v > self.exact => self.nearest.next_down(),
            _ => self.nearest,
        }
    }

    /// The smallest f64 at or above the exact value.
    pub fn up(&self) -> f64 {
        match BigRational::from_float(self.nearest) {
            Some(v) if v < self.exact => self.nearest.next_up(),
            _ => self.nearest,
        }
    }
}

/// Denominators longer than this print as fractions `p/q` rather than as decimals: a decimal
/// of a 2^-4096 would be thousands of digits, and finding it costs a division per factor.
pub const MAX_DECIMAL_DENOMINATOR_BITS: u64 = 1024;

/// The places after the point of `v`'s decimal expansion if it terminates (its denominator
/// has no prime factor but 2 and 5) and the denominator is at most
/// [`MAX_DECIMAL_DENOMINATOR_BITS`] long.
pub fn decimal_places(v: &BigRational) -> Option<usize> {
    two_five_factors(v.denom()).map(|(twos, fives)| twos.max(fives))
}

/// `(a, b)` when `den` is exactly 2^a·5^b and at most [`MAX_DECIMAL_DENOMINATOR_BITS`] long.
/// The power of five is found from the bit length (5^b has ⌊b·log₂5⌋ + 1 bits) and checked
/// with one comparison, rather than by a division per factor: printing calls this for every
/// number of every atom, and a denominator of 10^300 would cost 300 big divisions each time.
fn two_five_factors(den: &BigInt) -> Option<(usize, usize)> {
    if den.bits() > MAX_DECIMAL_DENOMINATOR_BITS || !den.is_positive() {
        return None;
    }
    let twos = den.trailing_zeros().unwrap_or(0);
    let rest = den >> twos;
    // 5^b has bit length ⌊b·log₂5⌋ + 1, so b is within one of (bits − 1)/log₂5; the bound on
    // the bits keeps the f64 estimate far from rounding trouble
    let estimate = ((rest.bits() - 1) as f64 / (std::f64::consts::LOG2_10 - 1.0)).floor() as usize;
    let low = estimate.saturating_sub(1);
    let mut p = num_traits::pow(BigInt::from(5), low);
    for b in low..=estimate + 1 {
        if p == rest {
            return Some((twos as usize, b));
        }
        if p > rest {
            break;
        }
        p *= 5u32;
    }
    None
}

/// The exact decimal expansion of `v` if [`decimal_places`] finds one.
pub fn as_terminating_decimal(v: &BigRational) -> Option<String> {
    let (twos, fives) = two_five_factors(v.denom())?;
    let places = twos.max(fives);
    // v·10^places = numer · 2^(places − twos) · 5^(places − fives), an integer: no gcd needed
    let n = (v.numer() << (places - twos)) * num_traits::pow(BigInt::from(5), places - fives);
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
    fn decimals_round_outward_from_their_exact_value() {
        // 0.05 as a double is 0.05000000000000000277 > 1/20 and -0.05 the mirror image;
        // 0.5 is exact (IEEE 754 binary64, common practice)
        let d = Decimal::parse("0.05").unwrap();
        assert_eq!(d.exact(), &r(1, 20));
        assert!(!d.is_exact());
        assert_eq!(d.up(), 0.05);
        assert_eq!(d.down(), 0.05f64.next_down());
        let n = Decimal::parse("-0.05").unwrap();
        assert_eq!((n.down(), n.up()), (-0.05, (-0.05f64).next_up()));
        let h = Decimal::parse("+0.5").unwrap();
        assert!(h.is_exact() && h.down() == 0.5 && h.up() == 0.5);
        // more digits than a double holds: the exact value is what was written
        let long = Decimal::parse("0.30000000000000001").unwrap();
        assert_eq!(long.value(), 0.3);
        assert!(long.down() < long.up());
        assert_eq!(Decimal::from_f64(9.80665).exact(), &r(196133, 20000));
        assert_eq!(Decimal::parse("0x10"), None);
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

    #[test]
    fn decimal_places_follow_the_factors_of_two_and_five() {
        // a fraction in lowest terms terminates after max(a, b) places exactly when its
        // denominator is 2^a·5^b (common practice)
        assert_eq!(decimal_places(&r(1, 8)), Some(3));
        assert_eq!(decimal_places(&r(3, 40)), Some(3));
        assert_eq!(decimal_places(&r(7, 625)), Some(4));
        assert_eq!(decimal_places(&r(5, 1)), Some(0));
        assert_eq!(decimal_places(&r(1, 12)), None);
        let pow = |b: i64, k: usize| num_traits::pow(BigInt::from(b), k);
        let tiny = BigRational::new(BigInt::from(1), pow(10, 300));
        assert_eq!(decimal_places(&tiny), Some(300));
        // 2^-2000 terminates, but its denominator is past the bound: printed as a fraction
        let long = BigRational::new(BigInt::from(1), pow(2, 2000));
        assert_eq!(decimal_places(&long), None);
        assert_eq!(as_terminating_decimal(&long), None);
    }

    #[test]
    fn powers_of_two_and_five_are_recognised_from_their_length() {
        // every 2^a·5^b up to the bound is found with its exponents, and a near miss (one more
        // odd factor, or one off) is not: the closed-form count must agree with the definition
        let pow = |b: i64, k: usize| num_traits::pow(BigInt::from(b), k);
        for b in 0..=441 {
            for a in [0usize, 1, 7, 64] {
                let den = pow(2, a) * pow(5, b);
                let expect = (den.bits() <= MAX_DECIMAL_DENOMINATOR_BITS).then_some((a, b));
                assert_eq!(two_five_factors(&den), expect, "2^{a}·5^{b}");
                assert_eq!(two_five_factors(&(&den * 3)), None, "3·2^{a}·5^{b}");
                if b > 1 {
                    assert_eq!(two_five_factors(&(&den + 2 * pow(2, a))), None);
                }
            }
        }
        // the decimal text is the exact value: 3/2^a·5^b back through parse_decimal
        for (a, b) in [(0, 300), (12, 3), (200, 0), (5, 77)] {
            let v = BigRational::new(BigInt::from(-3), pow(2, a) * pow(5, b));
            let text = as_terminating_decimal(&v).unwrap();
            let back = parse_decimal(text.trim_start_matches('-')).unwrap();
            assert_eq!(-back, v, "{text}");
        }
    }
}
