//! Special functions the models need beyond what `statrs` offers.
//!
//! [`erfcx`] is the scaled complementary error function `exp(x²)·erfc(x)`. The kinetic current
//! `exp(H²t)·erfc(H√t)` multiplies a huge and a tiny number once `H√t` exceeds about 26, where
//! `erfc` underflows to zero and `exp` overflows; the scaled function stays finite and keeps full
//! relative precision for every argument.
//!
//! [`students_t_quantile`] is Student's t quantile for any number of degrees of freedom.
//! `statrs` 0.19's `StudentsT::inverse_cdf` loses accuracy as the degrees of freedom grow (at
//! p = 0.975: 3 × 10⁻⁷ relative at 3 × 10⁴ degrees of freedom, 6 × 10⁻⁵ at 10⁶ and 7 % at 10⁷,
//! measured against `scipy.stats.t.ppf`), and with infinitely many it did not return (still
//! running after ten minutes). A fit over millions of points has that many, so from [`LARGE_DOF`]
//! on the quantile comes from the Cornish–Fisher expansion about the normal quantile instead.
//!
//! Equation numbers of Abramowitz & Stegun (1964) are cited as remembered; the facts they stand
//! for (series, asymptotics, reflection) are checked numerically in `tests/models_special.rs`.

// Cody's coefficients are kept to the 18 digits he published, so that the source can be
// compared with the paper digit for digit; the compiler rounds them to double precision.
#![allow(clippy::excessive_precision)]

/// `1/√π`.
const FRAC_1_SQRT_PI: f64 = 0.564_189_583_547_756_3;

// Coefficients of W. J. Cody's rational Chebyshev approximations, Math. Comp. 23 (1969) 631, as
// distributed by Cody in his SPECFUN routine CALERF (double-precision set; two independent
// copies agree digit for digit). `A`/`B`: erf(x) for |x| ≤ 0.46875; `C`/`D`: exp(x²)·erfc(x) for
// 0.46875 < x ≤ 4; `P`/`Q`: x·exp(x²)·erfc(x) = 1/√π − R(1/x²)/x² for x > 4.
const A: [f64; 5] = [
    3.161_123_743_870_565_6,
    1.138_641_541_510_501_6e2,
    3.774_852_376_853_020_2e2,
    3.209_377_589_138_469_5e3,
    1.857_777_061_846_031_5e-1,
];
const B: [f64; 4] = [
    2.360_129_095_234_412e1,
    2.440_246_379_344_441_7e2,
    1.282_616_526_077_372_3e3,
    2.844_236_833_439_170_6e3,
];
const C: [f64; 9] = [
    5.641_884_969_886_701e-1,
    8.883_149_794_388_376,
    6.611_919_063_714_163e1,
    2.986_351_381_974_001_3e2,
    8.819_522_212_417_691e2,
    1.712_047_612_634_070_6e3,
    2.051_078_377_826_071_5e3,
    1.230_339_354_797_997_2e3,
    2.153_115_354_744_038_5e-8,
];
const D: [f64; 8] = [
    1.574_492_611_070_983_5e1,
    1.176_939_508_913_125e2,
    5.371_811_018_620_098_6e2,
    1.621_389_574_566_690_2e3,
    3.290_799_235_733_459_6e3,
    4.362_619_090_143_247e3,
    3.439_367_674_143_721_6e3,
    1.230_339_354_803_749_4e3,
];
const P: [f64; 6] = [
    3.053_266_349_612_323_4e-1,
    3.603_448_999_498_044_4e-1,
    1.257_817_261_112_292_5e-1,
    1.608_378_514_874_227_7e-2,
    6.587_491_615_298_378e-4,
    1.631_538_713_730_209_8e-2,
];
const Q: [f64; 5] = [
    2.568_520_192_289_822_4,
    1.872_952_849_923_460_5,
    5.279_051_029_514_284e-1,
    6.051_834_131_244_132e-2,
    2.335_204_976_268_691_8e-3,
];

/// Below this, Cody evaluates erf by its own rational function and erfc as 1 − erf.
const THRESH: f64 = 0.468_75;
/// Above this, `1 − 1/(2x²)` is 1 in double precision, so `erfcx(x) = 1/(x√π)` (Cody's XHUGE).
const X_HUGE: f64 = 6.71e7;
/// Below this, `2·exp(x²)` overflows (Cody's XNEG for IEEE double precision).
const X_NEG: f64 = -26.628;

/// The scaled complementary error function `erfcx(x) = exp(x²)·erfc(x)`, finite and accurate to
/// a few units of rounding for every `x` above −26.6 (where it overflows to `+∞`).
///
/// Algorithm: W. J. Cody, "Rational Chebyshev approximations for the error function",
/// Math. Comp. 23 (1969) 631, in the three-interval form of his SPECFUN routine CALERF: a rational
/// function for erf on `|x| ≤ 0.46875`, one for `exp(x²)·erfc(x)` directly on `0.46875 < x ≤ 4`,
/// and one in `1/x²` for the asymptotic region `x > 4`. Negative arguments use the reflection
/// `erfc(−x) = 2 − erfc(x)`, i.e. `erfcx(x) = 2·exp(x²) − erfcx(−x)`, with `exp(x²)` split as
/// `exp(y²)·exp((x − y)(x + y))` for a `y` with few bits so that `x²` is not rounded (Cody's
/// device).
///
/// For large `x`, `erfcx(x) ≈ 1/(x√π)·(1 − 1/(2x²) + 3/(4x⁴) − …)` (M. Abramowitz &
/// I. A. Stegun, *Handbook of Mathematical Functions*, 1964, eq. 7.1.23).
pub fn erfcx(x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    let y = x.abs();
    let positive = if y <= THRESH {
        // erf(y) = y·(a₅y⁸ + a₀y⁶ + …)/(y⁸ + b₀y⁶ + …) in y².
        let ysq = y * y;
        let mut num = A[4] * ysq;
        let mut den = ysq;
        for i in 0..3 {
            num = (num + A[i]) * ysq;
            den = (den + B[i]) * ysq;
        }
        let erf = x * (num + A[3]) / (den + B[3]);
        // Here x is the signed argument: erfc(x) = 1 − erf(x) holds for both signs, so this
        // branch needs no reflection.
        return ysq.exp() * (1.0 - erf);
    } else if y <= 4.0 {
        let mut num = C[8] * y;
        let mut den = y;
        for i in 0..7 {
            num = (num + C[i]) * y;
            den = (den + D[i]) * y;
        }
        (num + C[7]) / (den + D[7])
    } else if y >= X_HUGE {
        FRAC_1_SQRT_PI / y
    } else {
        let z = 1.0 / (y * y);
        let mut num = P[5] * z;
        let mut den = z;
        for i in 0..4 {
            num = (num + P[i]) * z;
            den = (den + Q[i]) * z;
        }
        let r = z * (num + P[4]) / (den + Q[4]);
        (FRAC_1_SQRT_PI - r) / y
    };
    if x >= 0.0 {
        positive
    } else if x < X_NEG {
        f64::INFINITY
    } else {
        // exp(x²) without the rounding of x²: x = y16 + δ with y16 a multiple of 1/16.
        let y16 = (x * 16.0).trunc() / 16.0;
        let del = (x - y16) * (x + y16);
        let e = (y16 * y16).exp() * del.exp();
        2.0 * e - positive
    }
}

/// The derivative `d erfcx/dx = 2x·erfcx(x) − 2/√π` (from `d erfc/dx = −2/√π·exp(−x²)`,
/// Abramowitz & Stegun 1964, and the product rule).
///
/// For large `x` the two terms nearly cancel (the derivative is about `−1/(x²√π)`); the
/// difference then loses about `log₁₀(2x²)` digits, and beyond `x = 1e4` the asymptotic form
/// `−1/(x²√π)·(1 − 3/(2x²))` (from Abramowitz & Stegun 1964, eq. 7.1.23) is used instead.
pub fn erfcx_derivative(x: f64) -> f64 {
    if x > 1e4 {
        let z = 1.0 / (x * x);
        return -FRAC_1_SQRT_PI * z * (1.0 - 1.5 * z);
    }
    2.0 * x * erfcx(x) - 2.0 * FRAC_1_SQRT_PI
}

/// `eˣ` for `x ≤ 0`, in plain arithmetic so that it inlines and vectorises in the disk fit's
/// passes (the library `exp` is an opaque call per point): Cody–Waite reduction
/// `x = k·ln 2 + r`, `|r| ≤ ln 2 / 2` (W. J. Cody & W. Waite, *Software Manual for the Elementary
/// Functions*, 1980, with fdlibm's split of ln 2), the Taylor series of `eʳ` to `r¹³` (remainder
/// below 4e-18 relative) by Estrin's scheme, and `2ᵏ` put into the exponent bits. Arguments below −708 give
/// e^−708 ≈ 3e-308 instead of a smaller or zero value; the disk expression adds it to numbers
/// of order one.
#[inline]
pub(crate) fn exp_nonpositive(x: f64) -> f64 {
    const LN2_HI: f64 = 6.931_471_803_691_238_164_9e-1;
    const LN2_LO: f64 = 1.908_214_929_270_587_700_02e-10;
    // 1.5·2⁵²: adding it rounds to an integer held in the low bits of the mantissa.
    const SHIFT: f64 = 6_755_399_441_055_744.0;
    let x = x.max(-708.0);
    let kf = x * std::f64::consts::LOG2_E + SHIFT;
    let k = kf - SHIFT;
    let r = (x - k * LN2_HI) - k * LN2_LO;
    // 1/j!, evaluated by Estrin's scheme: the pairs, then powers r², r⁴, r⁸, so that the
    // chain of dependent operations is a third as long as Horner's.
    const C: [f64; 14] = [
        1.0,
        1.0,
        0.5,
        1.0 / 6.0,
        1.0 / 24.0,
        1.0 / 120.0,
        1.0 / 720.0,
        1.0 / 5_040.0,
        1.0 / 40_320.0,
        1.0 / 362_880.0,
        1.0 / 3_628_800.0,
        1.0 / 39_916_800.0,
        1.0 / 479_001_600.0,
        1.0 / 6_227_020_800.0,
    ];
    let r2 = r * r;
    let r4 = r2 * r2;
    let r8 = r4 * r4;
    let pair = |j: usize| C[j] + C[j + 1] * r;
    let q0 = pair(0) + pair(2) * r2;
    let q1 = pair(4) + pair(6) * r2;
    let q2 = pair(8) + pair(10) * r2;
    let q3 = pair(12);
    let p = (q0 + q1 * r4) + (q2 + q3 * r4) * r8;
    // k + 1023 lies in 1..=1023 here, a valid biased exponent.
    let biased = (kf.to_bits() as i64 - SHIFT.to_bits() as i64 + 1023) as u64;
    f64::from_bits(biased << 52) * p
}

/// From this many degrees of freedom on, [`students_t_quantile`] uses the Cornish–Fisher
/// expansion. Its first omitted term is then below 4 × 10⁻¹⁶ relative at p = 0.975 and below
/// 3 × 10⁻¹³ at p = 10⁻⁵ (measured against `scipy.stats.t.ppf`), while `statrs` is still good to
/// about 2 × 10⁻¹³ here.
pub const LARGE_DOF: f64 = 1000.0;

/// The quantile `t_p` of Student's t distribution with `dof` degrees of freedom: the value below
/// which a fraction `p` of the distribution lies. `None` unless `0 < p < 1` and `dof > 0`.
///
/// Below [`LARGE_DOF`] it is `statrs`'s inverse distribution function; from there on the
/// Cornish–Fisher expansion in powers of 1/ν about the normal quantile x = Φ⁻¹(p), to the ν⁻⁴
/// term (Abramowitz & Stegun, 1964, eq. 26.7.5; Fisher & Cornish, Technometrics 2 (1960) 209):
/// t_p = x + g₁(x)/ν + g₂(x)/ν² + g₃(x)/ν³ + g₄(x)/ν⁴ with g₁ = (x³ + x)/4,
/// g₂ = (5x⁵ + 16x³ + 3x)/96, g₃ = (3x⁷ + 19x⁵ + 17x³ − 15x)/384 and
/// g₄ = (79x⁹ + 776x⁷ + 1482x⁵ − 1920x³ − 945x)/92160.
pub fn students_t_quantile(p: f64, dof: f64) -> Option<f64> {
    use statrs::distribution::{ContinuousCDF, Normal, StudentsT};
    if !(p > 0.0 && p < 1.0 && dof > 0.0) {
        return None;
    }
    if dof < LARGE_DOF {
        return StudentsT::new(0.0, 1.0, dof).ok().map(|d| d.inverse_cdf(p));
    }
    let x = Normal::new(0.0, 1.0).ok()?.inverse_cdf(p);
    let x2 = x * x;
    let g1 = (x2 + 1.0) * x / 4.0;
    let g2 = ((5.0 * x2 + 16.0) * x2 + 3.0) * x / 96.0;
    let g3 = (((3.0 * x2 + 19.0) * x2 + 17.0) * x2 - 15.0) * x / 384.0;
    let g4 = ((((79.0 * x2 + 776.0) * x2 + 1482.0) * x2 - 1920.0) * x2 - 945.0) * x / 92160.0;
    let v = 1.0 / dof;
    Some(x + v * (g1 + v * (g2 + v * (g3 + v * g4))))
}

/// The two-sided 95 % point of Student's t, `t₀.₉₇₅`, with `dof` degrees of freedom (at least 1).
pub(crate) fn t975(dof: f64) -> f64 {
    students_t_quantile(0.975, dof.max(1.0)).unwrap_or(1.959_963_984_540_054)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_over_root_pi_is_exact() {
        let direct = 1.0 / std::f64::consts::PI.sqrt();
        assert!((FRAC_1_SQRT_PI - direct).abs() < 1e-16);
    }

    #[test]
    fn erfcx_is_one_at_zero() {
        // erfc(0) = 1 and exp(0) = 1.
        assert_eq!(erfcx(0.0), 1.0);
    }

    #[test]
    fn derivative_matches_a_central_difference() {
        for &x in &[-2.0f64, -0.3, 0.2, 0.47, 1.5, 3.9, 4.1, 12.0, 300.0] {
            let h = 1e-5 * x.abs().max(1.0);
            let numeric = (erfcx(x + h) - erfcx(x - h)) / (2.0 * h);
            let analytic = erfcx_derivative(x);
            assert!(
                (numeric - analytic).abs() <= 1e-7 * analytic.abs().max(1e-3),
                "x = {x}: {numeric} vs {analytic}"
            );
        }
    }

    #[test]
    fn exp_nonpositive_matches_the_library_exp() {
        // Reference: the platform's `f64::exp` (correctly rounded or within an ulp); allowed
        // 5e-16 relative, two ulps near 1 (measured: 4.4e-16).
        let mut worst = 0.0f64;
        for i in 0..=1_000_000 {
            let x = -708.0 * f64::from(i) / 1e6;
            let (a, b) = (exp_nonpositive(x), x.exp());
            worst = worst.max((a / b - 1.0).abs());
        }
        for x in [
            0.0,
            -0.0,
            -1e-300,
            -1e-17,
            -0.5 * std::f64::consts::LN_2,
            -1.0,
            -745.0,
        ] {
            let b = x.exp().max((-708.0f64).exp());
            worst = worst.max((exp_nonpositive(x) / b - 1.0).abs());
        }
        assert!(worst < 5e-16, "{worst:e}");
    }
}
