//! The IEC 60063 preferred-number series a part's value is bought in: E12, E24 and E96, the
//! values of one decade as the standard lists them (E12 and E24 are not the rounding of
//! 10^(n/12) and 10^(n/24): 2.7, 3.3, 4.7 and 8.2 among others differ), and the rule that
//! picks a series from a part's tolerance.

/// E12, one decade (IEC 60063; ±10 % parts).
pub const E12: [f64; 12] = [1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2];

/// E24, one decade (IEC 60063; ±5 % parts).
pub const E24: [f64; 24] = [
    1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6,
    6.2, 6.8, 7.5, 8.2, 9.1,
];

/// E96, one decade (IEC 60063; ±1 % parts).
pub const E96: [f64; 96] = [
    1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24, 1.27, 1.30, 1.33, 1.37, 1.40, 1.43,
    1.47, 1.50, 1.54, 1.58, 1.62, 1.65, 1.69, 1.74, 1.78, 1.82, 1.87, 1.91, 1.96, 2.00, 2.05, 2.10,
    2.15, 2.21, 2.26, 2.32, 2.37, 2.43, 2.49, 2.55, 2.61, 2.67, 2.74, 2.80, 2.87, 2.94, 3.01, 3.09,
    3.16, 3.24, 3.32, 3.40, 3.48, 3.57, 3.65, 3.74, 3.83, 3.92, 4.02, 4.12, 4.22, 4.32, 4.42, 4.53,
    4.64, 4.75, 4.87, 4.99, 5.11, 5.23, 5.36, 5.49, 5.62, 5.76, 5.90, 6.04, 6.19, 6.34, 6.49, 6.65,
    6.81, 6.98, 7.15, 7.32, 7.50, 7.68, 7.87, 8.06, 8.25, 8.45, 8.66, 8.87, 9.09, 9.31, 9.53, 9.76,
];

/// A series by name.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Series {
    /// 12 a decade.
    E12,
    /// 24 a decade.
    E24,
    /// 96 a decade.
    E96,
}

impl Series {
    /// The series a part of relative tolerance `t` is bought in (common practice): E12 at
    /// ±10 % or looser, E24 at ±2 % up to ±10 %, E96 tighter than ±2 %; E24 when the part
    /// states no tolerance.
    pub fn for_tolerance(t: Option<f64>) -> Series {
        match t {
            Some(t) if t >= 0.1 - 1e-12 => Series::E12,
            Some(t) if t < 0.02 - 1e-12 => Series::E96,
            _ => Series::E24,
        }
    }

    /// Its name: `E12`, `E24`, `E96`.
    pub fn name(self) -> &'static str {
        match self {
            Series::E12 => "E12",
            Series::E24 => "E24",
            Series::E96 => "E96",
        }
    }

    /// One decade's values, 1 ≤ v < 10.
    pub fn decade(self) -> &'static [f64] {
        match self {
            Series::E12 => &E12,
            Series::E24 => &E24,
            Series::E96 => &E96,
        }
    }

    /// The series' values from `lo` to `hi` (both positive), ascending.
    pub fn values_between(self, lo: f64, hi: f64) -> Vec<f64> {
        let mut out = Vec::new();
        let first = lo.log10().floor() as i32 - 1;
        let last = hi.log10().ceil() as i32;
        for e in first..=last {
            for m in self.decade() {
                // Read from its decimal form, so 4.7 × 10³ is 4700 and 1.2 × 10⁻¹⁰ the double
                // nearest 120 pF, as the design file would give them.
                let v: f64 = format!("{m}e{e}").parse().unwrap_or(f64::NAN);
                if v >= lo * (1.0 - 1e-12) && v <= hi * (1.0 + 1e-12) {
                    out.push(v);
                }
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_series_are_the_published_lists() {
        // IEC 60063 (from memory): E12 and E24 as every parts catalogue prints them, 12 and
        // 24 a decade; E96 96 a decade, 1.00 … 9.76.
        assert_eq!(E12.len(), 12);
        assert_eq!(E24.len(), 24);
        assert_eq!(E96.len(), 96);
        for v in E12 {
            assert!(E24.contains(&v), "E12 is a subset of E24: {v}");
        }
        // The values that are not the rounding of 10^(n/24) (2.6, 2.9, 3.2, 3.5, 3.8, 4.2,
        // 4.6, 8.3 would be): the standard keeps the older set.
        for (n, published) in
            [(10, 2.7), (11, 3.0), (12, 3.3), (13, 3.6), (14, 3.9), (15, 4.3), (16, 4.7), (22, 8.2)]
        {
            let rounded = (10f64.powf(n as f64 / 24.0) * 10.0).round() / 10.0;
            assert_ne!(rounded, published);
            assert_eq!(E24[n], published);
        }
        assert_eq!((E96[0], E96[47], E96[95]), (1.00, 3.09, 9.76));
    }

    #[test]
    fn a_tolerance_picks_its_series_and_values_span_decades() {
        assert_eq!(Series::for_tolerance(Some(0.1)), Series::E12);
        assert_eq!(Series::for_tolerance(Some(0.05)), Series::E24);
        assert_eq!(Series::for_tolerance(Some(0.01)), Series::E96);
        assert_eq!(Series::for_tolerance(None), Series::E24);
        assert_eq!(
            Series::E12.values_between(1e3, 1e4),
            [
                1000.0, 1200.0, 1500.0, 1800.0, 2200.0, 2700.0, 3300.0, 3900.0, 4700.0, 5600.0,
                6800.0, 8200.0, 10000.0
            ]
        );
        let caps = Series::E12.values_between(90e-12, 130e-12);
        assert_eq!(caps.len(), 2, "{caps:?}");
        assert!((caps[0] - 100e-12).abs() < 1e-24 && (caps[1] - 120e-12).abs() < 1e-24);
    }
}
