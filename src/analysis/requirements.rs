//! Requirements at nominal values: each limit with the computed value, pass or fail, and
//! its margin.
//!
//! In: the design's [`Requirements`] and the [`Analysis`]. Out: one [`RequirementCheck`]
//! per limit. A requirement whose quantity could not be computed (no upper cut-off found)
//! fails, and says so.

use serde::Serialize;

use crate::analysis::Analysis;
use crate::design::Requirements;

/// One checked requirement.
#[derive(Clone, Debug, Serialize)]
pub struct RequirementCheck {
    /// The requirement's key in the design file (`midband_gain`, `upper_cutoff`, …).
    pub name: &'static str,
    /// SI unit of the value ("" for a gain in V/V, "dB" for the flatness and the noise
    /// figure).
    pub unit: &'static str,
    /// Lowest allowed.
    pub min: Option<f64>,
    /// Highest allowed.
    pub max: Option<f64>,
    /// The computed value (|gain| for the gain).
    pub value: Option<f64>,
    /// True when within the limits.
    pub pass: bool,
    /// Relative distance to the nearer limit, positive inside: (value − min)/|min| or
    /// (max − value)/|max|.
    pub margin: Option<f64>,
    /// For a gain or a flatness, the distance to the nearer limit in dB, positive inside.
    pub margin_db: Option<f64>,
    /// Which limit is nearer: `min` or `max`.
    pub nearest_limit: Option<&'static str>,
    /// The value at the tolerance corner that pushes it toward a limit, when a study ran:
    /// the low corner for a minimum, the high corner for a maximum; with both limits set, the
    /// corner that comes nearer to either limit (a failing one first).
    pub corner: Option<f64>,
    /// True when every corner that matters is within the limits.
    pub corner_pass: Option<bool>,
    /// False when a corner, evaluated in full, lies on the wrong side of the nominal value
    /// (the low corner above it or the high corner below it): the figure is not monotonic
    /// over the tolerance box — a device leaves its region at a corner, say — so the corners
    /// do not bound it and the Monte Carlo yield is the guide.
    pub corner_monotonic: Option<bool>,
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
        // Every limited requirement has a yield, even one whose figure has no corners (a
        // figure that is zero at nominal, such as a step without overshoot).
        if let Some(mc) = &study.monte_carlo {
            c.yield_fraction = mc.yields.iter().find(|(n, _)| n == c.name).map(|(_, y)| *y);
        }
        let Some(w) = study.worst_case.iter().find(|w| w.figure == c.name) else { continue };
        let inside = |v: f64| c.min.is_none_or(|lo| v >= lo) && c.max.is_none_or(|hi| v <= hi);
        c.low_corner = c.min.and(w.low_corner);
        c.high_corner = c.max.and(w.high_corner);
        // Each corner's distance to the nearer limit, relative to that limit (negative:
        // outside). Both limits count for both corners: far from the bias point a corner
        // can land on the other side (a stage that saturates at the corner meant to raise
        // its gain loses gain instead).
        let distance = |v: f64| {
            let to_min = c.min.map(|lo| (v - lo) / lo.abs());
            let to_max = c.max.map(|hi| (hi - v) / hi.abs());
            [to_min, to_max].into_iter().flatten().reduce(f64::min)
        };
        let nearest = [c.low_corner, c.high_corner]
            .into_iter()
            .flatten()
            .filter_map(|v| distance(v).map(|d| (v, d)))
            .min_by(|a, b| a.1.total_cmp(&b.1));
        c.corner = nearest.map(|(v, _)| v);
        let corners = [c.low_corner, c.high_corner];
        c.corner_pass = c.corner.map(|_| corners.iter().flatten().all(|v| inside(*v)));
        c.corner_monotonic = c.corner.map(|_| {
            w.low_corner.is_none_or(|v| v <= w.nominal)
                && w.high_corner.is_none_or(|v| v >= w.nominal)
        });
    }
}

/// How a requirement's distance to its limits is judged.
#[derive(Clone, Copy, PartialEq)]
enum Scale {
    /// A ratio shown in dB (the gain): distances in dB.
    RatioDb,
    /// A figure already in dB (the flatness): distances in dB, by subtraction.
    Db,
    /// Everything else: relative distances.
    Relative,
}

/// The SI unit a requirement's value is in: `""` for the gain (V/V), `dB` for the flatness.
pub fn unit_of(name: &str) -> &'static str {
    match name {
        "midband_gain" => "",
        "gain_flatness" => "dB",
        "upper_cutoff" | "lower_cutoff" => "Hz",
        "noise_figure" => "dB",
        "input_noise_density" => "V/√Hz",
        "output_noise" => "V",
        "snr" => "dB",
        "supply_current" => "A",
        "output_swing" | "input_compression" => "V",
        "thd" | "overshoot" => "%",
        "input_return_loss" | "output_return_loss" => "dB",
        "stability" => "",
        "rise_time" | "group_delay_variation" => "s",
        _ => "Ω",
    }
}

/// The computed value and scale of the requirement called `name`.
fn quantity(name: &str, a: &Analysis) -> (Option<f64>, Scale) {
    let m = &a.midband;
    match name {
        "midband_gain" => {
            (Some(m.band.as_ref().map_or(m.gain.abs(), |b| b.centre_gain)), Scale::RatioDb)
        }
        "gain_flatness" => (m.band.as_ref().map(|b| b.flatness_db), Scale::Db),
        "upper_cutoff" => (a.high.f3db_hz, Scale::Relative),
        "lower_cutoff" => (a.low.f3db_hz, Scale::Relative),
        "input_resistance" => (m.input_resistance_ohm, Scale::Relative),
        "noise_figure" => (a.noise.as_ref().and_then(|n| n.noise_figure_db), Scale::Db),
        "input_noise_density" => {
            (a.noise.as_ref().and_then(|n| n.input_density_v_per_rthz), Scale::Relative)
        }
        "snr" => (a.noise.as_ref().and_then(|n| n.snr_db), Scale::Db),
        "output_swing" => (
            a.large_signal.as_ref().and_then(|l| l.output_swing.symmetric_peak_v()),
            Scale::Relative,
        ),
        "thd" => (
            a.large_signal.as_ref().and_then(|l| l.distortion.as_ref()).map(|d| d.thd_percent),
            Scale::Relative,
        ),
        "input_compression" => {
            (a.large_signal.as_ref().and_then(|l| l.compression_1db_input_v), Scale::Relative)
        }
        "supply_current" => (
            a.operating_point.as_ref().and_then(|op| {
                crate::analysis::largest_supply_current(op.supplies.iter().map(|s| s.current_a))
            }),
            Scale::Relative,
        ),
        "output_noise" => (
            a.noise.as_ref().and_then(|n| n.band.as_ref()).map(|b| b.output_rms_v),
            Scale::Relative,
        ),
        "input_return_loss" => (
            a.ports
                .as_ref()
                .and_then(|p| p.band.as_ref())
                .and_then(|b| b.input_return_loss_db)
                .map(|(v, _)| v),
            Scale::Db,
        ),
        "output_return_loss" => (
            a.ports
                .as_ref()
                .and_then(|p| p.band.as_ref())
                .and_then(|b| b.output_return_loss_db)
                .map(|(v, _)| v),
            Scale::Db,
        ),
        "stability" => (a.ports.as_ref().and_then(|p| p.mu_min()), Scale::Relative),
        "rise_time" => (a.step.as_ref().map(|s| s.rise_time_s), Scale::Relative),
        "overshoot" => (a.step.as_ref().map(|s| 100.0 * s.overshoot), Scale::Relative),
        "group_delay_variation" => {
            (a.group_delay.as_ref().map(|g| g.variation_s()), Scale::Relative)
        }
        _ => (m.output_resistance_ohm, Scale::Relative),
    }
}

/// Checks every requirement against the nominal analysis.
pub fn check(req: &Requirements, a: &Analysis) -> Vec<RequirementCheck> {
    req.items()
        .into_iter()
        .filter_map(|(name, limits)| {
            let l = limits?;
            let (value, scale) = quantity(name, a);
            let unit = unit_of(name);
            // Relative distance to each limit, positive inside (for a dB figure, relative to
            // the limit's dB value); a gain and a flatness also in dB, where they are written.
            let relative = |lo: f64, v: f64| Some((v - lo) / lo.abs()).filter(|m| m.is_finite());
            let to_min = l.min.zip(value).and_then(|(lo, v)| relative(lo, v));
            let to_max = l.max.zip(value).and_then(|(hi, v)| relative(hi, v).map(|m| -m));
            let db = |a: f64, b: f64| match scale {
                Scale::RatioDb => (a > 0.0 && b > 0.0).then(|| 20.0 * (a / b).log10()),
                Scale::Db => Some(a - b),
                Scale::Relative => None,
            };
            let db_to_min = l.min.zip(value).and_then(|(lo, v)| db(v, lo));
            let db_to_max = l.max.zip(value).and_then(|(hi, v)| db(hi, v));
            let in_db = scale != Scale::Relative;
            let (judge_min, judge_max) =
                if in_db { (db_to_min, db_to_max) } else { (to_min, to_max) };
            let nearest = match (judge_min, judge_max) {
                (Some(a), Some(b)) if b < a => Some(("max", b)),
                (Some(a), _) => Some(("min", a)),
                (None, Some(b)) => Some(("max", b)),
                (None, None) => None,
            };
            let margins: Vec<f64> = [judge_min, judge_max].into_iter().flatten().collect();
            let inside = margins.iter().copied().reduce(f64::min);
            Some(RequirementCheck {
                name,
                unit,
                min: l.min,
                max: l.max,
                value,
                pass: value.is_some() && inside.is_some_and(|m| m >= 0.0),
                margin: [to_min, to_max].into_iter().flatten().reduce(f64::min),
                margin_db: if in_db { nearest.map(|(_, m)| m) } else { None },
                nearest_limit: nearest.map(|(side, _)| side),
                corner: None,
                corner_pass: None,
                corner_monotonic: None,
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
            corner_monotonic: None,
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
    fn a_corner_that_lands_past_the_other_limit_fails_and_is_the_one_shown() {
        // 8 … 14 V/V: the corner meant to raise the gain gives 6 (a stage that saturates
        // there), below the minimum: it is the worst corner and it fails.
        let mut c = [gain_check(Some(8.0), Some(14.0))];
        with_study(&mut c, &study(9.0, 6.0));
        assert_eq!((c[0].corner, c[0].corner_pass), (Some(6.0), Some(false)));
        // The high corner below the nominal 11: the corners do not bound the figure.
        assert_eq!(c[0].corner_monotonic, Some(false));
        with_study(&mut c, &study(9.0, 13.5));
        assert_eq!(c[0].corner_monotonic, Some(true));
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
    use crate::design::Limits;

    fn analysis_with(gain: f64, f_high: f64) -> Analysis {
        let text = std::fs::read_to_string("designs/rx-preamp-ce.yaml").unwrap();
        let design = crate::design::load(&text).design.unwrap();
        let mut a = crate::analysis::analyze(&design).unwrap();
        a.midband.gain = gain;
        a.midband.band = None; // judged on the idealised gain set here
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

    #[test]
    fn a_flatness_is_judged_in_db_by_subtraction() {
        // ≤ 1 dB with 0.6 dB across the band: 0.4 dB to the maximum; the gain is judged on
        // the exact centre gain (9 V/V), not the idealised 10 V/V.
        let mut a = analysis_with(-10.0, 1e6);
        a.midband.band = Some(crate::analysis::BandReport {
            from_hz: 1e5,
            to_hz: 1e6,
            centre_hz: 1e5 * 10f64.sqrt(),
            centre_gain: 9.0,
            centre_gain_db: 20.0 * 9f64.log10(),
            lowest_gain_db: 19.0,
            lowest_at_hz: 1e6,
            highest_gain_db: 19.6,
            highest_at_hz: 1e5,
            flatness_db: 0.6,
        });
        let req = Requirements {
            gain_flatness: Some(Limits { min: None, max: Some(1.0) }),
            midband_gain: Some(Limits { min: Some(8.0), max: None }),
            ..Requirements::default()
        };
        let checks = check(&req, &a);
        let gain = checks.iter().find(|c| c.name == "midband_gain").unwrap();
        assert_eq!(gain.value, Some(9.0));
        let flat = checks.iter().find(|c| c.name == "gain_flatness").unwrap();
        assert_eq!((flat.unit, flat.nearest_limit, flat.pass), ("dB", Some("max"), true));
        assert!((flat.margin_db.unwrap() - 0.4).abs() < 1e-12, "{:?}", flat.margin_db);
    }
}
