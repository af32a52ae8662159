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
    /// The value at the tolerance corner that pushes it toward the limit, when a study ran:
    /// the low corner for a minimum, the high corner for a maximum (the worse of the two
    /// when both limits are set).
    pub corner: Option<f64>,
    /// True when the corner value is within the limits.
    pub corner_pass: Option<bool>,
    /// Monte Carlo yield of this requirement.
    pub yield_fraction: Option<f64>,
}

/// Adds the worst-case corners and Monte Carlo yields of a tolerance study.
pub fn with_study(checks: &mut [RequirementCheck], study: &crate::analysis::tolerance::Study) {
    for c in checks.iter_mut() {
        let Some(w) = study.worst_case.iter().find(|w| w.figure == c.name) else { continue };
        let inside = |v: f64| c.min.is_none_or(|lo| v >= lo) && c.max.is_none_or(|hi| v <= hi);
        let candidates: Vec<f64> =
            [c.min.and(w.low_corner), c.max.and(w.high_corner)].into_iter().flatten().collect();
        c.corner = candidates.iter().copied().find(|v| !inside(*v)).or(candidates.first().copied());
        c.corner_pass = c.corner.map(inside);
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
            let margins: Vec<f64> = [
                l.min.zip(value).map(|(lo, v)| (v - lo) / lo),
                l.max.zip(value).map(|(hi, v)| (hi - v) / hi),
            ]
            .into_iter()
            .flatten()
            .collect();
            let margin = margins.iter().copied().reduce(f64::min);
            Some(RequirementCheck {
                name,
                unit,
                min: l.min,
                max: l.max,
                value,
                pass: value.is_some() && margin.is_some_and(|m| m >= 0.0),
                margin,
                corner: None,
                corner_pass: None,
                yield_fraction: None,
            })
        })
        .collect()
}
