//! Suggested part changes: for a design that fails a requirement at nominal values or at one
//! of the operating corners it states, changes of one part and then of two parts to values of the IEC 60063 series each part's tolerance
//! implies ([`Series::for_tolerance`]), each evaluated in full by the evaluation core, and the
//! few that make every requirement pass with the least change.
//!
//! In: a [`Design`]. Out: [`Suggestion`]s, best first. Only resistors, capacitors and
//! inductors the design may change are tried (never a part marked `fixed`, nor the load);
//! values within a decade either side of the present one. Ranked by the number of parts
//! changed, then by the total relative change Σ|ln(new/old)|, then by the largest worst
//! margin. Candidates are evaluated in parallel and collected in order: the same list on any
//! thread count. No I/O.

use rayon::prelude::*;
use serde::Serialize;

use crate::analysis::Metrics;
use crate::analysis::tolerance::{Figure, figures};
use crate::analysis::what_if::{at, requirement_margin};
use crate::design::series::Series;
use crate::design::{Design, PartKind, Varied};

/// How many suggestions the review lists.
pub const SHOWN: usize = 3;
/// Candidate values reach this factor either side of the present value.
const REACH: f64 = 10.0;
/// Parts (the most promising alone) and values per part combined in two-part changes.
const PAIR_PARTS: usize = 6;
const PAIR_VALUES: usize = 6;

/// One part's new value.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Change {
    /// Designator.
    pub part: String,
    /// Present value, SI.
    pub from: f64,
    /// Suggested value, SI.
    pub to: f64,
    /// Its unit.
    pub unit: &'static str,
    /// The series the value comes from.
    pub series: &'static str,
}

/// A set of changes that makes every requirement pass.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Suggestion {
    /// The changes, in the design's part order.
    pub changes: Vec<Change>,
    /// Every figure with the changes made.
    pub figures: Vec<(String, Option<f64>)>,
    /// The smallest relative margin of any limited requirement with the changes made, at
    /// nominal values and at every operating corner.
    pub worst_margin: f64,
}

/// A passing set of changes (part index, value), its worst margin and its evaluation.
type Found = (Vec<(usize, f64)>, f64, Option<Metrics>);

/// A part that may be changed: its designator, value, unit and series.
struct Candidate {
    name: String,
    value: f64,
    unit: &'static str,
    series: Series,
}

fn changeable(design: &Design) -> Vec<Candidate> {
    design
        .parts
        .iter()
        .filter(|p| !p.is_fixed())
        .filter_map(|p| {
            let (value, unit) = match &p.kind {
                PartKind::Resistor { value, .. } => (value, "Ω"),
                PartKind::Capacitor { value, .. } => (value, "F"),
                PartKind::Inductor { value, .. } => (value, "H"),
                _ => return None,
            };
            (value.nominal > 0.0).then(|| Candidate {
                name: p.name.clone(),
                value: value.nominal,
                unit,
                series: Series::for_tolerance(value.tolerance.map(|t| t.fraction)),
            })
        })
        .collect()
}

/// The smallest margin over every limited requirement of `m` (negative: something fails).
fn worst(design: &Design, m: Option<&Metrics>) -> f64 {
    design
        .requirements
        .items()
        .into_iter()
        .filter(|(_, l)| l.is_some())
        .map(|(name, _)| requirement_margin(design, name, m))
        .fold(f64::INFINITY, f64::min)
}

/// The design with each (part, value) of `changes` made, and its evaluation.
fn evaluate(design: &Design, changes: &[(&str, f64)]) -> Option<Metrics> {
    let mut d = design.clone();
    for (part, v) in changes {
        d = at(&d, &Varied::Part((*part).to_string()), *v)?;
    }
    crate::analysis::metrics(&d).ok()
}

/// Where a change must make every requirement pass: the nominal design and each operating
/// corner it states.
struct Judge {
    conditions: Vec<Design>,
}

impl Judge {
    /// The worst margin over every condition with `changes` made, and the nominal evaluation.
    fn judge(&self, changes: &[(&str, f64)]) -> (f64, Option<Metrics>) {
        let mut nominal = None;
        let mut least = f64::INFINITY;
        for (k, d) in self.conditions.iter().enumerate() {
            let m = evaluate(d, changes);
            least = least.min(worst(d, m.as_ref()));
            if k == 0 {
                nominal = m;
            }
        }
        (least, nominal)
    }
}

/// Suggested changes for `design`, best first; empty when every requirement passes at
/// nominal values and at every operating corner, or nothing within reach fixes it.
pub fn suggest(design: &Design) -> Vec<Suggestion> {
    let Ok(nominal) = crate::analysis::metrics(design) else { return Vec::new() };
    let judge = Judge {
        conditions: crate::analysis::what_if::corner_designs(design)
            .into_iter()
            .map(|(_, d)| d)
            .collect(),
    };
    if judge.judge(&[]).0 >= 0.0 {
        return Vec::new();
    }
    let keys: Vec<Figure> =
        figures(&nominal).into_iter().filter(|f| !matches!(f, Figure::Bias(_))).collect();
    let parts = changeable(design);
    let singles: Vec<(usize, f64)> = parts
        .iter()
        .enumerate()
        .flat_map(|(i, p)| {
            p.series
                .values_between(p.value / REACH, p.value * REACH)
                .into_iter()
                .filter(move |v| (v / p.value - 1.0).abs() > 1e-9)
                .map(move |v| (i, v))
        })
        .collect();
    let single_margins: Vec<(f64, Option<Metrics>)> =
        singles.par_iter().map(|&(i, v)| judge.judge(&[(&parts[i].name, v)])).collect();
    let mut found: Vec<Found> = singles
        .iter()
        .zip(&single_margins)
        .filter(|(_, (w, _))| *w >= 0.0)
        .map(|(&c, (w, m))| (vec![c], *w, m.clone()))
        .collect();
    if found.len() < SHOWN {
        // The parts that come closest alone, each with its most promising values.
        let mut best_per_part: Vec<(usize, f64)> = (0..parts.len())
            .map(|i| {
                let best = singles
                    .iter()
                    .zip(&single_margins)
                    .filter(|((p, _), _)| *p == i)
                    .map(|(_, (w, _))| *w)
                    .fold(f64::NEG_INFINITY, f64::max);
                (i, best)
            })
            .collect();
        best_per_part.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
        let chosen: Vec<usize> = best_per_part.iter().take(PAIR_PARTS).map(|(i, _)| *i).collect();
        let values = |i: usize| -> Vec<f64> {
            let mut v: Vec<(f64, f64)> = singles
                .iter()
                .zip(&single_margins)
                .filter(|((p, _), _)| *p == i)
                .map(|((_, v), (w, _))| (*v, *w))
                .collect();
            v.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.total_cmp(&b.0)));
            v.into_iter().take(PAIR_VALUES).map(|(v, _)| v).collect()
        };
        let mut pairs: Vec<[(usize, f64); 2]> = Vec::new();
        for (a, &i) in chosen.iter().enumerate() {
            for &j in &chosen[a + 1..] {
                let (lo, hi) = if i < j { (i, j) } else { (j, i) };
                for vi in values(lo) {
                    for vj in values(hi) {
                        pairs.push([(lo, vi), (hi, vj)]);
                    }
                }
            }
        }
        let evaluated: Vec<(f64, Option<Metrics>)> = pairs
            .par_iter()
            .map(|p| judge.judge(&[(&parts[p[0].0].name, p[0].1), (&parts[p[1].0].name, p[1].1)]))
            .collect();
        found.extend(
            pairs
                .iter()
                .zip(evaluated)
                .filter(|(_, (w, _))| *w >= 0.0)
                .map(|(p, (w, m))| (p.to_vec(), w, m)),
        );
    }
    let change = |c: &[(usize, f64)]| -> f64 {
        c.iter().map(|(i, v)| (v / parts[*i].value).ln().abs()).sum()
    };
    found.sort_by(|a, b| {
        a.0.len()
            .cmp(&b.0.len())
            .then(change(&a.0).total_cmp(&change(&b.0)))
            .then(b.1.total_cmp(&a.1))
    });
    found
        .into_iter()
        .take(SHOWN)
        .map(|(c, w, m)| Suggestion {
            changes: c
                .iter()
                .map(|(i, v)| Change {
                    part: parts[*i].name.clone(),
                    from: parts[*i].value,
                    to: *v,
                    unit: parts[*i].unit,
                    series: parts[*i].series.name(),
                })
                .collect(),
            figures: keys.iter().map(|f| (f.key(&[]), m.as_ref().and_then(|m| f.of(m)))).collect(),
            worst_margin: w,
        })
        .collect()
}
