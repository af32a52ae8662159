//! Plots as SVG, drawn with plotters (no system font libraries): the Bode magnitude and
//! phase with the exact −3 dB points, the estimates and the requirement limits marked; the
//! pole–zero map; the time-constant shares.
//!
//! Our style: black and greys only, told apart by line weight and dash so a grey printout
//! reads the same; axis labels carry SI prefixes (1 k, 10 M), never raw exponents. Text
//! uses the font family [`FONT`], which the PDF route embeds.

use plotters::prelude::*;

use crate::analysis::requirements::RequirementCheck;
use crate::analysis::response::SweepPoint;
use crate::analysis::tolerance::Study;
use crate::analysis::{Analysis, RootHz};
use crate::notation::si;

/// The font family of plot text.
pub const FONT: &str = "DejaVu Sans Mono";

const INK: RGBColor = RGBColor(20, 20, 20);
const MID: RGBColor = RGBColor(110, 110, 110);
const PALE: RGBColor = RGBColor(200, 200, 200);

/// A named plot.
pub struct Plot {
    /// File stem and directive name: `bode`, `pole_zero`, `shares`.
    pub name: &'static str,
    /// Caption.
    pub caption: String,
    /// The SVG document.
    pub svg: String,
}

fn finish(svg: String) -> String {
    // Name a fallback so a browser without the font still draws monospace text.
    svg.replace(&format!("font-family=\"{FONT}\""), &format!("font-family=\"{FONT}, monospace\""))
}

fn style(size: u32) -> TextStyle<'static> {
    (FONT, size).into_font().color(&INK)
}

/// The names of every plot a review can hold (`plot(name=…)` accepts these).
pub const PLOTS: &[&str] = &["bode", "pole_zero", "shares", "tornado", "histograms"];

/// Every plot of the review.
pub fn all(a: &Analysis, requirements: &[RequirementCheck], study: Option<&Study>) -> Vec<Plot> {
    let mut out = Vec::new();
    let extra = study.map(|s| (tornado(s), histograms(s, requirements)));
    if let Some(svg) = bode(a, requirements) {
        out.push(Plot { name: "bode", caption: "Bode plot: magnitude and phase of the exact response, with the −3 dB points (solid), the time-constant estimates (dashed) and the requirement limits (dotted).".into(), svg });
    }
    if let Some(svg) = pole_zero(a) {
        out.push(Plot {
            name: "pole_zero",
            caption: "Pole–zero map (s/2π): poles ×, zeros ○, on signed logarithmic axes.".into(),
            svg,
        });
    }
    if let Some(svg) = shares(a) {
        out.push(Plot { name: "shares", caption: "Share of each capacitor in the open-circuit time-constant sum (upper cut-off) and in Σ 1/τ of the short-circuit constants (lower cut-off).".into(), svg });
    }
    if let Some((tornado, histograms)) = extra {
        if let Some(svg) = tornado {
            out.push(Plot { name: "tornado", caption: "Tornado chart: how far each toleranced lever moves the upper cut-off at its tolerance limit (S·t), largest first; dark bars raise f_H, grey bars lower it.".into(), svg });
        }
        if let Some(svg) = histograms {
            out.push(Plot { name: "histograms", caption: "Monte Carlo histograms of the mid-band gain and both cut-offs, with the requirement limits dotted.".into(), svg });
        }
    }
    out
}

fn tornado(s: &Study) -> Option<String> {
    let mut rows: Vec<(String, f64)> = s
        .levers
        .iter()
        .enumerate()
        .filter_map(|(i, l)| {
            Some((
                l.lever.name.clone(),
                s.s(i, "upper_cutoff")? * l.lever.tolerance?.fraction * 100.0,
            ))
        })
        .filter(|(_, v)| v.abs() >= 0.005)
        .collect();
    rows.sort_by(|a, b| b.1.abs().total_cmp(&a.1.abs()).then(a.0.cmp(&b.0)));
    rows.truncate(12);
    if rows.is_empty() {
        return None;
    }
    let n = rows.len();
    let reach = rows.iter().map(|r| r.1.abs()).fold(0.0, f64::max) * 1.25;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (860, 70 + 26 * n as u32)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .margin(14)
            .x_label_area_size(32)
            .y_label_area_size(0)
            .build_cartesian_2d(-reach * 1.6..reach, -0.2..n as f64)
            .ok()?;
        chart
            .configure_mesh()
            .disable_y_mesh()
            .disable_y_axis()
            .light_line_style(WHITE)
            .bold_line_style(PALE)
            .axis_style(MID)
            .x_label_formatter(&|v| {
                if *v < -reach - 1e-9 { String::new() } else { format!("{v:+.1} %") }
            })
            .label_style(style(11))
            .x_desc("change of f_H at the tolerance limit")
            .axis_desc_style(style(12))
            .draw()
            .ok()?;
        chart
            .draw_series(LineSeries::new([(0.0, 0.0), (0.0, n as f64)], MID.stroke_width(1)))
            .ok()?;
        chart
            .draw_series(rows.iter().enumerate().map(|(i, (_, v))| {
                let y = (n - 1 - i) as f64;
                let fill = if *v >= 0.0 { INK } else { MID };
                Rectangle::new([(0.0, y + 0.2), (*v, y + 0.8)], fill.filled())
            }))
            .ok()?;
        chart
            .draw_series(rows.iter().enumerate().map(|(i, (name, v))| {
                let y = (n - 1 - i) as f64;
                Text::new(format!("{name}  {v:+.2} %"), (-reach * 1.58, y + 0.72), style(12))
            }))
            .ok()?;
        root.present().ok()?;
    }
    Some(finish(svg))
}

/// The Monte Carlo histograms, one panel per figure, each requirement limit marked.
///
/// Long because it is one plotters drawing sequence threading the same drawing area and
/// chart contexts from the panel layout to the labels; the plot rework of the review
/// document (its own issue) replaces it.
fn histograms(s: &Study, requirements: &[RequirementCheck]) -> Option<String> {
    let mc = s.monte_carlo.as_ref()?;
    let panels: Vec<(&str, &str, Vec<f64>)> =
        [("midband_gain", "|A| (V/V)"), ("upper_cutoff", "f_H"), ("lower_cutoff", "f_L")]
            .into_iter()
            .filter_map(|(key, label)| {
                let v: Vec<f64> = mc
                    .samples
                    .iter()
                    .flatten()
                    .filter_map(|m| match key {
                        "midband_gain" => Some(m.gain),
                        "upper_cutoff" => m.f_high,
                        _ => m.f_low,
                    })
                    .collect();
                (v.len() >= 2).then_some((key, label, v))
            })
            .collect();
    if panels.is_empty() {
        return None;
    }
    let mut svg = String::new();
    {
        let root =
            SVGBackend::with_string(&mut svg, (860, 250 * panels.len() as u32)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let areas = root.split_evenly((panels.len(), 1));
        for ((key, label, values), area) in panels.iter().zip(areas.iter()) {
            let limits: Vec<f64> = requirements
                .iter()
                .filter(|r| r.name == *key)
                .flat_map(|r| [r.min, r.max])
                .flatten()
                .collect();
            let lo = values.iter().copied().fold(f64::MAX, f64::min);
            let hi = values.iter().copied().fold(f64::MIN, f64::max);
            // Limits within three spreads of the data widen the axis; farther ones are
            // named at the edge instead of squashing the histogram.
            let spread = (hi - lo).max(hi.abs() * 1e-6);
            let (near, far): (Vec<f64>, Vec<f64>) =
                limits.iter().partition(|&&l| l >= lo - 3.0 * spread && l <= hi + 3.0 * spread);
            let (lo, hi) = near.iter().fold((lo, hi), |(a, b), &l| (a.min(l), b.max(l)));
            let pad = (hi - lo).max(hi.abs() * 1e-6) * 0.05;
            let (lo, hi) = (lo - pad, hi + pad);
            let limits = near;
            let bins = 40usize;
            let width = (hi - lo) / bins as f64;
            let mut counts = vec![0usize; bins];
            for v in values {
                let k = (((v - lo) / width) as usize).min(bins - 1);
                counts[k] += 1;
            }
            let top = *counts.iter().max().unwrap_or(&1) as f64 * 1.15;
            let unit = if *key == "midband_gain" { "" } else { "Hz" };
            let mut chart = ChartBuilder::on(area)
                .margin(12)
                .x_label_area_size(40)
                .y_label_area_size(50)
                .build_cartesian_2d(lo..hi, 0.0..top)
                .ok()?;
            chart
                .configure_mesh()
                .light_line_style(WHITE)
                .bold_line_style(PALE)
                .axis_style(MID)
                .x_label_formatter(&|v| si(*v, unit, 3))
                .y_label_formatter(&|v| format!("{v:.0}"))
                .label_style(style(11))
                .x_desc(label.to_string())
                .y_desc("runs")
                .axis_desc_style(style(12))
                .draw()
                .ok()?;
            chart
                .draw_series(counts.iter().enumerate().map(|(k, c)| {
                    let x0 = lo + k as f64 * width;
                    Rectangle::new([(x0, 0.0), (x0 + width * 0.92, *c as f64)], MID.filled())
                }))
                .ok()?;
            for l in limits {
                chart
                    .draw_series(DashedLineSeries::new(
                        [(l, 0.0), (l, top)],
                        2,
                        2,
                        INK.stroke_width(2),
                    ))
                    .ok()?;
            }
            for l in far {
                let (x, text) = if l > hi {
                    (hi - (hi - lo) * 0.28, format!("limit {} →", si(l, unit, 3)))
                } else {
                    (lo + (hi - lo) * 0.01, format!("← limit {}", si(l, unit, 3)))
                };
                chart
                    .draw_series(std::iter::once(Text::new(text, (x, top * 0.93), style(11))))
                    .ok()?;
            }
        }
        root.present().ok()?;
    }
    Some(finish(svg))
}

fn decade_label(v: f64, unit: &str) -> String {
    si(v, unit, 3)
}

/// The Bode plot: magnitude and phase of the exact response with the −3 dB points, the
/// time-constant estimates and the requirement limits marked.
///
/// Long because it is one plotters drawing sequence: both panels share the frequency axis
/// and the markers, and splitting it would pass the chart contexts through every helper.
fn bode(a: &Analysis, requirements: &[RequirementCheck]) -> Option<String> {
    let sweep = &a.sweep;
    if sweep.len() < 2 {
        return None;
    }
    let f0 = sweep.first()?.frequency_hz;
    let f1 = sweep.last()?.frequency_hz;
    let mag_max = sweep.iter().map(|p| p.magnitude_db).fold(f64::MIN, f64::max);
    let top = (mag_max / 10.0).ceil() * 10.0 + 5.0;
    let bottom = (top - 80.0)
        .max(sweep.iter().map(|p| p.magnitude_db).fold(f64::MAX, f64::min).floor() - 5.0);
    let ph_min = sweep.iter().map(|p| p.phase_deg).fold(f64::MAX, f64::min);
    let ph_max = sweep.iter().map(|p| p.phase_deg).fold(f64::MIN, f64::max);
    let (ph_lo, ph_hi) = ((ph_min / 45.0).floor() * 45.0, (ph_max / 45.0).ceil() * 45.0 + 1.0);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (860, 560)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let (upper, lower) = root.split_vertically(340);
        let mut mag = ChartBuilder::on(&upper)
            .margin(14)
            .x_label_area_size(28)
            .y_label_area_size(64)
            .build_cartesian_2d((f0..f1).log_scale(), bottom..top)
            .ok()?;
        mag.configure_mesh()
            .light_line_style(PALE.mix(0.5))
            .bold_line_style(PALE)
            .axis_style(MID)
            .x_label_formatter(&|v| decade_label(*v, "Hz"))
            .y_label_formatter(&|v| format!("{v:.0} dB"))
            .label_style(style(12))
            .y_desc("|H|")
            .axis_desc_style(style(13))
            .draw()
            .ok()?;
        if let Some(b) = &a.midband.band {
            // The operating band, shaded behind the trace and named at its foot.
            let (from, to) = (b.from_hz.max(f0), b.to_hz.min(f1));
            if from < to {
                mag.draw_series(std::iter::once(Rectangle::new(
                    [(from, bottom), (to, top)],
                    PALE.mix(0.45).filled(),
                )))
                .ok()?;
                let y = bottom + (top - bottom) * 0.06;
                let _ = mag.draw_series(std::iter::once(Text::new(
                    "band".to_string(),
                    (from * 1.04, y),
                    style(11),
                )));
            }
        }
        mag.draw_series(LineSeries::new(
            sweep.iter().map(|p| (p.frequency_hz, p.magnitude_db)),
            INK.stroke_width(2),
        ))
        .ok()?;
        let mid_db = 20.0 * a.midband.gain.abs().log10();
        let level = mid_db - 3.0103;
        mag.draw_series(DashedLineSeries::new(
            [(f0, level), (f1, level)],
            3,
            5,
            MID.stroke_width(1),
        ))
        .ok()?;
        let row_height = (top - bottom) * 0.055;
        let mut mark = |f: f64, label: &str, dash: u32, weight: u32, row: u32| {
            if f > f0 && f < f1 {
                let _ = mag.draw_series(DashedLineSeries::new(
                    [(f, bottom), (f, top)],
                    if dash == 0 { 1000 } else { dash },
                    if dash == 0 { 0 } else { dash },
                    INK.stroke_width(weight),
                ));
                let y = top - row_height * (1.0 + row as f64);
                let _ = mag.draw_series(std::iter::once(Text::new(
                    label.to_string(),
                    (f * 1.08, y),
                    style(11),
                )));
            }
        };
        if let Some(f) = a.high.f3db_hz {
            mark(f, &format!("f_H {}", si(f, "Hz", 3)), 0, 1, 0);
        }
        if let Some(f) = a.low.f3db_hz {
            mark(f, &format!("f_L {}", si(f, "Hz", 3)), 0, 1, 0);
        }
        if let Some(f) = a.high.octc.f_estimate_hz {
            mark(f, "Στ", 6, 1, 1);
        }
        if let Some(f) = a.low.sctc.f_estimate_hz {
            mark(f, "Σ1/τ", 6, 1, 1);
        }
        for r in requirements.iter().filter(|r| r.unit == "Hz") {
            for (limit, word) in [(r.min, "min"), (r.max, "max")] {
                if let Some(f) = limit {
                    let tag = if r.name == "upper_cutoff" { "f_H" } else { "f_L" };
                    mark(f, &format!("{tag} {word}"), 2, 1, 2);
                }
            }
        }
        let mut phase = ChartBuilder::on(&lower)
            .margin(14)
            .x_label_area_size(30)
            .y_label_area_size(64)
            .build_cartesian_2d((f0..f1).log_scale(), ph_lo..ph_hi)
            .ok()?;
        phase
            .configure_mesh()
            .light_line_style(PALE.mix(0.5))
            .bold_line_style(PALE)
            .axis_style(MID)
            .x_label_formatter(&|v| decade_label(*v, "Hz"))
            .y_label_formatter(&|v| format!("{v:.0}°"))
            .label_style(style(12))
            .y_desc("phase")
            .x_desc("frequency")
            .axis_desc_style(style(13))
            .draw()
            .ok()?;
        phase
            .draw_series(LineSeries::new(
                sweep.iter().map(|p| (p.frequency_hz, p.phase_deg)),
                INK.stroke_width(2),
            ))
            .ok()?;
        root.present().ok()?;
    }
    Some(finish(svg))
}

/// Signed logarithm for the pole–zero map: linear inside ±`unit`, then one axis unit per
/// decade, so the ticks fall on 0, ±unit, ±10·unit, … exactly.
fn slog(x: f64, unit: f64) -> f64 {
    let m = x.abs() / unit;
    if m <= 1.0 { x / unit } else { x.signum() * (1.0 + m.log10()) }
}

fn unslog(v: f64, unit: f64) -> f64 {
    if v.abs() <= 1.0 { v * unit } else { v.signum() * unit * 10f64.powf(v.abs() - 1.0) }
}

/// The pole–zero map on signed-log axes.
///
/// Long because it is one plotters drawing sequence (axes, grid, poles, zeros, labels on
/// one chart context).
fn pole_zero(a: &Analysis) -> Option<String> {
    let all: Vec<&RootHz> = a.poles.iter().chain(a.zeros.iter()).collect();
    if all.is_empty() {
        return None;
    }
    // Unit: the power of ten a decade below the smallest non-zero magnitude.
    let smallest =
        all.iter().map(|r| r.magnitude_hz()).filter(|m| *m > 0.0).fold(f64::MAX, f64::min);
    let unit = if smallest < f64::MAX { 10f64.powf(smallest.log10().floor() - 1.0) } else { 1.0 };
    let reach_x = all.iter().map(|r| slog(r.re_hz.abs(), unit)).fold(2.0, f64::max).ceil() + 0.5;
    let reach_y = all.iter().map(|r| slog(r.im_hz.abs(), unit)).fold(2.0, f64::max).ceil() + 0.5;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (860, 420)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .margin(14)
            .x_label_area_size(34)
            .y_label_area_size(80)
            .build_cartesian_2d(-reach_x..reach_x, -reach_y..reach_y)
            .ok()?;
        // Every decade when they fit, every other one on wide maps.
        let step = if reach_x > 7.0 { 2 } else { 1 };
        let tick = move |v: f64| -> String {
            if v.abs() < 1e-9 {
                return "0".into();
            }
            if (v - v.round()).abs() > 1e-9 || (v.round() as i64).abs() % step != 0 {
                return String::new();
            }
            si(unslog(v, unit), "Hz", 2)
        };
        chart
            .configure_mesh()
            .light_line_style(WHITE)
            .bold_line_style(PALE)
            .axis_style(MID)
            .x_labels((2.0 * reach_x) as usize + 1)
            .y_labels((2.0 * reach_y) as usize + 1)
            .x_label_formatter(&|v| tick(*v))
            .y_label_formatter(&|v| {
                let t = tick(*v);
                if t.is_empty() || t == "0" {
                    t
                } else if *v < 0.0 {
                    format!("−j{}", t.trim_start_matches('−'))
                } else {
                    format!("j{t}")
                }
            })
            .label_style(style(11))
            .x_desc("real part, s/2π (left half-plane: stable)")
            .axis_desc_style(style(12))
            .draw()
            .ok()?;
        chart
            .draw_series(LineSeries::new([(0.0, -reach_y), (0.0, reach_y)], MID.stroke_width(1)))
            .ok()?;
        chart
            .draw_series(LineSeries::new([(-reach_x, 0.0), (reach_x, 0.0)], MID.stroke_width(1)))
            .ok()?;
        let xy = |r: &RootHz| (slog(r.re_hz, unit), slog(r.im_hz, unit));
        chart
            .draw_series(a.poles.iter().map(|p| Cross::new(xy(p), 7, INK.stroke_width(2))))
            .ok()?;
        chart
            .draw_series(a.zeros.iter().map(|z| Circle::new(xy(z), 6, INK.stroke_width(2))))
            .ok()?;
        // Multiplicity of coincident roots.
        for list in [&a.poles, &a.zeros] {
            let mut seen: Vec<(RootHz, usize)> = Vec::new();
            for r in list.iter() {
                match seen.iter_mut().find(|(s, _)| s == r) {
                    Some((_, n)) => *n += 1,
                    None => seen.push((*r, 1)),
                }
            }
            for (r, n) in seen.into_iter().filter(|(_, n)| *n > 1) {
                let (x, y) = xy(&r);
                chart
                    .draw_series(std::iter::once(Text::new(
                        format!("×{n}"),
                        (x + 0.08, y + 0.25),
                        style(11),
                    )))
                    .ok()?;
            }
        }
        root.present().ok()?;
    }
    Some(finish(svg))
}

fn shares(a: &Analysis) -> Option<String> {
    let mut rows: Vec<(String, f64, bool)> = Vec::new();
    for c in &a.high.octc.caps {
        rows.push((c.part.clone(), c.share, true));
    }
    for c in &a.low.sctc.caps {
        rows.push((c.part.clone(), c.share, false));
    }
    if rows.is_empty() {
        return None;
    }
    let n = rows.len();
    let height = 60 + 26 * n as u32;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (860, height)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .margin(14)
            .x_label_area_size(0)
            .y_label_area_size(0)
            .build_cartesian_2d(-45.0..112.0, -0.7..n as f64)
            .ok()?;
        for k in 0..=5 {
            let x = k as f64 * 20.0;
            chart
                .draw_series(LineSeries::new([(x, 0.0), (x, n as f64)], PALE.stroke_width(1)))
                .ok()?;
            chart
                .draw_series(std::iter::once(Text::new(
                    format!("{x:.0} %"),
                    (x - 2.0, -0.15),
                    style(11),
                )))
                .ok()?;
        }
        chart
            .draw_series(rows.iter().enumerate().map(|(i, (part, _, high))| {
                let y = (n - 1 - i) as f64;
                let side = if *high { "f_H" } else { "f_L" };
                Text::new(format!("{part} ({side})"), (-44.0, y + 0.72), style(12))
            }))
            .ok()?;
        chart
            .draw_series(rows.iter().enumerate().map(|(i, (_, share, high))| {
                let y = (n - 1 - i) as f64;
                let fill = if *high { INK } else { MID };
                Rectangle::new([(0.0, y + 0.2), (share * 100.0, y + 0.8)], fill.filled())
            }))
            .ok()?;
        chart
            .draw_series(rows.iter().enumerate().map(|(i, (_, share, _))| {
                let y = (n - 1 - i) as f64;
                Text::new(
                    format!("{:.1} %", share * 100.0),
                    (share * 100.0 + 1.0, y + 0.72),
                    style(11),
                )
            }))
            .ok()?;
        root.present().ok()?;
    }
    Some(finish(svg))
}

/// Before and after, overlaid: magnitude and phase of the exact response of two revisions,
/// the earlier one grey and dashed, the later one black and solid, with a legend naming
/// each. None when either side has fewer than two sweep points.
///
/// Long because it is one plotters drawing sequence: both panels share the frequency axis,
/// the two traces and the legend.
pub fn bode_overlay(
    before: &[SweepPoint],
    after: &[SweepPoint],
    (before_label, after_label): (&str, &str),
) -> Option<String> {
    if before.len() < 2 || after.len() < 2 {
        return None;
    }
    let both = || before.iter().chain(after.iter());
    let f0 = both().map(|p| p.frequency_hz).fold(f64::MAX, f64::min);
    let f1 = both().map(|p| p.frequency_hz).fold(f64::MIN, f64::max);
    let mag_max = both().map(|p| p.magnitude_db).fold(f64::MIN, f64::max);
    let top = (mag_max / 10.0).ceil() * 10.0 + 5.0;
    let bottom =
        (top - 80.0).max(both().map(|p| p.magnitude_db).fold(f64::MAX, f64::min).floor() - 5.0);
    let ph_min = both().map(|p| p.phase_deg).fold(f64::MAX, f64::min);
    let ph_max = both().map(|p| p.phase_deg).fold(f64::MIN, f64::max);
    let (ph_lo, ph_hi) = ((ph_min / 45.0).floor() * 45.0, (ph_max / 45.0).ceil() * 45.0 + 1.0);
    let earlier = MID.stroke_width(2);
    let later = INK.stroke_width(2);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (860, 560)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let (upper, lower) = root.split_vertically(340);
        let mut mag = ChartBuilder::on(&upper)
            .margin(14)
            .x_label_area_size(28)
            .y_label_area_size(64)
            .build_cartesian_2d((f0..f1).log_scale(), bottom..top)
            .ok()?;
        mag.configure_mesh()
            .light_line_style(PALE.mix(0.5))
            .bold_line_style(PALE)
            .axis_style(MID)
            .x_label_formatter(&|v| decade_label(*v, "Hz"))
            .y_label_formatter(&|v| format!("{v:.0} dB"))
            .label_style(style(12))
            .y_desc("|H|")
            .axis_desc_style(style(13))
            .draw()
            .ok()?;
        let line = |s: &[SweepPoint], f: fn(&SweepPoint) -> f64| -> Vec<(f64, f64)> {
            s.iter().map(|p| (p.frequency_hz, f(p))).collect()
        };
        mag.draw_series(DashedLineSeries::new(line(before, |p| p.magnitude_db), 7, 4, earlier))
            .ok()?;
        mag.draw_series(LineSeries::new(line(after, |p| p.magnitude_db), later)).ok()?;
        // The legend, in the panel's top-right corner, in pixels.
        let (w, _) = upper.dim_in_pixel();
        let x = w as i32 - 300;
        for (row, (label, dashed)) in
            [(before_label, true), (after_label, false)].iter().enumerate()
        {
            let y = 28 + 18 * row as i32;
            let color = if *dashed { MID } else { INK };
            let segments: Vec<(i32, i32)> =
                if *dashed { vec![(x, y), (x + 10, y)] } else { vec![(x, y), (x + 28, y)] };
            upper.draw(&PathElement::new(segments, color.stroke_width(2))).ok()?;
            if *dashed {
                upper
                    .draw(&PathElement::new(vec![(x + 16, y), (x + 28, y)], color.stroke_width(2)))
                    .ok()?;
            }
            upper.draw(&Text::new(label.to_string(), (x + 36, y - 7), style(12))).ok()?;
        }
        let mut phase = ChartBuilder::on(&lower)
            .margin(14)
            .x_label_area_size(30)
            .y_label_area_size(64)
            .build_cartesian_2d((f0..f1).log_scale(), ph_lo..ph_hi)
            .ok()?;
        phase
            .configure_mesh()
            .light_line_style(PALE.mix(0.5))
            .bold_line_style(PALE)
            .axis_style(MID)
            .x_label_formatter(&|v| decade_label(*v, "Hz"))
            .y_label_formatter(&|v| format!("{v:.0}°"))
            .label_style(style(12))
            .y_desc("phase")
            .x_desc("frequency")
            .axis_desc_style(style(13))
            .draw()
            .ok()?;
        phase
            .draw_series(DashedLineSeries::new(line(before, |p| p.phase_deg), 7, 4, earlier))
            .ok()?;
        phase.draw_series(LineSeries::new(line(after, |p| p.phase_deg), later)).ok()?;
        root.present().ok()?;
    }
    Some(finish(svg))
}
