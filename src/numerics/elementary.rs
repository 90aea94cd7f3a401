//! exp and tanh written out in straight-line arithmetic, so that the batch evaluator
//! ([`crate::language::tape::Evaluator::eval_batch`]) can run them over all its lanes at once: no table,
//! no branch, no call into the platform's maths library. The single-point evaluator, the
//! constant folder and the jets use the same functions, so every path gives the same bits.
//!
//! Both rest on one reduction: x = k ln 2 + r with integer k and |r| <= ln(2)/2, ln 2 split
//! in two so that k ln2_hi is exact (Cody & Waite's argument reduction; the split constants are
//! common practice, and the test checks that they sum to ln 2). Then e^r - 1 comes from its
//! Taylor series to r^13 (remainder below 6e-18 relative at |r| = ln(2)/2), evaluated by
//! Estrin's scheme for a short dependency chain.
//!
//! Accuracy (the tests compare with the platform's functions over sweeps of both signs and
//! with values from mpmath at 80 digits): exp within 1 ulp of the true value for results in
//! the normal range; tanh within 2.5 ulp, and within 1 ulp beyond |x| = 1 where it nears 1.
//! Below the normal range exp rounds once into the subnormals.
//!
//! [`powi`], integer powers by binary powering, lives here too: the IR's reference evaluator,
//! the tape and the jets share it.
//!
//! ```
//! use efold::numerics::elementary::{exp, tanh};
//! assert!((exp(1.0) - std::f64::consts::E).abs() <= f64::EPSILON * 3.0);
//! assert_eq!(tanh(-0.0).to_bits(), (-0.0f64).to_bits());
//! assert_eq!(exp(f64::NEG_INFINITY), 0.0);
//! ```

/// ln 2 in two parts: `LN2_HI` has 32 significant bits, so `k * LN2_HI` is exact for the
/// |k| < 2^21 that occur here.
const LN2_HI: f64 = 6.931_471_803_691_238e-1;
const LN2_LO: f64 = 1.908_214_929_270_587_7e-10;
/// 1.5 * 2^52: adding and subtracting it rounds a double of magnitude below 2^51 to the
/// nearest integer (ties to even), without a call.
const ROUND: f64 = 6_755_399_441_055_744.0;

/// 1/(j+2)!, j = 0..=11: the coefficients of (e^r - 1 - r) / r^2.
const Q: [f64; 12] = {
    let mut q = [0.0; 12];
    let mut fact = 2.0;
    let mut j = 0;
    while j < 12 {
        q[j] = 1.0 / fact;
        fact *= (j + 3) as f64;
        j += 1;
    }
    q
};

/// (k, r) with x = k ln 2 + r, |r| <= ln(2)/2 (plus rounding). `x` must be finite and below
/// 2^50 in magnitude, or NaN (then both are NaN).
#[inline(always)]
fn reduce(x: f64) -> (f64, f64) {
    let k = (x * std::f64::consts::LOG2_E + ROUND) - ROUND;
    let r = (x - k * LN2_HI) - k * LN2_LO;
    (k, r)
}

/// e^r - 1 for |r| <= ln(2)/2: r + r^2 Q(r).
#[inline(always)]
fn expm1_reduced(r: f64) -> f64 {
    let r2 = r * r;
    let r4 = r2 * r2;
    let r8 = r4 * r4;
    let p01 = Q[0] + Q[1] * r;
    let p23 = Q[2] + Q[3] * r;
    let p45 = Q[4] + Q[5] * r;
    let p67 = Q[6] + Q[7] * r;
    let p89 = Q[8] + Q[9] * r;
    let p1011 = Q[10] + Q[11] * r;
    let a = p01 + p23 * r2;
    let b = p45 + p67 * r2;
    let c = p89 + p1011 * r2;
    let q = a + b * r4 + c * r8;
    r + r2 * q
}

/// 2^k for an integer-valued k with -1022 <= k <= 1023.
#[inline(always)]
fn pow2(k: i32) -> f64 {
    f64::from_bits(((k + 1023) as u64) << 52)
}

/// e^x. Overflows to +inf above ln(f64::MAX), underflows through the subnormals to 0, NaN for
/// NaN.
#[inline(always)]
pub fn exp(x: f64) -> f64 {
    // Beyond these the result is inf or 0 anyway; the clamp keeps k in range (NaN passes).
    let xc = x.clamp(-746.0, 710.0);
    let (kf, r) = reduce(xc);
    let p = 1.0 + expm1_reduced(r);
    // 2^k as two factors, each a normal number: p 2^k1 is exact, and the second product
    // rounds once, also into the subnormals. (NaN converts to k = 0 and stays NaN through p.)
    let k = kf as i32;
    let k1 = k >> 1;
    p * pow2(k1) * pow2(k - k1)
}

/// Where [`tanh`] changes form: ln(3)/2, at which 1 - tanh = 1/2.
const TANH_SWITCH: f64 = 0.549_306_144_334_054_8;

/// tanh x from one exponential of -2|x|, reduced once: with s = 2^k, m = e^r - 1 (so
/// e^(-2|x|) = s (1 + m)),
/// - below ln(3)/2: tanh|x| = -e / (e + 2), e = e^(-2|x|) - 1 = s m + (s - 1), accurate near 0
///   (for k < 0, |s - 1| >= 1/2 > |s m|, so the sum does not cancel);
/// - above: tanh|x| = 1 - q, q = 2u / (1 + u), u = e^(-2|x|) = s m + s, so that near 1 the
///   result is 1 minus a small, accurately known q (rounded once: the digits that
///   1 - tanh(x)^2 and similar plateau expressions keep).
///
/// Both forms share one division; signed as x. Keeps -0.0, gives +-1 for +-inf and NaN for
/// NaN.
#[inline(always)]
pub fn tanh(x: f64) -> f64 {
    let a = x.abs();
    // e^-60 is below the precision of 1 + u; the clamp keeps k in range. (Not `max`, which
    // would turn NaN into -60.)
    let y = -2.0 * a;
    let y = if y < -60.0 { -60.0 } else { y };
    let (kf, r) = reduce(y);
    let m = expm1_reduced(r);
    let s = pow2(kf as i32);
    let sm = s * m;
    let small = a < TANH_SWITCH;
    let (num, den) = if small {
        let e = sm + (s - 1.0);
        (-e, e + 2.0)
    } else {
        let u = sm + s;
        (2.0 * u, 1.0 + u)
    };
    let d = num / den;
    let t = if small { d } else { 1.0 - d };
    t.copysign(x)
}

/// x^n for a small integer n by binary powering; the one definition the IR's constant folder,
/// the tape and the jets share, so a folded power has the evaluator's bits. Exponents of the
/// size the IR keeps as integer powers (|n| <= `ir::MAX_POWI` = 16) are unrolled.
#[inline(always)]
pub fn powi(x: f64, n: i32) -> f64 {
    if n < 0 {
        return 1.0 / powi(x, -n);
    }
    let x2 = x * x;
    match n {
        0 => 1.0,
        1 => x,
        2 => x2,
        3 => x2 * x,
        4 => x2 * x2,
        5 => x2 * x2 * x,
        6 => x2 * x2 * x2,
        7 => x2 * x2 * x2 * x,
        8 => {
            let x4 = x2 * x2;
            x4 * x4
        }
        _ => {
            let (mut acc, mut base, mut e) = (1.0, x, n as u32);
            while e > 0 {
                if e & 1 == 1 {
                    acc *= base;
                }
                base *= base;
                e >>= 1;
            }
            acc
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Units in the last place of `want` between `got` and `want`.
    fn ulps(got: f64, want: f64) -> f64 {
        // The spacing of doubles just above |want| (the smallest subnormal at 0).
        let a = want.abs();
        let ulp = f64::from_bits(a.to_bits() + 1) - a;
        (got - want).abs() / ulp
    }

    #[test]
    fn the_split_of_ln2_is_exact_where_needed() {
        // k * LN2_HI is exact: LN2_HI has at most 32 significant bits.
        assert_eq!(LN2_HI.to_bits() & ((1u64 << 21) - 1), 0);
        // The two parts sum to ln 2 in double precision (mpmath: their exact sum differs
        // from ln 2 by -1.2e-26).
        assert_eq!(LN2_HI + LN2_LO, std::f64::consts::LN_2);
        assert_eq!(Q[0], 0.5);
        assert_eq!(Q[1], 1.0 / 6.0);
        assert!((Q[11] - 1.0 / 6_227_020_800.0).abs() < 1e-25);
    }

    /// Against the platform's exp (correctly rounded to within about 0.5 ulp): within 1 ulp
    /// from e^-708 to e^709, and at the edges.
    #[test]
    fn exp_matches_the_platform() {
        let mut worst = 0.0f64;
        let mut x = -708.0;
        while x < 709.0 {
            worst = worst.max(ulps(exp(x), x.exp()));
            x += 0.0137;
        }
        let mut x = 1e-12;
        while x < 1.0 {
            worst = worst.max(ulps(exp(x), x.exp())).max(ulps(exp(-x), (-x).exp()));
            x *= 1.01;
        }
        assert!(worst <= 1.0, "worst {worst} ulp");
        assert_eq!(exp(0.0), 1.0);
        assert_eq!(exp(710.0), f64::INFINITY);
        assert_eq!(exp(f64::INFINITY), f64::INFINITY);
        assert_eq!(exp(-746.0), 0.0);
        assert_eq!(exp(f64::NEG_INFINITY), 0.0);
        assert!(exp(f64::NAN).is_nan());
        assert!(exp(709.78).is_finite());
        // Subnormal results: e^-740 = 4.2e-322 (within one subnormal step).
        assert!((exp(-740.0) - (-740f64).exp()).abs() <= f64::from_bits(1));
    }

    /// Against values of exp and tanh from mpmath at 80 digits, rounded to double, at 400
    /// points each (tests/reference/gen_elementary.py, committed with its output): within
    /// 1 ulp (exp) and 2.5 ulp (tanh), 1 ulp for tanh beyond |x| = 1 (a sweep of 60,000
    /// points found 0.92, 2.24 and 0.86).
    #[test]
    fn against_mpmath() {
        let data: serde_json::Value =
            serde_json::from_str(include_str!("../../tests/reference/elementary.json")).unwrap();
        let cases = |key: &str| -> Vec<(f64, f64)> {
            data[key]
                .as_array()
                .unwrap()
                .iter()
                .map(|p| (p[0].as_f64().unwrap(), p[1].as_f64().unwrap()))
                .collect()
        };
        let (exps, tanhs) = (cases("exp"), cases("tanh"));
        assert_eq!((exps.len(), tanhs.len()), (400, 400));
        let worst_exp = exps.iter().map(|&(x, w)| ulps(exp(x), w)).fold(0.0, f64::max);
        let worst_tanh = tanhs.iter().map(|&(x, w)| ulps(tanh(x), w)).fold(0.0, f64::max);
        assert!(worst_exp <= 1.0, "exp: worst {worst_exp} ulp");
        assert!(worst_tanh <= 2.5, "tanh: worst {worst_tanh} ulp");
        let worst_near_1 = tanhs
            .iter()
            .filter(|p| p.0.abs() > 1.0)
            .map(|&(x, w)| ulps(tanh(x), w))
            .fold(0.0, f64::max);
        assert!(worst_near_1 <= 1.0, "tanh beyond 1: worst {worst_near_1} ulp");
    }

    /// Against the platform's tanh (itself within about 2 ulp of the true value): within
    /// 4.5 ulp of it over both signs from 1e-12 to 40, and exact at the special values.
    #[test]
    fn tanh_matches_the_platform() {
        let mut worst = 0.0f64;
        let mut x = 1e-12f64;
        while x < 40.0 {
            for v in [x, -x] {
                worst = worst.max(ulps(tanh(v), v.tanh()));
            }
            x *= 1.0 + 1e-3;
        }
        assert!(worst <= 4.5, "worst {worst} ulp");
        assert_eq!(tanh(0.0).to_bits(), 0.0f64.to_bits());
        assert_eq!(tanh(-0.0).to_bits(), (-0.0f64).to_bits());
        assert_eq!(tanh(f64::INFINITY), 1.0);
        assert_eq!(tanh(f64::NEG_INFINITY), -1.0);
        assert_eq!(tanh(25.0), 1.0);
        assert!(tanh(f64::NAN).is_nan());
    }
}
