//! The floating-point types the generated code computes in, as the interpreter computes in
//! them: one [`Real`] per [`Float`], so [`Program::run`](crate::Program::run) and
//! [`Controller::run`](crate::Controller::run) in `f32` are the emitted `f32` code, operation
//! for operation, and agree with it bit for bit.

use crate::Float;
use lawsmith_expr::Func;
use std::fmt::Debug;
use std::ops::{Add, Div, Mul, Neg, Sub};

/// A floating-point type of the generated code: IEEE 754 arithmetic (each operation rounded
/// once, no fused multiply-add), the functions of the `libm` crate the emitted Rust calls
/// (`sin`, `sinf`, …) and the literals the emitters print.
pub trait Real:
    Copy
    + Debug
    + Default
    + PartialOrd
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
    + Send
    + Sync
    + 'static
{
    /// The emitters' name of this type.
    const FLOAT: Float;
    /// The literal an emitter prints for the double `x` (its nearest value of this type).
    fn lit(x: f64) -> Self;
    /// The value as a double (exact: every `f32` is a double).
    fn to_f64(self) -> f64;
    /// Is it NaN?
    fn is_nan(self) -> bool;
    /// Is it neither NaN nor infinite?
    fn is_finite(self) -> bool;
    /// A function of the formula language as the emitted code calls it (`b` is read by the
    /// functions of two arguments only). `min`/`max` follow IEEE 754 minNum/maxNum (a NaN
    /// operand loses), as `fmin`/`fmax` in C.
    fn call(f: Func, a: Self, b: Self) -> Self;
    /// `pow(a, b)`.
    fn pow(a: Self, b: Self) -> Self;
}

/// `Real` for one type, given its `libm` functions.
macro_rules! real {
    ($t:ty, $float:expr, $sin:ident, $cos:ident, $tan:ident, $asin:ident, $acos:ident,
     $atan:ident, $atan2:ident, $sqrt:ident, $exp:ident, $log:ident, $fabs:ident,
     $fmin:ident, $fmax:ident, $pow:ident) => {
        impl Real for $t {
            const FLOAT: Float = $float;
            fn lit(x: f64) -> Self {
                x as $t
            }
            fn to_f64(self) -> f64 {
                f64::from(self)
            }
            fn is_nan(self) -> bool {
                <$t>::is_nan(self)
            }
            fn is_finite(self) -> bool {
                <$t>::is_finite(self)
            }
            fn call(f: Func, a: Self, b: Self) -> Self {
                match f {
                    Func::Sin => libm::$sin(a),
                    Func::Cos => libm::$cos(a),
                    Func::Tan => libm::$tan(a),
                    Func::Asin => libm::$asin(a),
                    Func::Acos => libm::$acos(a),
                    Func::Atan => libm::$atan(a),
                    Func::Atan2 => libm::$atan2(a, b),
                    Func::Sqrt => libm::$sqrt(a),
                    Func::Exp => libm::$exp(a),
                    Func::Ln => libm::$log(a),
                    Func::Abs => libm::$fabs(a),
                    Func::Min => libm::$fmin(a, b),
                    Func::Max => libm::$fmax(a, b),
                    Func::Clamp => unreachable!("clamp is lowered to min and max"),
                }
            }
            fn pow(a: Self, b: Self) -> Self {
                libm::$pow(a, b)
            }
        }
    };
}

real!(
    f64,
    Float::F64,
    sin,
    cos,
    tan,
    asin,
    acos,
    atan,
    atan2,
    sqrt,
    exp,
    log,
    fabs,
    fmin,
    fmax,
    pow
);
real!(
    f32,
    Float::F32,
    sinf,
    cosf,
    tanf,
    asinf,
    acosf,
    atanf,
    atan2f,
    sqrtf,
    expf,
    logf,
    fabsf,
    fminf,
    fmaxf,
    powf
);

/// A range's ends as the code of type `R` compares against them: rounded inward
/// ([`Float::inward`]).
pub(crate) fn ends<R: Real>(range: (f64, f64)) -> (R, R) {
    let (lo, hi) = R::FLOAT.inward(range);
    (R::lit(lo), R::lit(hi))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn literals_are_the_nearest_value_and_ends_round_inward() {
        // 0.2 is not a binary fraction: its nearest f32 lies above it (IEEE 754 binary32,
        // 0.2f = 0.20000000298023224), so the f32 code's upper end is the f32 below
        assert!(f64::from(f32::lit(0.2)) > 0.2);
        let (lo, hi) = ends::<f32>((-0.2, 0.2));
        assert!(f64::from(hi) < 0.2 && f64::from(hi.next_up()) > 0.2);
        assert!(f64::from(lo) > -0.2 && f64::from(lo.next_down()) < -0.2);
        assert_eq!(ends::<f64>((-0.2, 0.2)), (-0.2, 0.2));
    }
}
