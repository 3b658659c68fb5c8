//! One floating-point result on every platform: the elementary functions (and the complex ones
//! built on them) that the whole crate calls, all from the pure-Rust `libm` crate.
//!
//! Why: `f64::sin`, `f64::ln`, `f64::powf` … call the platform's maths library: glibc natively,
//! Rust's bundled port of musl's libm under wasm. Both are accurate to about an ulp, but not to
//! the same bits, so the page and the command line gave the same link different last digits
//! (and, through a comparison, a different order of a conjugate pole pair). Calling `libm` on
//! both targets makes every result bit-identical, so the page's downloads are the command line's
//! bytes. The exact IEEE operations (`+ − × ÷`, `sqrt`, `abs`, `floor`, `ceil`, `round`, `trunc`,
//! `min`, `max`, `copysign`) are the same everywhere and stay as they are; fused multiply-add is
//! never used (it rounds once where the plain expression rounds twice).
//!
//! The names are the std method names, so `x.ln()` reads `fmath::ln(x)` and `x.powf(y)` reads
//! `fmath::powf(x, y)`. The complex functions follow num-complex 0.4's formulas (its
//! `norm`, `arg`, `exp`, `ln`, `sqrt`, `powf`, `from_polar`, `cis`) with libm underneath, so their
//! results are today's to the last bit or two. `clippy.toml` and `tests/one_float.rs` keep the std
//! and num-complex forms out of `src/`.

use num_complex::Complex64;

/// sin x (x in radians).
#[inline]
pub fn sin(x: f64) -> f64 {
    libm::sin(x)
}

/// cos x (x in radians).
#[inline]
pub fn cos(x: f64) -> f64 {
    libm::cos(x)
}

/// tan x (x in radians).
#[inline]
pub fn tan(x: f64) -> f64 {
    libm::tan(x)
}

/// (sin x, cos x), as `f64::sin_cos`.
#[inline]
pub fn sin_cos(x: f64) -> (f64, f64) {
    libm::sincos(x)
}

/// arcsin x in radians, in [−π/2, π/2].
#[inline]
pub fn asin(x: f64) -> f64 {
    libm::asin(x)
}

/// arccos x in radians, in [0, π].
#[inline]
pub fn acos(x: f64) -> f64 {
    libm::acos(x)
}

/// arctan x in radians, in (−π/2, π/2).
#[inline]
pub fn atan(x: f64) -> f64 {
    libm::atan(x)
}

/// The angle of the point (x, y) in radians, in (−π, π]: `y.atan2(x)` is `atan2(y, x)`.
#[inline]
pub fn atan2(y: f64, x: f64) -> f64 {
    libm::atan2(y, x)
}

/// sinh x.
#[inline]
pub fn sinh(x: f64) -> f64 {
    libm::sinh(x)
}

/// cosh x.
#[inline]
pub fn cosh(x: f64) -> f64 {
    libm::cosh(x)
}

/// tanh x.
#[inline]
pub fn tanh(x: f64) -> f64 {
    libm::tanh(x)
}

/// arsinh x = ln(x + √(x² + 1)).
#[inline]
pub fn asinh(x: f64) -> f64 {
    libm::asinh(x)
}

/// arcosh x = ln(x + √(x² − 1)), x ≥ 1 (NaN below).
#[inline]
pub fn acosh(x: f64) -> f64 {
    libm::acosh(x)
}

/// artanh x = ½ ln((1 + x)/(1 − x)), |x| < 1.
#[inline]
pub fn atanh(x: f64) -> f64 {
    libm::atanh(x)
}

/// eˣ.
#[inline]
pub fn exp(x: f64) -> f64 {
    libm::exp(x)
}

/// 2ˣ.
#[inline]
pub fn exp2(x: f64) -> f64 {
    libm::exp2(x)
}

/// eˣ − 1, accurate near x = 0.
#[inline]
pub fn exp_m1(x: f64) -> f64 {
    libm::expm1(x)
}

/// The natural logarithm ln x (NaN below 0, −∞ at 0).
#[inline]
pub fn ln(x: f64) -> f64 {
    libm::log(x)
}

/// log₁₀ x.
#[inline]
pub fn log10(x: f64) -> f64 {
    libm::log10(x)
}

/// log₂ x.
#[inline]
pub fn log2(x: f64) -> f64 {
    libm::log2(x)
}

/// ln(1 + x), accurate near x = 0.
#[inline]
pub fn ln_1p(x: f64) -> f64 {
    libm::log1p(x)
}

/// xʸ.
#[inline]
pub fn powf(x: f64, y: f64) -> f64 {
    libm::pow(x, y)
}

/// xⁿ by repeated squaring, in the order of compiler-rt's `__powidf2` (what `f64::powi` calls
/// on both targets today), written out so no target may choose another order.
#[inline]
pub fn powi(x: f64, n: i32) -> f64 {
    let mut remaining = n.unsigned_abs();
    let mut square = x;
    let mut product = 1.0;
    loop {
        if remaining & 1 == 1 {
            product *= square;
        }
        remaining >>= 1;
        if remaining == 0 {
            break;
        }
        square *= square;
    }
    if n < 0 {
        1.0 / product
    } else {
        product
    }
}

/// ∛x (negative for negative x).
#[inline]
pub fn cbrt(x: f64) -> f64 {
    libm::cbrt(x)
}

/// √(x² + y²) without overflow or underflow on the way.
#[inline]
pub fn hypot(x: f64, y: f64) -> f64 {
    libm::hypot(x, y)
}

/// |z| = hypot(re, im), as num-complex's `norm`.
#[inline]
pub fn cnorm(z: Complex64) -> f64 {
    hypot(z.re, z.im)
}

/// arg z = atan2(im, re) in (−π, π], as num-complex's `arg`.
#[inline]
pub fn carg(z: Complex64) -> f64 {
    atan2(z.im, z.re)
}

/// (|z|, arg z), as num-complex's `to_polar`.
#[inline]
pub fn to_polar(z: Complex64) -> (f64, f64) {
    (cnorm(z), carg(z))
}

/// r·e^{iθ} = r cos θ + i r sin θ, as num-complex's `from_polar`.
#[inline]
pub fn from_polar(r: f64, theta: f64) -> Complex64 {
    Complex64::new(r * cos(theta), r * sin(theta))
}

/// e^{iθ} = cos θ + i sin θ, as num-complex's `cis`.
#[inline]
pub fn cis(theta: f64) -> Complex64 {
    Complex64::new(cos(theta), sin(theta))
}

/// e^z = e^re (cos im + i sin im), with num-complex's treatment of infinite and NaN parts.
#[inline]
pub fn cexp(z: Complex64) -> Complex64 {
    let Complex64 { re, mut im } = z;
    if re.is_infinite() {
        if re < 0.0 {
            if !im.is_finite() {
                return Complex64::new(0.0, 0.0);
            }
        } else if im == 0.0 || !im.is_finite() {
            if im.is_infinite() {
                im = f64::NAN;
            }
            return Complex64::new(re, im);
        }
    } else if re.is_nan() && im == 0.0 {
        return z;
    }
    from_polar(exp(re), im)
}

/// The principal logarithm ln z = ln|z| + i arg z, as num-complex's `ln`.
#[inline]
pub fn cln(z: Complex64) -> Complex64 {
    let (r, theta) = to_polar(z);
    Complex64::new(ln(r), theta)
}

/// The principal square root (real part ≥ 0), as num-complex's `sqrt`: exact on the axes,
/// √|z| e^{i arg z / 2} elsewhere.
#[inline]
pub fn csqrt(z: Complex64) -> Complex64 {
    if z.im == 0.0 {
        if z.re.is_sign_positive() {
            Complex64::new(z.re.sqrt(), z.im)
        } else {
            let im = (-z.re).sqrt();
            if z.im.is_sign_positive() {
                Complex64::new(0.0, im)
            } else {
                Complex64::new(0.0, -im)
            }
        }
    } else if z.re == 0.0 {
        let x = (z.im.abs() / 2.0).sqrt();
        if z.im.is_sign_positive() {
            Complex64::new(x, x)
        } else {
            Complex64::new(x, -x)
        }
    } else {
        let (r, theta) = to_polar(z);
        from_polar(r.sqrt(), theta / 2.0)
    }
}

/// z^y = |z|^y e^{i y arg z} (1 at y = 0), as num-complex's `powf`.
#[inline]
pub fn cpowf(z: Complex64, y: f64) -> Complex64 {
    if y == 0.0 {
        return Complex64::new(1.0, 0.0);
    }
    let (r, theta) = to_polar(z);
    from_polar(powf(r, y), theta * y)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Physics and textbook identities, to the last bit where the function is exact there
    /// (IEEE 754 and C99 Annex F special values), else to 1 ulp-ish relative.
    #[test]
    fn special_values_and_identities() {
        // C99 Annex F: exact special values.
        assert_eq!(sin(0.0), 0.0);
        assert_eq!(cos(0.0), 1.0);
        assert_eq!(exp(0.0), 1.0);
        assert_eq!(ln(1.0), 0.0);
        assert_eq!(log10(1000.0), 3.0);
        assert_eq!(log2(8.0), 3.0);
        assert_eq!(powf(2.0, 10.0), 1024.0);
        assert_eq!(hypot(3.0, 4.0), 5.0);
        assert_eq!(atan2(0.0, -1.0), std::f64::consts::PI);
        assert_eq!(acosh(1.0), 0.0);
        assert_eq!(cbrt(-27.0), -3.0);
        assert!(ln(-1.0).is_nan());
        // Repeated squaring is exact for small integer powers of small integers.
        assert_eq!(powi(3.0, 5), 243.0);
        assert_eq!(powi(2.0, -3), 0.125);
        assert_eq!(powi(7.0, 0), 1.0);
        assert_eq!(powi(-2.0, 3), -8.0);
        // Identities: sinh and cosh from exp, exp_m1 and ln_1p near 0 (Taylor series).
        let x = 0.7_f64;
        assert!((sinh(x) - (exp(x) - exp(-x)) / 2.0).abs() < 1e-15);
        assert!((cosh(x) - (exp(x) + exp(-x)) / 2.0).abs() < 1e-15);
        assert!((exp_m1(1e-10) - (1e-10 + 0.5e-20)).abs() < 1e-30);
        assert!((ln_1p(1e-10) - (1e-10 - 0.5e-20)).abs() < 1e-30);
        let (s, c) = sin_cos(x);
        assert_eq!((s, c), (sin(x), cos(x)));
    }

    /// Complex identities: √(−4) = 2i and √(2i) = 1 + i exactly (num-complex's axis cases),
    /// e^{iπ} = −1, ln(e^z) = z and (z^½)² = z to 1e-15.
    #[test]
    fn complex_functions_follow_their_formulas() {
        assert_eq!(csqrt(Complex64::new(-4.0, 0.0)), Complex64::new(0.0, 2.0));
        assert_eq!(csqrt(Complex64::new(0.0, 2.0)), Complex64::new(1.0, 1.0));
        let minus_one = cexp(Complex64::new(0.0, std::f64::consts::PI));
        assert!((minus_one - Complex64::new(-1.0, 0.0)).norm_sqr() < 1e-30);
        let z = Complex64::new(0.3, -1.2);
        assert!((cln(cexp(z)) - z).norm_sqr() < 1e-30);
        let root = csqrt(z);
        assert!((root * root - z).norm_sqr() < 1e-30);
        assert!((cpowf(z, 0.5) - root).norm_sqr() < 1e-30);
        assert_eq!(cnorm(Complex64::new(3.0, -4.0)), 5.0);
        assert_eq!(to_polar(z), (cnorm(z), carg(z)));
        assert_eq!(cis(0.0), Complex64::new(1.0, 0.0));
    }
}
