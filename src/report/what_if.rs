//! The what-if answers as text, tables and plots: each limit as a sentence (how far the
//! quantity can go before its requirement fails), each sweep as a table of every figure at
//! every value with the requirements that fail there, and as a plot of the limited figures
//! against the swept quantity with their limits drawn.
//!
//! In: the [`WhatIfReport`] and the design's requirements. Out: strings and SVG. No I/O.

use plotters::prelude::*;

use crate::analysis::what_if::{CornerResult, LimitResult, Outcome, SweepResult, WhatIfReport};
use crate::design::Requirements;
use crate::notation::{plain, si, signed_percent};
use crate::report::plots::{INK, MID, WIDTH, finish, px};
use crate::report::signal_plots::{Linear, linear_chart};
use crate::report::tables::{figure_label, figure_value, markdown_table, requirement_words};

/// The plot names of the first sweeps, in order (a review shows at most this many).
pub const SWEEP_PLOTS: [&str; 4] = ["what_if", "what_if_2", "what_if_3", "what_if_4"];
/// The most figures one sweep plot stacks.
const PANELS: usize = 4;

fn value(v: f64, unit: &str) -> String {
    if unit.is_empty() { plain(v, 4) } else { si(v, unit, 4) }
}

/// A limit as a sentence.
pub fn limit_sentence(l: &LimitResult) -> String {
    let what = requirement_words(l.requirement);
    let nominal = value(l.nominal, &l.unit);
    let way = if l.bound > l.nominal { "rise" } else { "fall" };
    match (l.outcome, l.value) {
        (Outcome::Reached, Some(v)) => format!(
            "`{}` can {way} from {nominal} to **{}** ({}) before the {what} requirement fails \
             (to {} %, {} evaluations).",
            l.quantity,
            value(v, &l.unit),
            l.margin.map_or(String::new(), |m| signed_percent(m, 3)),
            plain(100.0 * l.precision, 2),
            l.evaluations
        ),
        (Outcome::FailsAtNominal, _) => format!(
            "The {what} requirement fails already at `{}` = {nominal}: there is no room to move.",
            l.quantity
        ),
        _ => format!(
            "`{}` can {way} from {nominal} all the way to {}, the end of the search, and the \
             {what} requirement still passes: not reached within the range.",
            l.quantity,
            value(l.bound, &l.unit)
        ),
    }
}

/// True when a figure moves by more than 0.1 % across the sweep, or fails somewhere in it:
/// the sweep's tables show those, and say which stayed put.
fn moves(s: &SweepResult, key: &str, values: &[Option<f64>]) -> bool {
    let v: Vec<f64> = values.iter().flatten().copied().collect();
    let (lo, hi) =
        v.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| (a.min(x), b.max(x)));
    let fails = s.failing.iter().flatten().any(|f| f.contains(&key));
    fails || v.len() < values.len() || (hi - lo) > 1e-3 * lo.abs().max(hi.abs())
}

/// The figures of a sweep that stay within 0.1 % all the way, by label.
pub fn unmoved(s: &SweepResult) -> Vec<String> {
    s.figures.iter().filter(|(k, v)| !moves(s, k, v)).map(|(k, _)| figure_label(k)).collect()
}

/// A sweep's header and rows: the value, each figure that moves, and the requirements
/// failing there.
pub fn sweep_rows(s: &SweepResult) -> (Vec<String>, Vec<Vec<String>>) {
    let mut header = vec![if s.unit.is_empty() {
        s.quantity.clone()
    } else {
        format!("{} ({})", s.quantity, s.unit)
    }];
    let shown: Vec<&Series> = s.figures.iter().filter(|(k, v)| moves(s, k, v)).collect();
    header.extend(shown.iter().map(|(k, _)| figure_label(k)));
    header.push("requirements".into());
    let rows = s
        .values
        .iter()
        .enumerate()
        .map(|(i, &x)| {
            let mut row = vec![value(x, &s.unit)];
            row.extend(
                shown.iter().map(|(k, v)| v[i].map_or("—".to_string(), |v| figure_value(k, v))),
            );
            row.push(match &s.failing[i] {
                None => "not evaluated".into(),
                Some(f) if f.is_empty() => "pass".into(),
                Some(f) => {
                    let names: Vec<String> = f.iter().map(|n| figure_label(n)).collect();
                    format!("FAIL {}", names.join(", "))
                }
            });
            row
        })
        .collect();
    (header, rows)
}

/// A corner's column heading: its temperature in °C and each supply's voltage.
fn corner_heading(c: &CornerResult) -> String {
    let mut parts = vec![format!("{} °C", plain(c.temperature_k - 273.15, 3))];
    parts.extend(c.supplies.iter().map(|(n, v)| format!("{n} {}", si(*v, "V", 3))));
    parts.join(", ")
}

/// The corner table: one row per figure, one column per corner (nominal first); a value
/// whose requirement fails at that corner is marked `(fail)`.
pub fn corner_rows(corners: &[CornerResult]) -> (Vec<String>, Vec<Vec<String>>) {
    let mut header = vec!["figure".to_string()];
    header.extend(corners.iter().map(|c| {
        if c.label == "nominal" {
            format!("nominal ({})", corner_heading(c))
        } else {
            corner_heading(c)
        }
    }));
    let Some(first) = corners.first() else { return (header, Vec::new()) };
    let mut rows: Vec<Vec<String>> = first
        .figures
        .iter()
        .enumerate()
        .map(|(i, (key, _))| {
            let mut row = vec![figure_label(key)];
            row.extend(corners.iter().map(|c| {
                let fails = c.failing.as_ref().is_some_and(|f| f.iter().any(|n| n == key));
                match c.figures.get(i).and_then(|f| f.1) {
                    Some(v) if fails => format!("{} (fail)", figure_value(key, v)),
                    Some(v) => figure_value(key, v),
                    None => "—".into(),
                }
            }));
            row
        })
        .collect();
    let tolerance = corners.iter().any(|c| !c.tolerance.is_empty());
    if tolerance {
        for (j, (name, _)) in first.tolerance.iter().enumerate() {
            let mut row = vec![format!("{}, worst tolerance corner", figure_label(name))];
            row.extend(corners.iter().map(|c| {
                let fails = c.tolerance_failing.contains(name);
                match c.tolerance.get(j).and_then(|t| t.1) {
                    Some(v) if fails => format!("{} (fail)", figure_value(name, v)),
                    Some(v) => figure_value(name, v),
                    None => "—".into(),
                }
            }));
            rows.push(row);
        }
    }
    let mut verdict = vec!["requirements".to_string()];
    verdict.extend(corners.iter().map(|c| match &c.failing {
        None => "not evaluated".into(),
        Some(f) if f.is_empty() => "pass".into(),
        Some(f) => {
            format!("FAIL {}", f.iter().map(|n| figure_label(n)).collect::<Vec<_>>().join(", "))
        }
    }));
    rows.push(verdict);
    if tolerance {
        let mut row = vec!["with tolerances".to_string()];
        row.extend(corners.iter().map(|c| {
            if c.tolerance_failing.is_empty() {
                "pass".into()
            } else {
                let names: Vec<String> =
                    c.tolerance_failing.iter().map(|n| figure_label(n)).collect();
                format!("FAIL {}", names.join(", "))
            }
        }));
        rows.push(row);
    }
    (header, rows)
}

/// The suggested changes as rows: the changes, the worst margin, each limited figure.
pub fn suggestion_rows(w: &WhatIfReport) -> (Vec<String>, Vec<Vec<String>>) {
    let header = vec!["change".to_string(), "worst margin".to_string(), "figures".to_string()];
    let rows = w
        .suggestions
        .iter()
        .map(|s| {
            let changes: Vec<String> = s
                .changes
                .iter()
                .map(|c| {
                    format!(
                        "{} {} → {} ({})",
                        c.part,
                        si(c.from, c.unit, 3),
                        si(c.to, c.unit, 3),
                        c.series
                    )
                })
                .collect();
            let figures: Vec<String> = s
                .figures
                .iter()
                .filter_map(|(k, v)| {
                    Some(format!("{} {}", figure_label(k), figure_value(k, (*v)?)))
                })
                .collect();
            vec![changes.join(" and "), signed_percent(s.worst_margin, 3), figures.join(", ")]
        })
        .collect();
    (header, rows)
}

/// The `suggestions` table, when a requirement fails and a change within reach fixes it.
pub fn suggestions_markdown(w: &WhatIfReport) -> Option<String> {
    if w.suggestions.is_empty() {
        return None;
    }
    let (header, rows) = suggestion_rows(w);
    let head: Vec<&str> = header.iter().map(String::as_str).collect();
    Some(markdown_table(&head, "lrl", rows))
}

/// The `corners` table: figure by operating corner, nominal first.
pub fn corners_markdown(w: &WhatIfReport) -> Option<String> {
    if w.corners.is_empty() {
        return None;
    }
    let (header, rows) = corner_rows(&w.corners);
    let head: Vec<&str> = header.iter().map(String::as_str).collect();
    let align: String = std::iter::once('l').chain(w.corners.iter().map(|_| 'r')).collect();
    Some(markdown_table(&head, &align, rows))
}

/// The `limits` block: each limit as a sentence.
pub fn limits_markdown(w: &WhatIfReport) -> Option<String> {
    if w.limits.is_empty() {
        return None;
    }
    Some(w.limits.iter().map(|l| format!("- {}\n", limit_sentence(l))).collect())
}

/// The `sweeps` block: each sweep's table of the figures that move, under a heading line.
pub fn sweeps_markdown(w: &WhatIfReport) -> Option<String> {
    if w.sweeps.is_empty() {
        return None;
    }
    let mut out = String::new();
    for s in &w.sweeps {
        let (header, rows) = sweep_rows(s);
        let head: Vec<&str> = header.iter().map(String::as_str).collect();
        let align: String = std::iter::once('r')
            .chain(header[1..header.len() - 1].iter().map(|_| 'r'))
            .chain(['l'])
            .collect();
        if !out.is_empty() {
            out.push('\n');
        }
        out.push_str(&format!("**{} swept, {} points**\n\n", s.quantity, s.values.len()));
        out.push_str(&markdown_table(&head, &align, rows));
        let still = unmoved(s);
        if !still.is_empty() {
            out.push_str(&format!("\nWithin 0.1 % across the sweep: {}.\n", still.join(", ")));
        }
    }
    Some(out)
}

/// The `what_if` table: the corners, the limits as sentences, then each sweep's table.
pub fn markdown(w: &WhatIfReport) -> Option<String> {
    let mut parts = Vec::new();
    if let Some(c) = corners_markdown(w) {
        parts.push(format!("**Operating corners**\n\n{c}"));
    }
    parts.extend(limits_markdown(w));
    parts.extend(sweeps_markdown(w));
    (!parts.is_empty()).then(|| parts.join("\n"))
}

/// A figure's name and its value at each point of a sweep.
type Series = (String, Vec<Option<f64>>);

/// The figures a sweep plot shows: those a requirement limits — the ones that fail
/// somewhere in the sweep first, then the ones that move most — else the gain and the
/// upper cut-off; at most [`PANELS`], in the review's order.
fn shown<'s>(s: &'s SweepResult, req: &Requirements) -> Vec<&'s Series> {
    let limited: Vec<&str> =
        req.items().iter().filter(|(_, l)| l.is_some()).map(|(n, _)| *n).collect();
    let fails = |k: &str| s.failing.iter().flatten().any(|f| f.contains(&k));
    let spread = |v: &[Option<f64>]| {
        let vals: Vec<f64> = v.iter().flatten().map(|x| x.abs()).collect();
        let (lo, hi) = vals.iter().fold((f64::INFINITY, 0.0f64), |(a, b), &x| (a.min(x), b.max(x)));
        if lo > 0.0 { hi / lo } else { f64::INFINITY }
    };
    let mut ranked: Vec<(usize, &Series)> =
        s.figures.iter().enumerate().filter(|(_, (k, _))| limited.contains(&k.as_str())).collect();
    ranked.sort_by(|a, b| {
        fails(&b.1.0)
            .cmp(&fails(&a.1.0))
            .then(spread(&b.1.1).total_cmp(&spread(&a.1.1)))
            .then(a.0.cmp(&b.0))
    });
    ranked.truncate(PANELS);
    ranked.sort_by_key(|(i, _)| *i);
    let mut out: Vec<_> = ranked.into_iter().map(|(_, f)| f).collect();
    if out.is_empty() {
        out =
            s.figures.iter().filter(|(k, _)| k == "midband_gain" || k == "upper_cutoff").collect();
    }
    out
}

/// A sweep's plot: each shown figure in its own panel against the swept quantity (a log axis
/// for a log sweep), its requirement's limits dashed, and where a solved limit of the same
/// quantity on that requirement falls, a dotted vertical line.
pub fn plot(s: &SweepResult, req: &Requirements, solved: &[LimitResult]) -> Option<String> {
    let panels = shown(s, req);
    if panels.is_empty() || s.values.len() < 2 {
        return None;
    }
    let x_of = |v: f64| if s.log { v.log10() } else { v };
    let (x0, x1) = s
        .values
        .iter()
        .map(|&v| x_of(v))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)));
    if x1.partial_cmp(&x0) != Some(std::cmp::Ordering::Greater) {
        return None;
    }
    let height = 200;
    let mut svg = String::new();
    {
        let total = (height * panels.len()) as u32;
        let root = SVGBackend::with_string(&mut svg, (px(WIDTH), px(total))).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let areas = root.split_evenly((panels.len(), 1));
        let unit = s.unit.clone();
        let log = s.log;
        let x_label = move |v: &f64| {
            let x = if log { 10f64.powf(*v) } else { *v };
            if unit.is_empty() { plain(x, 3) } else { si(x, &unit, 3) }
        };
        for (area, (key, ys)) in areas.iter().zip(&panels) {
            let limits = req.items().into_iter().find(|(n, _)| n == key).and_then(|(_, l)| l);
            let points: Vec<(f64, f64)> =
                s.values.iter().zip(ys).filter_map(|(&x, y)| Some((x_of(x), (*y)?))).collect();
            if points.is_empty() {
                continue;
            }
            let mut lo = points.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
            let mut hi = points.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max);
            for v in limits.iter().flat_map(|l| [l.min, l.max]).flatten() {
                lo = lo.min(v);
                hi = hi.max(v);
            }
            let pad = ((hi - lo) * 0.08).max(hi.abs() * 1e-3).max(1e-300);
            let (lo, hi) = (lo - pad, hi + pad);
            let k = key.clone();
            let y_label = move |v: &f64| figure_value(&k, *v);
            let mut chart = linear_chart(
                area,
                Linear {
                    x: (x0, x1),
                    y: (lo, hi),
                    ticks: (6, 5),
                    labels: (&x_label, &y_label),
                    names: (s.quantity.clone(), figure_label(key)),
                },
            )?;
            for v in limits.iter().flat_map(|l| [l.min, l.max]).flatten() {
                chart
                    .draw_series(DashedLineSeries::new(
                        [(x0, v), (x1, v)],
                        px(6),
                        px(4),
                        MID.stroke_width(px(1)),
                    ))
                    .ok()?;
            }
            for l in solved.iter().filter(|l| l.quantity == s.quantity && l.requirement == key) {
                let Some(v) = l.value.filter(|v| *v > 0.0 || !s.log) else { continue };
                let x = x_of(v);
                if x >= x0 && x <= x1 {
                    chart
                        .draw_series(DashedLineSeries::new(
                            [(x, lo), (x, hi)],
                            px(2),
                            px(3),
                            INK.stroke_width(px(1)),
                        ))
                        .ok()?;
                }
            }
            chart.draw_series(LineSeries::new(points.clone(), INK.stroke_width(px(2)))).ok()?;
            chart.draw_series(points.iter().map(|&p| Circle::new(p, px(3), INK.filled()))).ok()?;
        }
        root.present().ok()?;
    }
    Some(finish(svg))
}
