//! What-if: every figure of the evaluation core against a swept quantity, and how far a
//! quantity can go before a requirement stops passing.
//!
//! In: a [`Design`] and its [`WhatIf`] questions. Out: a [`WhatIfReport`]. A param is varied
//! by reading the design again with the param replaced (so everything written in terms of it
//! follows: a cable's length moves the load capacitance computed from it); a part value, the
//! temperature or a supply by changing that one value. Each point is one lean evaluation
//! ([`crate::analysis::metrics`]), the same numbers the review and the tolerance study use.
//! A limit is bracketed on 32 steps from the nominal value toward the stated bound and
//! bisected to the stated precision. Points run in parallel and are collected in order:
//! the same bits on any thread count. No I/O.

use std::collections::BTreeMap;

use rayon::prelude::*;
use serde::Serialize;

use crate::analysis::Metrics;
use crate::analysis::tolerance::{Figure, figures};
use crate::design::{Design, PartKind, Varied};

/// Steps from the nominal value to the bound on which a limit is bracketed.
const BRACKET_STEPS: usize = 32;

/// One sweep's results.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SweepResult {
    /// The quantity, as written.
    pub quantity: String,
    /// Its SI unit.
    pub unit: String,
    /// Log-spaced values (plots use a log axis).
    pub log: bool,
    /// The values, SI.
    pub values: Vec<f64>,
    /// Each figure's value at each point (None where it could not be computed), by its
    /// results.json name, in the tolerance study's order.
    pub figures: Vec<(String, Vec<Option<f64>>)>,
    /// The limited requirements failing at each point (empty: every one passes; None: the
    /// design could not be evaluated there).
    pub failing: Vec<Option<Vec<&'static str>>>,
}

/// How a limit search ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// The requirement stops passing within the range: `value` is the last passing value.
    Reached,
    /// It still passes at the bound.
    NotReached,
    /// It fails already at the nominal value.
    FailsAtNominal,
}

/// One limit's result.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct LimitResult {
    /// The quantity, as written.
    pub quantity: String,
    /// Its SI unit.
    pub unit: String,
    /// The requirement kept passing.
    pub requirement: &'static str,
    /// The quantity's nominal value, SI.
    pub nominal: f64,
    /// How far the search went, SI.
    pub bound: f64,
    /// The last value at which the requirement passes, when the search reached the edge.
    pub value: Option<f64>,
    /// (value − nominal)/|nominal|: how far the design can move.
    pub margin: Option<f64>,
    /// The relative precision of `value`.
    pub precision: f64,
    /// How the search ended.
    pub outcome: Outcome,
    /// Evaluations spent.
    pub evaluations: usize,
}

/// One operating corner: the temperature and each ranged supply, and every figure there.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct CornerResult {
    /// A short name: `nominal`, or each ranged quantity at its `low` or `high` end.
    pub label: String,
    /// The junction temperature, K.
    pub temperature_k: f64,
    /// Each supply's voltage at this corner (node, V), in the design's order.
    pub supplies: Vec<(String, f64)>,
    /// Each figure (requirement names, then each transistor's `NAME.bias_current`), None
    /// where it could not be computed.
    pub figures: Vec<(String, Option<f64>)>,
    /// The limited requirements failing here (None: the design could not be evaluated).
    pub failing: Option<Vec<&'static str>>,
    /// With `tolerance_corners`: each limited requirement's value at its worst tolerance
    /// corner here (the worst-case study of this corner's design), by requirement name.
    pub tolerance: Vec<(&'static str, Option<f64>)>,
    /// The limited requirements failing at their worst tolerance corner here.
    pub tolerance_failing: Vec<&'static str>,
}

/// Every what-if answer of a design.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct WhatIfReport {
    /// Part changes that make every requirement pass, when one fails at nominal values.
    pub suggestions: Vec<crate::analysis::part_changes::Suggestion>,
    /// The nominal point first, then every combination of the ranges' ends.
    pub corners: Vec<CornerResult>,
    /// In the design's order.
    pub sweeps: Vec<SweepResult>,
    /// In the design's order.
    pub limits: Vec<LimitResult>,
}

/// `design` with `varied` set to `value` (SI); None when the design cannot be read again
/// with that value (a param whose new value makes a part invalid, say).
pub fn at(design: &Design, varied: &Varied, value: f64) -> Option<Design> {
    match varied {
        Varied::Param(name) => {
            let overrides = BTreeMap::from([(name.clone(), value)]);
            crate::design::load_with(&design.source, &overrides, design.project.as_ref()).design
        }
        Varied::Part(name) => {
            let mut d = design.clone();
            let part = d.parts.iter_mut().find(|p| p.name == *name)?;
            match &mut part.kind {
                PartKind::Resistor { value: v, .. }
                | PartKind::Capacitor { value: v, .. }
                | PartKind::Inductor { value: v, .. }
                | PartKind::Transconductance { value: v, .. }
                | PartKind::VoltageAmplifier { value: v, .. } => v.nominal = value,
                _ => return None,
            }
            Some(d)
        }
        Varied::Temperature => {
            let mut d = design.clone();
            d.temperature_k = value;
            Some(d)
        }
        Varied::Supply(node) => {
            let mut d = design.clone();
            d.supplies.iter_mut().find(|s| s.node == *node)?.voltage.nominal = value;
            Some(d)
        }
    }
}

/// The nominal value of `varied` in `design`.
pub fn nominal(design: &Design, varied: &Varied) -> Option<f64> {
    match varied {
        Varied::Param(name) => design.params.iter().find(|p| p.name == *name).map(|p| p.value),
        Varied::Part(name) => {
            design.parts.iter().find(|p| p.name == *name).and_then(|p| match &p.kind {
                PartKind::Resistor { value, .. }
                | PartKind::Capacitor { value, .. }
                | PartKind::Inductor { value, .. }
                | PartKind::Transconductance { value, .. }
                | PartKind::VoltageAmplifier { value, .. } => Some(value.nominal),
                _ => None,
            })
        }
        Varied::Temperature => Some(design.temperature_k),
        Varied::Supply(node) => {
            design.supplies.iter().find(|s| s.node == *node).map(|s| s.voltage.nominal)
        }
    }
}

fn evaluate(design: &Design, varied: &Varied, value: f64) -> Option<Metrics> {
    crate::analysis::metrics(&at(design, varied, value)?).ok()
}

/// The limited requirements `m` fails.
fn failing(design: &Design, m: &Metrics) -> Vec<&'static str> {
    design
        .requirements
        .items()
        .into_iter()
        .filter_map(|(name, l)| {
            let l = l?;
            let v = Figure::of_requirement(name).of(m);
            (!v.is_some_and(|v| l.contains(v))).then_some(name)
        })
        .collect()
}

/// The relative distance of `m`'s figure to `requirement`'s nearer limit, positive inside;
/// −1 when the figure could not be computed.
pub(crate) fn requirement_margin(design: &Design, requirement: &str, m: Option<&Metrics>) -> f64 {
    let limits = design.requirements.items().into_iter().find(|(n, _)| *n == requirement);
    let Some((_, Some(l))) = limits else { return -1.0 };
    let Some(v) = m.and_then(|m| Figure::of_requirement(requirement).of(m)) else { return -1.0 };
    l.relative_margin(v)
}

/// Every sweep and limit the design asks.
pub fn review(design: &Design) -> WhatIfReport {
    let w = &design.what_if;
    let suggestions = crate::analysis::part_changes::suggest(design);
    if w.sweeps.is_empty() && w.limits.is_empty() && w.corners.is_empty() {
        return WhatIfReport { suggestions, ..WhatIfReport::default() };
    }
    let keys: Vec<Figure> = crate::analysis::metrics(design)
        .map(|m| figures(&m).into_iter().filter(|f| !matches!(f, Figure::Bias(_))).collect())
        .unwrap_or_default();
    let sweeps = w
        .sweeps
        .iter()
        .map(|s| {
            let points: Vec<Option<Metrics>> =
                s.values.par_iter().map(|&v| evaluate(design, &s.varied, v)).collect();
            SweepResult {
                quantity: s.name.clone(),
                unit: s.unit.clone(),
                log: s.log,
                values: s.values.clone(),
                figures: keys
                    .iter()
                    .map(|f| {
                        (
                            f.key(&[]),
                            points.iter().map(|m| m.as_ref().and_then(|m| f.of(m))).collect(),
                        )
                    })
                    .collect(),
                failing: points.iter().map(|m| m.as_ref().map(|m| failing(design, m))).collect(),
            }
        })
        .collect();
    let limits = w.limits.iter().filter_map(|l| limit(design, l)).collect();
    WhatIfReport { suggestions, corners: corners(design), sweeps, limits }
}

/// Each limited requirement's value at its worst tolerance corner in `d` (the tolerance
/// study's worst case, without Monte Carlo): of the low and high corners, the one nearer or
/// past a limit; and the requirements that fail there.
fn worst_tolerance(
    d: &Design,
    m: &Metrics,
) -> (Vec<(&'static str, Option<f64>)>, Vec<&'static str>) {
    let names = crate::analysis::evaluate::operating_point(d)
        .map(|op| op.devices.iter().map(|x| x.part.clone()).collect::<Vec<_>>())
        .unwrap_or_default();
    let study = crate::analysis::tolerance::study(d, m, &names, 0, &|_| {});
    let mut values = Vec::new();
    let mut fails = Vec::new();
    for (name, l) in d.requirements.items() {
        let Some(l) = l else { continue };
        let w = study.worst_case.iter().find(|w| w.figure == name);
        let worst = w
            .map(|w| [w.low_corner, w.high_corner])
            .into_iter()
            .flatten()
            .flatten()
            .chain(Figure::of_requirement(name).of(m))
            .min_by(|a, b| l.relative_margin(*a).total_cmp(&l.relative_margin(*b)));
        if !worst.is_some_and(|v| l.contains(v)) {
            fails.push(name);
        }
        values.push((name, worst));
    }
    (values, fails)
}

/// The design at the nominal point (labelled `nominal`), then at each combination of its
/// operating ranges' ends, the first range varying slowest (`temperature low, vcc high`).
pub(crate) fn corner_designs(design: &Design) -> Vec<(String, Design)> {
    let ranges = &design.what_if.corners;
    let mut settings: Vec<Vec<Option<usize>>> = vec![vec![None; ranges.len()]];
    if !ranges.is_empty() {
        for k in 0..1usize << ranges.len() {
            settings
                .push((0..ranges.len()).map(|i| Some((k >> (ranges.len() - 1 - i)) & 1)).collect());
        }
    }
    settings
        .iter()
        .map(|ends| {
            let mut d = Some(design.clone());
            let mut label = Vec::new();
            for (r, end) in ranges.iter().zip(ends) {
                if let Some(e) = end {
                    d = d.and_then(|d| at(&d, &r.varied, r.ends[*e]));
                    label.push(format!("{} {}", r.name, if *e == 0 { "low" } else { "high" }));
                }
            }
            let label = if label.is_empty() { "nominal".into() } else { label.join(", ") };
            (label, d.unwrap_or_else(|| design.clone()))
        })
        .collect()
}

/// The nominal point, then each combination of the ranges' ends (the first range varying
/// slowest): every figure and bias current there.
fn corners(design: &Design) -> Vec<CornerResult> {
    let ranges = &design.what_if.corners;
    if ranges.is_empty() {
        return Vec::new();
    }
    let nominal = crate::analysis::metrics(design).ok();
    let names = crate::analysis::evaluate::operating_point(design)
        .map(|op| op.devices.iter().map(|d| d.part.clone()).collect::<Vec<_>>())
        .unwrap_or_default();
    let keys: Vec<Figure> = nominal
        .as_ref()
        .map(|m| {
            let mut k: Vec<Figure> =
                figures(m).into_iter().filter(|f| !matches!(f, Figure::Bias(_))).collect();
            k.extend((0..m.bias.len()).map(Figure::Bias));
            k
        })
        .unwrap_or_default();
    corner_designs(design)
        .par_iter()
        .map(|(label, d)| {
            let m = crate::analysis::metrics(d).ok();
            let (tolerance, tolerance_failing) = match (&m, design.what_if.tolerance_corners) {
                (Some(m), true) => worst_tolerance(d, m),
                _ => (Vec::new(), Vec::new()),
            };
            CornerResult {
                tolerance,
                tolerance_failing,
                label: label.clone(),
                temperature_k: d.temperature_k,
                supplies: d.supplies.iter().map(|s| (s.node.clone(), s.voltage.nominal)).collect(),
                figures: keys
                    .iter()
                    .map(|f| (f.key(&names), m.as_ref().and_then(|m| f.of(m))))
                    .collect(),
                failing: m.as_ref().map(|m| failing(design, m)),
            }
        })
        .collect()
}

/// Where `l.requirement` stops passing as `l.varied` moves from its nominal value toward
/// `l.bound`.
fn limit(design: &Design, l: &crate::design::LimitSpec) -> Option<LimitResult> {
    let x0 = nominal(design, &l.varied)?;
    let g =
        |x: f64| requirement_margin(design, l.requirement, evaluate(design, &l.varied, x).as_ref());
    let log = x0 > 0.0 && l.bound > 0.0;
    // Points from x0 to the bound, evenly in ratio where both are positive.
    let step = |t: f64| if log { x0 * (l.bound / x0).powf(t) } else { x0 + (l.bound - x0) * t };
    let mut result = LimitResult {
        quantity: l.name.clone(),
        unit: l.unit.clone(),
        requirement: l.requirement,
        nominal: x0,
        bound: l.bound,
        value: None,
        margin: None,
        precision: l.precision,
        outcome: Outcome::NotReached,
        evaluations: 1,
    };
    if g(x0) < 0.0 {
        result.outcome = Outcome::FailsAtNominal;
        return Some(result);
    }
    let xs: Vec<f64> = (1..=BRACKET_STEPS)
        .map(|k| if k == BRACKET_STEPS { l.bound } else { step(k as f64 / BRACKET_STEPS as f64) })
        .collect();
    let gs: Vec<f64> = xs.par_iter().map(|&x| g(x)).collect();
    result.evaluations += xs.len();
    let Some(k) = gs.iter().position(|v| *v < 0.0) else { return Some(result) };
    // The last passing point and the first failing one, bisected (in ratio for a log search).
    let (mut pass, mut fail) = (if k == 0 { x0 } else { xs[k - 1] }, xs[k]);
    for _ in 0..200 {
        if (fail - pass).abs() <= l.precision * pass.abs().max(fail.abs()) {
            break;
        }
        let mid = if log { (pass * fail).sqrt() } else { 0.5 * (pass + fail) };
        result.evaluations += 1;
        if g(mid) < 0.0 {
            fail = mid;
        } else {
            pass = mid;
        }
    }
    result.value = Some(pass);
    result.margin = (x0 != 0.0).then(|| (pass - x0) / x0.abs());
    result.outcome = Outcome::Reached;
    Some(result)
}
