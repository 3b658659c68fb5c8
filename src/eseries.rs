//! Standard values of IEC 60063 (E6 … E192) and rounding to them.
//!
//! The tables are the lists of IEC 60063 (preferred number series for resistors and capacitors),
//! one decade each, written as hundredths so that every value of every decade is built from
//! integers (`4.87 kΩ` is `487 × 10¹`, exact in binary floating point). E6, E12 and E24 are
//! two-digit series; E48, E96 and E192 are three-digit series. Their published values do not all
//! equal the rounded geometric sequence 10^(i/N): E24 has 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7 and 8.2
//! where the formula gives 2.6, 2.9, 3.2, 3.5, 3.8, 4.2, 4.6, 8.3, and E192 has 9.20 where the
//! formula gives 9.19 — so the tables are written out, not computed.
//!
//! Rounding is geometric: a value goes to the standard value with the least |ln(value/standard)|,
//! over any decade. The boundary between two neighbours is their geometric mean: in E24, 9.54
//! goes to 10 (above √(9.1·10) = 9.539) although it is arithmetically nearer 9.1.

use crate::fmath;
use serde::Serialize;

/// A preferred-number series, or exact values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Series {
    /// 6 values per decade (±20 % parts), link value `e6`.
    E6,
    /// 12 values per decade (±10 %), `e12`.
    E12,
    /// 24 values per decade (±5 %), `e24`.
    E24,
    /// 48 values per decade (±2 %), `e48`.
    E48,
    /// 96 values per decade (±1 %), `e96`.
    E96,
    /// 192 values per decade (±0.5 % and finer), `e192`.
    E192,
    /// No rounding: the synthesized value is used as is.
    Exact,
}

/// Resistor values the tool builds with, Ω: 1 Ω to 10 MΩ (inclusive).
pub const RESISTOR_RANGE_OHM: (f64, f64) = (1.0, 10.0e6);

/// Capacitor values the tool builds with, F: 1 pF to 100 µF (inclusive).
pub const CAPACITOR_RANGE_F: (f64, f64) = (1.0e-12, 100.0e-6);

/// IEC 60063 E6, in hundredths of the decade's first value.
const E6: [u16; 6] = [100, 150, 220, 330, 470, 680];

/// IEC 60063 E12.
const E12: [u16; 12] = [100, 120, 150, 180, 220, 270, 330, 390, 470, 560, 680, 820];

/// IEC 60063 E24.
const E24: [u16; 24] = [
    100, 110, 120, 130, 150, 160, 180, 200, 220, 240, 270, 300, 330, 360, 390, 430, 470, 510, 560,
    620, 680, 750, 820, 910,
];

/// IEC 60063 E48.
const E48: [u16; 48] = [
    100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169, 178, 187, 196, 205, 215, 226, 237,
    249, 261, 274, 287, 301, 316, 332, 348, 365, 383, 402, 422, 442, 464, 487, 511, 536, 562, 590,
    619, 649, 681, 715, 750, 787, 825, 866, 909, 953,
];

/// IEC 60063 E96.
const E96: [u16; 96] = [
    100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143, 147, 150, 154,
    158, 162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210, 215, 221, 226, 232, 237, 243,
    249, 255, 261, 267, 274, 280, 287, 294, 301, 309, 316, 324, 332, 340, 348, 357, 365, 374, 383,
    392, 402, 412, 422, 432, 442, 453, 464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604,
    619, 634, 649, 665, 681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953,
    976,
];

/// IEC 60063 E192.
const E192: [u16; 192] = [
    100, 101, 102, 104, 105, 106, 107, 109, 110, 111, 113, 114, 115, 117, 118, 120, 121, 123, 124,
    126, 127, 129, 130, 132, 133, 135, 137, 138, 140, 142, 143, 145, 147, 149, 150, 152, 154, 156,
    158, 160, 162, 164, 165, 167, 169, 172, 174, 176, 178, 180, 182, 184, 187, 189, 191, 193, 196,
    198, 200, 203, 205, 208, 210, 213, 215, 218, 221, 223, 226, 229, 232, 234, 237, 240, 243, 246,
    249, 252, 255, 258, 261, 264, 267, 271, 274, 277, 280, 284, 287, 291, 294, 298, 301, 305, 309,
    312, 316, 320, 324, 328, 332, 336, 340, 344, 348, 352, 357, 361, 365, 370, 374, 379, 383, 388,
    392, 397, 402, 407, 412, 417, 422, 427, 432, 437, 442, 448, 453, 459, 464, 470, 475, 481, 487,
    493, 499, 505, 511, 517, 523, 530, 536, 542, 549, 556, 562, 569, 576, 583, 590, 597, 604, 612,
    619, 626, 634, 642, 649, 657, 665, 673, 681, 690, 698, 706, 715, 723, 732, 741, 750, 759, 768,
    777, 787, 796, 806, 816, 825, 835, 845, 856, 866, 876, 887, 898, 909, 920, 931, 942, 953, 965,
    976, 988,
];

/// What a value is, for its range of buildable values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum PartClass {
    /// A resistor: [`RESISTOR_RANGE_OHM`].
    Resistor,
    /// A capacitor: [`CAPACITOR_RANGE_F`].
    Capacitor,
}

impl PartClass {
    /// The inclusive range of values the tool builds with, SI base units.
    pub fn range(self) -> (f64, f64) {
        match self {
            PartClass::Resistor => RESISTOR_RANGE_OHM,
            PartClass::Capacitor => CAPACITOR_RANGE_F,
        }
    }

    /// True when `value` lies inside [`PartClass::range`] (with a relative slack of 1e-9 so that
    /// the end values themselves, computed in floating point, are inside).
    pub fn in_range(self, value: f64) -> bool {
        let (lo, hi) = self.range();
        value.is_finite() && value >= lo * (1.0 - 1e-9) && value <= hi * (1.0 + 1e-9)
    }
}

impl Series {
    /// Every series, coarsest first (without `Exact`).
    pub const ALL: [Series; 6] = [
        Series::E6,
        Series::E12,
        Series::E24,
        Series::E48,
        Series::E96,
        Series::E192,
    ];

    /// The link value: `e6` … `e192`, `exact`.
    pub fn key(self) -> &'static str {
        match self {
            Series::E6 => "e6",
            Series::E12 => "e12",
            Series::E24 => "e24",
            Series::E48 => "e48",
            Series::E96 => "e96",
            Series::E192 => "e192",
            Series::Exact => "exact",
        }
    }

    /// The series for a link value (`e6` … `e192`, `exact`, any letter case); `None` otherwise.
    pub fn from_key(key: &str) -> Option<Series> {
        let lower = key.trim().to_ascii_lowercase();
        Series::ALL
            .iter()
            .copied()
            .chain(std::iter::once(Series::Exact))
            .find(|s| s.key() == lower)
    }

    /// The one-decade table of IEC 60063 in hundredths (`[100, 150, 220, …]` for E6); empty for
    /// `Exact`.
    pub fn hundredths(self) -> &'static [u16] {
        match self {
            Series::E6 => &E6,
            Series::E12 => &E12,
            Series::E24 => &E24,
            Series::E48 => &E48,
            Series::E96 => &E96,
            Series::E192 => &E192,
            Series::Exact => &[],
        }
    }

    /// The one-decade table as values 1 ≤ m < 10 (`[1.0, 1.5, 2.2, …]` for E6); empty for `Exact`.
    pub fn mantissas(self) -> Vec<f64> {
        self.hundredths()
            .iter()
            .map(|&h| h as f64 / 100.0)
            .collect()
    }

    /// Values per decade (6 … 192); 0 for `Exact`.
    pub fn per_decade(self) -> usize {
        self.hundredths().len()
    }

    /// The standard value with index `idx` counted over all decades: index `d·N + j` is the j-th
    /// table entry times 10^d (so index 0 is 1.0, index N is 10.0). `None` for `Exact`.
    pub fn value_at(self, idx: i64) -> Option<f64> {
        let table = self.hundredths();
        let n = table.len() as i64;
        if n == 0 {
            return None;
        }
        let decade = idx.div_euclid(n);
        let j = idx.rem_euclid(n) as usize;
        let hundredths = *table.get(j)? as f64;
        // Built from integers: h · 10^(d−2), multiplying or dividing by an exact power of ten so
        // the result is the correctly rounded decimal value.
        let exponent = decade - 2;
        if !(-40..=40).contains(&exponent) {
            return None;
        }
        let scale = fmath::powi(10f64, exponent.unsigned_abs() as i32);
        Some(if exponent >= 0 {
            hundredths * scale
        } else {
            hundredths / scale
        })
    }

    /// The index (see [`Series::value_at`]) of the standard value geometrically nearest to
    /// `value`. `None` for `Exact` and for values that are not finite and positive.
    pub fn nearest_index(self, value: f64) -> Option<i64> {
        let n = self.per_decade() as i64;
        if n == 0 || !(value.is_finite() && value > 0.0) {
            return None;
        }
        let decade = fmath::log10(value).floor() as i64;
        // Look one entry either side of the decade, so that values within rounding of a decade
        // boundary (log10 slightly off) still find their true nearest.
        let first = decade * n - 1;
        let last = decade * n + n + 1;
        let (Some(_), Some(_)) = (self.value_at(first), self.value_at(last)) else {
            // At the ends of the representable decades some entries do not exist: look at all.
            return self.nearest_among(value, first..=last);
        };
        // Every entry between two that exist exists, and the values rise with the index: the
        // nearest is one of the two around `value`, found by bisection instead of a logarithm
        // per entry.
        let (mut lo, mut hi) = (first, last + 1);
        while lo < hi {
            let mid = lo + (hi - lo) / 2;
            if self.value_at(mid).is_some_and(|v| v < value) {
                lo = mid + 1;
            } else {
                hi = mid;
            }
        }
        self.nearest_among(value, (lo - 1).max(first)..=lo.min(last))
    }

    /// Of the indices `range` (ascending), the one whose value is nearest to `value` by
    /// |ln(value/standard)|; the lower index wins a tie.
    fn nearest_among(self, value: f64, range: std::ops::RangeInclusive<i64>) -> Option<i64> {
        let mut best: Option<(i64, f64)> = None;
        for idx in range {
            let Some(candidate) = self.value_at(idx) else {
                continue;
            };
            let distance = fmath::ln(value / candidate).abs();
            if best.map_or(true, |(_, d)| distance < d) {
                best = Some((idx, distance));
            }
        }
        best.map(|(idx, _)| idx)
    }

    /// The standard value geometrically nearest to `value` (least |ln(value/standard)|).
    ///
    /// `Exact`, and values that are not finite and positive, come back unchanged. The range of
    /// buildable values is not applied here (see [`PartClass::in_range`]).
    ///
    /// Idempotent: `s.nearest(s.nearest(x)) == s.nearest(x)`.
    pub fn nearest(self, value: f64) -> f64 {
        self.nearest_index(value)
            .and_then(|idx| self.value_at(idx))
            .unwrap_or(value)
    }

    /// True when `value` is a member of the series (within 1e-9 relative); always true for
    /// `Exact`.
    pub fn contains(self, value: f64) -> bool {
        match self {
            Series::Exact => true,
            _ => {
                let nearest = self.nearest(value);
                (nearest / value - 1.0).abs() < 1e-9
            }
        }
    }

    /// The standard values near `value` that a combination search tries, ascending and without
    /// repeats, kept inside the range of `class`:
    /// - `n_candidates == 1`: the nearest value;
    /// - `n_candidates == 2`: the nearest value at or below and the nearest at or above;
    /// - `n_candidates >= 3`: the nearest value and `n_candidates − 1` neighbours split either
    ///   side (one below and one above for 3).
    ///
    /// `Exact` gives `[value]`. A value that is not finite and positive gives an empty list.
    pub fn candidates(self, value: f64, n_candidates: usize, class: PartClass) -> Vec<f64> {
        if !(value.is_finite() && value > 0.0) {
            return Vec::new();
        }
        let Some(nearest) = self.nearest_index(value) else {
            return vec![value];
        };
        let mut indices: Vec<i64> = Vec::new();
        match n_candidates {
            0 => {}
            1 => indices.push(nearest),
            2 => {
                let at = self.value_at(nearest).unwrap_or(value);
                if (at / value - 1.0).abs() < 1e-12 {
                    indices.push(nearest);
                } else if at < value {
                    indices.extend([nearest, nearest + 1]);
                } else {
                    indices.extend([nearest - 1, nearest]);
                }
            }
            n => {
                let below = ((n - 1) / 2) as i64;
                let above = (n - 1) as i64 - below;
                indices.extend(nearest - below..=nearest + above);
            }
        }
        let mut values: Vec<f64> = indices
            .into_iter()
            .filter_map(|idx| self.value_at(idx))
            .filter(|&v| class.in_range(v))
            .collect();
        values.dedup();
        values
    }

    /// Every standard value between `lo` and `hi` (inclusive), ascending; empty for `Exact`.
    pub fn values_between(self, lo: f64, hi: f64) -> Vec<f64> {
        let (Some(first), Some(last)) = (self.nearest_index(lo), self.nearest_index(hi)) else {
            return Vec::new();
        };
        (first - 1..=last + 1)
            .filter_map(|idx| self.value_at(idx))
            .filter(|&v| v >= lo * (1.0 - 1e-12) && v <= hi * (1.0 + 1e-12))
            .collect()
    }

    /// The smallest standard value at or above `value` (within 1e-12 relative); `value` itself
    /// for `Exact`.
    pub fn ceil(self, value: f64) -> f64 {
        match self.nearest_index(value) {
            None => value,
            Some(idx) => {
                let at = self.value_at(idx).unwrap_or(value);
                if at >= value * (1.0 - 1e-12) {
                    at
                } else {
                    self.value_at(idx + 1).unwrap_or(value)
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tables_are_ascending_inside_one_decade() {
        // IEC 60063: every series is strictly increasing from 1.00 to below 10.
        for series in Series::ALL {
            let table = series.hundredths();
            assert_eq!(table[0], 100, "{series:?} starts at 1.0");
            assert!(table.windows(2).all(|w| w[0] < w[1]), "{series:?} ascends");
            assert!(*table.last().unwrap() < 1000, "{series:?} stays below 10");
        }
    }

    #[test]
    fn nearest_is_idempotent_over_decades() {
        for series in Series::ALL {
            for k in 0..400 {
                let x = fmath::powf(10f64, -12.0 + k as f64 * 0.047);
                let once = series.nearest(x);
                assert_eq!(series.nearest(once), once, "{series:?} at {x}");
                assert!(series.contains(once));
            }
        }
    }

    #[test]
    fn bisection_finds_the_entry_a_full_scan_finds() {
        // The nearest entry by bisection must be the one the scan of the decade (and one entry
        // either side) gives: at standard values, at geometric midpoints of neighbours (the
        // ties, where the lower entry wins), just off them, and across the decades.
        for series in Series::ALL {
            let n = series.per_decade() as i64;
            let mut values = Vec::new();
            for idx in -20 * n..20 * n {
                let (a, b) = (
                    series.value_at(idx).unwrap(),
                    series.value_at(idx + 1).unwrap(),
                );
                let mid = (a * b).sqrt();
                values.extend([
                    a,
                    mid,
                    mid * (1.0 + 1e-15),
                    mid * (1.0 - 1e-15),
                    a * 1.000001,
                ]);
            }
            for x in values {
                let decade = fmath::log10(x).floor() as i64;
                let scan = series.nearest_among(x, decade * n - 1..=decade * n + n + 1);
                assert_eq!(series.nearest_index(x), scan, "{series:?} at {x:e}");
            }
        }
        // In the lowest representable decade the entry below it does not exist: the scan path.
        let low = Series::E12.nearest(1.49e-38);
        assert!((low / 1.5e-38 - 1.0).abs() < 1e-12, "{low:e}");
    }

    #[test]
    fn candidates_bracket_the_value() {
        let c = Series::E24.candidates(4.5e3, 2, PartClass::Resistor);
        assert_eq!(c, vec![4300.0, 4700.0]);
        let c = Series::E24.candidates(4.7e3, 3, PartClass::Resistor);
        assert_eq!(c, vec![4300.0, 4700.0, 5100.0]);
        assert_eq!(Series::E12.ceil(1.3e-9), 1.5e-9);
    }
}
