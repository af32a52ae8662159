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
            })
        })
        .collect()
}
