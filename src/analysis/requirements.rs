//! Requirements at nominal values: each limit with the computed value, pass or fail, and
//! its margin.
//!
//! In: the design's [`Requirements`] and the [`Analysis`]. Out: one [`RequirementCheck`]
//! per limit. A requirement whose quantity could not be computed (no upper cut-off found)
//! fails, and says so.

use serde::Serialize;

use crate::analysis::Analysis;
use crate::design::{Limits, Requirements};

/// One checked requirement.
#[derive(Clone, Debug, Serialize)]
pub struct RequirementCheck {
    /// `midband_gain`, `upper_cutoff`, `lower_cutoff`, `input_resistance`, `output_resistance`.
    pub name: &'static str,
    /// SI unit of the value ("" for a gain in V/V).
    pub unit: &'static str,
    /// Lowest allowed.
    pub min: Option<f64>,
    /// Highest allowed.
    pub max: Option<f64>,
    /// The computed value (|gain| for the gain).
    pub value: Option<f64>,
    /// True when within the limits.
    pub pass: bool,
    /// Relative distance to the nearer limit, positive inside: (value − min)/min or
    /// (max − value)/max.
    pub margin: Option<f64>,
    /// For a gain, the distance to the nearer limit in dB, positive inside.
    pub margin_db: Option<f64>,
    /// Which limit is nearer: `min` or `max`.
    pub nearest_limit: Option<&'static str>,
    /// The value at the tolerance corner that pushes it toward a limit, when a study ran:
    /// the low corner for a minimum, the high corner for a maximum; with both limits set, the
    /// corner that comes nearer to its limit (a failing one first).
    pub corner: Option<f64>,
    /// True when every corner that matters is within the limits.
    pub corner_pass: Option<bool>,
    /// The corner toward the minimum, when there is a minimum.
    pub low_corner: Option<f64>,
    /// The corner toward the maximum, when there is a maximum.
    pub high_corner: Option<f64>,
    /// Monte Carlo yield of this requirement.
    pub yield_fraction: Option<f64>,
}

/// Adds the worst-case corners and Monte Carlo yields of a tolerance study.
pub fn with_study(checks: &mut [RequirementCheck], study: &crate::analysis::tolerance::Study) {
    for c in checks.iter_mut() {
        let Some(w) = study.worst_case.iter().find(|w| w.figure == c.name) else { continue };
        let inside = |v: f64| c.min.is_none_or(|lo| v >= lo) && c.max.is_none_or(|hi| v <= hi);
        c.low_corner = c.min.and(w.low_corner);
        c.high_corner = c.max.and(w.high_corner);
        // The corner nearer its limit, relative to that limit (negative: outside).
        let to_min = c.low_corner.zip(c.min).map(|(v, lo)| (v, (v - lo) / lo));
        let to_max = c.high_corner.zip(c.max).map(|(v, hi)| (v, (hi - v) / hi));
        let nearest = [to_min, to_max].into_iter().flatten().min_by(|a, b| a.1.total_cmp(&b.1));
        c.corner = nearest.map(|(v, _)| v);
        let corners = [c.low_corner, c.high_corner];
        c.corner_pass = c.corner.map(|_| corners.iter().flatten().all(|v| inside(*v)));
        if let Some(mc) = &study.monte_carlo {
            c.yield_fraction = mc.yields.iter().find(|(n, _)| n == c.name).map(|(_, y)| *y);
        }
    }
}

/// Checks every requirement against the nominal analysis.
pub fn check(req: &Requirements, a: &Analysis) -> Vec<RequirementCheck> {
    let items: [(&'static str, &'static str, Option<Limits>, Option<f64>); 5] = [
        ("midband_gain", "", req.midband_gain, Some(a.midband.gain.abs())),
        ("upper_cutoff", "Hz", req.upper_cutoff, a.high.f3db_hz),
        ("lower_cutoff", "Hz", req.lower_cutoff, a.low.f3db_hz),
        ("input_resistance", "Ω", req.input_resistance, a.midband.input_resistance_ohm),
        ("output_resistance", "Ω", req.output_resistance, a.midband.output_resistance_ohm),
    ];
    items
        .into_iter()
        .filter_map(|(name, unit, limits, value)| {
            let l = limits?;
            // Relative distance to each limit, positive inside; a gain also in dB, where its
            // window is written.
            let to_min = l.min.zip(value).map(|(lo, v)| (v - lo) / lo);
            let to_max = l.max.zip(value).map(|(hi, v)| (hi - v) / hi);
            let in_db = name == "midband_gain";
            let db = |a: f64, b: f64| (a > 0.0 && b > 0.0).then(|| 20.0 * (a / b).log10());
            let db_to_min = l.min.zip(value).and_then(|(lo, v)| db(v, lo));
            let db_to_max = l.max.zip(value).and_then(|(hi, v)| db(hi, v));
            let (judge_min, judge_max) =
                if in_db { (db_to_min, db_to_max) } else { (to_min, to_max) };
            let nearest = match (judge_min, judge_max) {
                (Some(a), Some(b)) if b < a => Some(("max", b)),
                (Some(a), _) => Some(("min", a)),
                (None, Some(b)) => Some(("max", b)),
                (None, None) => None,
            };
            let margins: Vec<f64> = [to_min, to_max].into_iter().flatten().collect();
            let margin = margins.iter().copied().reduce(f64::min);
            Some(RequirementCheck {
                name,
                unit,
                min: l.min,
                max: l.max,
                value,
                pass: value.is_some() && margin.is_some_and(|m| m >= 0.0),
                margin,
                margin_db: if in_db { nearest.map(|(_, m)| m) } else { None },
                nearest_limit: nearest.map(|(side, _)| side),
                corner: None,
                corner_pass: None,
                low_corner: None,
                high_corner: None,
                yield_fraction: None,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::tolerance::{Study, WorstCase};

    fn study(low: f64, high: f64) -> Study {
        Study {
            step: 1e-4,
            figures: vec!["midband_gain".into()],
            levers: Vec::new(),
            worst_case: vec![WorstCase {
                figure: "midband_gain".into(),
                nominal: 11.0,
                linear_bound: 0.1,
                high_corner: Some(high),
                low_corner: Some(low),
            }],
            monte_carlo: None,
        }
    }

    fn gain_check(min: Option<f64>, max: Option<f64>) -> RequirementCheck {
        RequirementCheck {
            name: "midband_gain",
            unit: "",
            min,
            max,
            value: Some(11.0),
            pass: true,
            margin: None,
            margin_db: None,
            nearest_limit: None,
            corner: None,
            corner_pass: None,
            low_corner: None,
            high_corner: None,
            yield_fraction: None,
        }
    }

    #[test]
    fn a_window_shows_both_corners_and_names_the_one_nearer_its_limit() {
        // 8 … 14 V/V: the low corner 9 is 12.5 % above the minimum, the high corner 13.5 is
        // 3.6 % below the maximum, so the high corner is the worst.
        let mut c = [gain_check(Some(8.0), Some(14.0))];
        with_study(&mut c, &study(9.0, 13.5));
        assert_eq!((c[0].low_corner, c[0].high_corner), (Some(9.0), Some(13.5)));
        assert_eq!((c[0].corner, c[0].corner_pass), (Some(13.5), Some(true)));
        // A high corner past the maximum fails the corner check, whatever the low one does.
        with_study(&mut c, &study(9.0, 14.5));
        assert_eq!((c[0].corner, c[0].corner_pass), (Some(14.5), Some(false)));
    }

    #[test]
    fn a_one_sided_limit_has_only_the_corner_toward_it() {
        let mut c = [gain_check(Some(8.0), None)];
        with_study(&mut c, &study(7.5, 13.5));
        assert_eq!((c[0].low_corner, c[0].high_corner), (Some(7.5), None));
        assert_eq!((c[0].corner, c[0].corner_pass), (Some(7.5), Some(false)));
    }
}

#[cfg(test)]
mod margin_tests {
    use super::*;

    fn analysis_with(gain: f64, f_high: f64) -> Analysis {
        let text = std::fs::read_to_string("designs/rx-preamp-ce.yaml").unwrap();
        let design = crate::design::load(&text).design.unwrap();
        let mut a = crate::analysis::analyze(&design).unwrap();
        a.midband.gain = gain;
        a.high.f3db_hz = Some(f_high);
        a
    }

    #[test]
    fn a_gain_window_is_judged_in_db_and_names_the_nearer_limit() {
        // 18 … 23 dB around 20 dB (10 V/V): 2 dB to the minimum, 3 dB to the maximum.
        let l = Limits { min: Some(10f64.powf(18.0 / 20.0)), max: Some(10f64.powf(23.0 / 20.0)) };
        let req = Requirements { midband_gain: Some(l), ..Requirements::default() };
        let c = &check(&req, &analysis_with(-10.0, 1e6))[0];
        assert_eq!(c.nearest_limit, Some("min"));
        assert!((c.margin_db.unwrap() - 2.0).abs() < 1e-12, "{:?}", c.margin_db);
    }

    #[test]
    fn a_one_sided_limit_has_a_relative_margin_and_no_db() {
        let req = Requirements {
            upper_cutoff: Some(Limits { min: Some(8e5), max: None }),
            ..Requirements::default()
        };
        let c = &check(&req, &analysis_with(-10.0, 1e6))[0];
        assert_eq!((c.nearest_limit, c.margin_db), (Some("min"), None));
        assert!((c.margin.unwrap() - 0.25).abs() < 1e-12);
    }
}
