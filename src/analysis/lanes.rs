//! Eight f64 lanes side by side, one run of a tolerance-study batch per lane: the operations the
//! batch work needs, implemented for AVX-512F, for AVX2 and in plain code, and the run-time choice
//! among them ([`Isa`]). Every operation is a single IEEE operation per lane (no fused
//! multiply-add, no reassociation), so all three give bit-identical results, and the plain code
//! is what wasm runs.
//!
//! A leaf: it imports nothing of the analyses, so the study ([`super::tolerance`]) and the
//! multilinear expansion ([`super::multilinear`]) both build on it without importing each other.
//!
//! Crate-private: the AVX types may only be used inside code compiled for their extension and
//! entered after detecting it (see the x86 module), which safe code outside could not promise.

/// Runs evaluated side by side in the lanes of the batch work (eight f64 are one AVX-512
/// register or two AVX2 registers; wasm runs the lanes as plain code).
pub const RUN_LANES: usize = 8;
/// One f64 per run of a batch.
pub type RunLanes = [f64; RUN_LANES];

/// Instruction-set extension the batch work is compiled for (chosen at run time; every path gives
/// bit-identical results).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Isa {
    /// Plain code (wasm, other processors).
    Portable,
    /// x86-64 with AVX2.
    #[cfg(target_arch = "x86_64")]
    Avx2,
    /// x86-64 with AVX-512F.
    #[cfg(target_arch = "x86_64")]
    Avx512,
}

impl Isa {
    /// The fastest form this processor supports.
    pub(crate) fn detect() -> Isa {
        #[cfg(target_arch = "x86_64")]
        {
            if std::arch::is_x86_feature_detected!("avx512f") {
                return Isa::Avx512;
            }
            if std::arch::is_x86_feature_detected!("avx2") {
                return Isa::Avx2;
            }
        }
        Isa::Portable
    }
}

/// Eight f64 lanes.
pub trait Lane8: Copy {
    /// A per-lane truth value.
    type Mask: Copy;
    /// Every lane `v`.
    fn splat(v: f64) -> Self;
    /// Lanes from memory.
    fn load(a: &[f64; 8]) -> Self;
    /// Lanes to memory.
    fn store(self, a: &mut [f64; 8]);
    /// Lanes rounded to f32 (to nearest, ties to even) into `a[..8]`.
    fn store_f32(self, a: &mut [f32; 8]);
    /// `self + o` per lane.
    fn add(self, o: Self) -> Self;
    /// `self − o` per lane.
    fn sub(self, o: Self) -> Self;
    /// `self · o` per lane.
    fn mul(self, o: Self) -> Self;
    /// `self / o` per lane.
    fn div(self, o: Self) -> Self;
    /// `if self < o { self } else { o }` per lane (a NaN in `self` keeps `o`).
    fn min_keep(self, o: Self) -> Self;
    /// `if self > o { self } else { o }` per lane (a NaN in `self` keeps `o`).
    fn max_keep(self, o: Self) -> Self;
    /// `self < o` (false for NaN).
    fn lt(self, o: Self) -> Self::Mask;
    /// `self <= o` (false for NaN).
    fn le(self, o: Self) -> Self::Mask;
    /// `self >= o` (false for NaN).
    fn ge(self, o: Self) -> Self::Mask;
    /// `a && b`.
    fn and(a: Self::Mask, b: Self::Mask) -> Self::Mask;
    /// `if m { a } else { b }` per lane.
    fn select(m: Self::Mask, a: Self, b: Self) -> Self;
    /// Booleans as a mask.
    fn from_bools(b: [bool; 8]) -> Self::Mask;
}

/// Plain code (wasm, processors without AVX2).
#[derive(Clone, Copy, Debug)]
pub struct Plain([f64; 8]);

impl Plain {
    #[inline(always)]
    fn map2(self, o: Plain, f: impl Fn(f64, f64) -> f64) -> Plain {
        let mut r = [0.0; 8];
        for (l, v) in r.iter_mut().enumerate() {
            *v = f(self.0[l], o.0[l]);
        }
        Plain(r)
    }

    #[inline(always)]
    fn cmp(self, o: Plain, f: impl Fn(f64, f64) -> bool) -> [bool; 8] {
        let mut r = [false; 8];
        for (l, v) in r.iter_mut().enumerate() {
            *v = f(self.0[l], o.0[l]);
        }
        r
    }
}

impl Lane8 for Plain {
    type Mask = [bool; 8];
    #[inline(always)]
    fn splat(v: f64) -> Self {
        Plain([v; 8])
    }
    #[inline(always)]
    fn load(a: &[f64; 8]) -> Self {
        Plain(*a)
    }
    #[inline(always)]
    fn store(self, a: &mut [f64; 8]) {
        *a = self.0;
    }
    #[inline(always)]
    fn store_f32(self, a: &mut [f32; 8]) {
        for (d, &s) in a.iter_mut().zip(&self.0) {
            *d = s as f32;
        }
    }
    #[inline(always)]
    fn add(self, o: Self) -> Self {
        self.map2(o, |a, b| a + b)
    }
    #[inline(always)]
    fn sub(self, o: Self) -> Self {
        self.map2(o, |a, b| a - b)
    }
    #[inline(always)]
    fn mul(self, o: Self) -> Self {
        self.map2(o, |a, b| a * b)
    }
    #[inline(always)]
    fn div(self, o: Self) -> Self {
        self.map2(o, |a, b| a / b)
    }
    #[inline(always)]
    fn min_keep(self, o: Self) -> Self {
        self.map2(o, |a, b| if a < b { a } else { b })
    }
    #[inline(always)]
    fn max_keep(self, o: Self) -> Self {
        self.map2(o, |a, b| if a > b { a } else { b })
    }
    #[inline(always)]
    fn lt(self, o: Self) -> [bool; 8] {
        self.cmp(o, |a, b| a < b)
    }
    #[inline(always)]
    fn le(self, o: Self) -> [bool; 8] {
        self.cmp(o, |a, b| a <= b)
    }
    #[inline(always)]
    fn ge(self, o: Self) -> [bool; 8] {
        self.cmp(o, |a, b| a >= b)
    }
    #[inline(always)]
    fn and(a: [bool; 8], b: [bool; 8]) -> [bool; 8] {
        let mut r = a;
        for (x, &y) in r.iter_mut().zip(&b) {
            *x &= y;
        }
        r
    }
    #[inline(always)]
    fn select(m: [bool; 8], a: Self, b: Self) -> Self {
        let mut r = b.0;
        for (l, v) in r.iter_mut().enumerate() {
            if m[l] {
                *v = a.0[l];
            }
        }
        Plain(r)
    }
    #[inline(always)]
    fn from_bools(b: [bool; 8]) -> [bool; 8] {
        b
    }
}

#[cfg(target_arch = "x86_64")]
pub use x86::{Avx2, Avx512};

/// The x86-64 forms. SAFETY (for every `unsafe` block in this module): values of these types
/// exist only inside the batch work compiled for the matching extension
/// (`#[target_feature(enable = ...)]`), which is entered only after run-time detection of
/// that extension.
#[cfg(target_arch = "x86_64")]
mod x86 {
    use super::Lane8;
    use std::arch::x86_64::*;

    /// One AVX-512 register.
    #[derive(Clone, Copy, Debug)]
    pub struct Avx512(__m512d);

    impl Lane8 for Avx512 {
        type Mask = __mmask8;
        #[inline(always)]
        fn splat(v: f64) -> Self {
            unsafe { Avx512(_mm512_set1_pd(v)) }
        }
        #[inline(always)]
        fn load(a: &[f64; 8]) -> Self {
            unsafe { Avx512(_mm512_loadu_pd(a.as_ptr())) }
        }
        #[inline(always)]
        fn store(self, a: &mut [f64; 8]) {
            unsafe { _mm512_storeu_pd(a.as_mut_ptr(), self.0) }
        }
        #[inline(always)]
        fn store_f32(self, a: &mut [f32; 8]) {
            unsafe { _mm256_storeu_ps(a.as_mut_ptr(), _mm512_cvtpd_ps(self.0)) }
        }
        #[inline(always)]
        fn add(self, o: Self) -> Self {
            unsafe { Avx512(_mm512_add_pd(self.0, o.0)) }
        }
        #[inline(always)]
        fn sub(self, o: Self) -> Self {
            unsafe { Avx512(_mm512_sub_pd(self.0, o.0)) }
        }
        #[inline(always)]
        fn mul(self, o: Self) -> Self {
            unsafe { Avx512(_mm512_mul_pd(self.0, o.0)) }
        }
        #[inline(always)]
        fn div(self, o: Self) -> Self {
            unsafe { Avx512(_mm512_div_pd(self.0, o.0)) }
        }
        #[inline(always)]
        fn min_keep(self, o: Self) -> Self {
            // MINPD returns the first operand where it is the smaller, else the second.
            unsafe { Avx512(_mm512_min_pd(self.0, o.0)) }
        }
        #[inline(always)]
        fn max_keep(self, o: Self) -> Self {
            unsafe { Avx512(_mm512_max_pd(self.0, o.0)) }
        }
        #[inline(always)]
        fn lt(self, o: Self) -> __mmask8 {
            unsafe { _mm512_cmp_pd_mask::<_CMP_LT_OQ>(self.0, o.0) }
        }
        #[inline(always)]
        fn le(self, o: Self) -> __mmask8 {
            unsafe { _mm512_cmp_pd_mask::<_CMP_LE_OQ>(self.0, o.0) }
        }
        #[inline(always)]
        fn ge(self, o: Self) -> __mmask8 {
            unsafe { _mm512_cmp_pd_mask::<_CMP_GE_OQ>(self.0, o.0) }
        }
        #[inline(always)]
        fn and(a: __mmask8, b: __mmask8) -> __mmask8 {
            a & b
        }
        #[inline(always)]
        fn select(m: __mmask8, a: Self, b: Self) -> Self {
            unsafe { Avx512(_mm512_mask_blend_pd(m, b.0, a.0)) }
        }
        #[inline(always)]
        fn from_bools(b: [bool; 8]) -> __mmask8 {
            b.iter()
                .enumerate()
                .fold(0, |m, (l, &v)| m | (u8::from(v) << l))
        }
    }

    /// Two AVX2 registers.
    #[derive(Clone, Copy, Debug)]
    pub struct Avx2([__m256d; 2]);

    /// One AVX2 operation on both halves.
    macro_rules! halves {
        ($f:ident, $a:expr, $b:expr) => {
            unsafe { [$f($a[0], $b[0]), $f($a[1], $b[1])] }
        };
    }

    impl Lane8 for Avx2 {
        type Mask = [__m256d; 2];
        #[inline(always)]
        fn splat(v: f64) -> Self {
            unsafe { Avx2([_mm256_set1_pd(v); 2]) }
        }
        #[inline(always)]
        fn load(a: &[f64; 8]) -> Self {
            unsafe {
                Avx2([
                    _mm256_loadu_pd(a.as_ptr()),
                    _mm256_loadu_pd(a.as_ptr().add(4)),
                ])
            }
        }
        #[inline(always)]
        fn store(self, a: &mut [f64; 8]) {
            unsafe {
                _mm256_storeu_pd(a.as_mut_ptr(), self.0[0]);
                _mm256_storeu_pd(a.as_mut_ptr().add(4), self.0[1]);
            }
        }
        #[inline(always)]
        fn store_f32(self, a: &mut [f32; 8]) {
            unsafe {
                _mm_storeu_ps(a.as_mut_ptr(), _mm256_cvtpd_ps(self.0[0]));
                _mm_storeu_ps(a.as_mut_ptr().add(4), _mm256_cvtpd_ps(self.0[1]));
            }
        }
        #[inline(always)]
        fn add(self, o: Self) -> Self {
            Avx2(halves!(_mm256_add_pd, self.0, o.0))
        }
        #[inline(always)]
        fn sub(self, o: Self) -> Self {
            Avx2(halves!(_mm256_sub_pd, self.0, o.0))
        }
        #[inline(always)]
        fn mul(self, o: Self) -> Self {
            Avx2(halves!(_mm256_mul_pd, self.0, o.0))
        }
        #[inline(always)]
        fn div(self, o: Self) -> Self {
            Avx2(halves!(_mm256_div_pd, self.0, o.0))
        }
        #[inline(always)]
        fn min_keep(self, o: Self) -> Self {
            Avx2(halves!(_mm256_min_pd, self.0, o.0))
        }
        #[inline(always)]
        fn max_keep(self, o: Self) -> Self {
            Avx2(halves!(_mm256_max_pd, self.0, o.0))
        }
        #[inline(always)]
        fn lt(self, o: Self) -> [__m256d; 2] {
            unsafe {
                [
                    _mm256_cmp_pd::<_CMP_LT_OQ>(self.0[0], o.0[0]),
                    _mm256_cmp_pd::<_CMP_LT_OQ>(self.0[1], o.0[1]),
                ]
            }
        }
        #[inline(always)]
        fn le(self, o: Self) -> [__m256d; 2] {
            unsafe {
                [
                    _mm256_cmp_pd::<_CMP_LE_OQ>(self.0[0], o.0[0]),
                    _mm256_cmp_pd::<_CMP_LE_OQ>(self.0[1], o.0[1]),
                ]
            }
        }
        #[inline(always)]
        fn ge(self, o: Self) -> [__m256d; 2] {
            unsafe {
                [
                    _mm256_cmp_pd::<_CMP_GE_OQ>(self.0[0], o.0[0]),
                    _mm256_cmp_pd::<_CMP_GE_OQ>(self.0[1], o.0[1]),
                ]
            }
        }
        #[inline(always)]
        fn and(a: [__m256d; 2], b: [__m256d; 2]) -> [__m256d; 2] {
            halves!(_mm256_and_pd, a, b)
        }
        #[inline(always)]
        fn select(m: [__m256d; 2], a: Self, b: Self) -> Self {
            unsafe {
                Avx2([
                    _mm256_blendv_pd(b.0[0], a.0[0], m[0]),
                    _mm256_blendv_pd(b.0[1], a.0[1], m[1]),
                ])
            }
        }
        #[inline(always)]
        fn from_bools(b: [bool; 8]) -> [__m256d; 2] {
            let lane = |v: bool| if v { -1i64 } else { 0 };
            unsafe {
                [
                    _mm256_castsi256_pd(_mm256_set_epi64x(
                        lane(b[3]),
                        lane(b[2]),
                        lane(b[1]),
                        lane(b[0]),
                    )),
                    _mm256_castsi256_pd(_mm256_set_epi64x(
                        lane(b[7]),
                        lane(b[6]),
                        lane(b[5]),
                        lane(b[4]),
                    )),
                ]
            }
        }
    }
}
