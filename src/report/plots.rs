//! Plots as SVG, drawn with plotters (no system font libraries): the Bode magnitude and
//! phase with the exact −3 dB points, the estimates and the requirement limits marked; the
//! pole–zero map; the time-constant shares.
//!
//! Our style: black and greys only, told apart by line weight and dash so a grey printout
//! reads the same; axis labels carry SI prefixes (1 k, 10 M), never raw exponents. Text
//! uses the font family [`FONT`], which the PDF route embeds.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::analysis::requirements::RequirementCheck;
use crate::analysis::response::SweepPoint;
use crate::analysis::tolerance::Study;
use crate::analysis::{Analysis, RootHz};
use crate::notation::si;

/// The font family of plot text.
pub const FONT: &str = "DejaVu Sans Mono";

pub(super) const INK: RGBColor = RGBColor(20, 20, 20);
pub(super) const MID: RGBColor = RGBColor(110, 110, 110);
pub(super) const PALE: RGBColor = RGBColor(200, 200, 200);

/// A named plot.
pub struct Plot {
    /// File stem and directive name: `bode`, `pole_zero`, `shares`, `schematic`.
    pub name: &'static str,
    /// Caption.
    pub caption: String,
    /// The SVG document (empty for a supplied drawing).
    pub svg: String,
    /// A drawing the design supplies instead of one tauweave draws: it lives in the folder as
    /// an input copy, and the exporters reference or embed that file.
    pub file: Option<Supplied>,
    /// The widest it should be shown, in CSS px, when wider would blow its text up past the
    /// body's: a drawing made at its natural size (the netlist schematic). Typst shows it at
    /// [`PRINT_PT_PER_PX`] pt per px at most. `None`: the full text width.
    pub max_width: Option<f64>,
}

/// Print scale of a drawing with a `max_width`: its 13 px text prints at 8.5 pt, the size of
/// the review's captions and footnotes.
pub const PRINT_PT_PER_PX: f64 = 8.5 / 13.0;

/// A drawing the design supplies (its schematic), as archived in the rendered folder.
#[derive(Clone, Debug)]
pub struct Supplied {
    /// Its path in the folder: `inputs/schematic.svg` or `inputs/schematic.png`.
    pub path: String,
    /// `image/svg+xml` or `image/png`.
    pub mime: &'static str,
    /// Its bytes.
    pub bytes: Vec<u8>,
}

/// Display width of every plot, px: at the PDF's text width its 12–13 px text prints at about
/// the size of the captions and footnotes (8.5 pt).
pub(super) const WIDTH: u32 = 640;

/// Plots are drawn on a grid [`SCALE`] times finer than the size they are shown at, so a
/// trace's coordinates fall between whole display pixels and curves come out smooth at
/// print resolution; the SVG's viewBox keeps the fine grid, its width and height the size.
const SCALE: u32 = 4;

/// A length in display pixels, on the drawing grid.
pub(super) fn px(n: u32) -> u32 {
    n * SCALE
}

pub(super) fn finish(svg: String) -> String {
    // Name a fallback so a browser without the font still draws monospace text.
    let svg = svg
        .replace(&format!("font-family=\"{FONT}\""), &format!("font-family=\"{FONT}, monospace\""));
    let svg = subscripted(&svg);
    // `<svg width="W" height="H" viewBox="0 0 W H"`: the displayed size is W/SCALE × H/SCALE.
    let Some(end) = svg.find('>') else { return svg };
    let head = &svg[..end];
    let number = |key: &str| -> Option<u32> {
        let at = head.find(&format!("{key}=\""))? + key.len() + 2;
        head[at..].split('"').next()?.parse().ok()
    };
    match (number("width"), number("height")) {
        (Some(w), Some(h)) => {
            let fixed = head
                .replacen(&format!("width=\"{w}\""), &format!("width=\"{}\"", w / SCALE), 1)
                .replacen(&format!("height=\"{h}\""), &format!("height=\"{}\"", h / SCALE), 1);
            format!("{fixed}{}", &svg[end..])
        }
        _ => svg,
    }
}

/// The SVG with the engineering symbols of its text set as subscripts (`f_H` → f with a
/// lowered, smaller H), as the report's text sets them.
fn subscripted(svg: &str) -> String {
    let mut out = String::with_capacity(svg.len());
    let mut rest = svg;
    while let Some(open) = rest.find("<text") {
        let Some(tag_end) = rest[open..].find('>').map(|e| open + e + 1) else { break };
        let Some(close) = rest[tag_end..].find("</text>").map(|e| tag_end + e) else { break };
        out.push_str(&rest[..tag_end]);
        let tag = &rest[open..tag_end];
        let size = tag
            .split("font-size=\"")
            .nth(1)
            .and_then(|t| t.split('"').next())
            .and_then(|t| t.parse::<f64>().ok())
            .unwrap_or(12.0);
        for seg in crate::report::symbol_segments(&rest[tag_end..close]) {
            match seg {
                crate::report::Segment::Plain(p) => out.push_str(p),
                crate::report::Segment::Subscripted(base, sub) => out.push_str(&format!(
                    "{base}<tspan baseline-shift=\"sub\" font-size=\"{}\">{sub}</tspan>",
                    (size * 0.75).round()
                )),
            }
        }
        rest = &rest[close..];
    }
    out.push_str(rest);
    out
}

/// Text of `size` display px. (plotters writes a font's size divided by 1.24 into the SVG,
/// so the size asked of it is raised by that much.)
pub(super) fn style(size: u32) -> TextStyle<'static> {
    (FONT, px(size) as f64 * 1.24).into_font().color(&INK)
}

/// The names of every plot a review can hold (`plot(name=…)` accepts these).
pub const PLOTS: &[&str] = &[
    "schematic",
    "logo",
    "bode",
    "pole_zero",
    "shares",
    "noise",
    "noise_shares",
    "transfer",
    "waveform",
    "ports",
    "step",
    "tornado",
    "histograms",
    "what_if",
    "what_if_2",
    "what_if_3",
    "what_if_4",
];

/// Every plot of the review.
pub fn all(a: &Analysis, requirements: &[RequirementCheck], study: Option<&Study>) -> Vec<Plot> {
    let mut out = Vec::new();
    let extra = study.map(|s| (tornado(s), histograms(s, requirements)));
    if let Some(svg) = bode(a, requirements) {
        out.push(Plot { name: "bode", caption: "Bode plot: magnitude and phase of the exact response; the numbered lines are the exact −3 dB points (solid), the time-constant estimates (dashed) and the requirement limits (dotted), each named in the legend with the band and the gain window.".into(), svg, file: None, max_width: None });
    }
    if let Some(svg) = pole_zero(a) {
        out.push(Plot {
            file: None,
            max_width: None,
            name: "pole_zero",
            caption: "Pole–zero map (s/2π): poles ×, zeros ○, on signed logarithmic axes, out to two decades beyond the upper cut-off; roots farther out are listed under the map.".into(),
            svg,
        });
    }
    if let Some(svg) = shares(a) {
        out.push(Plot { name: "shares", caption: "Share of each capacitor in the open-circuit time-constant sum (upper cut-off) and in Σ 1/τ of the short-circuit constants (lower cut-off).".into(), svg, file: None, max_width: None });
    }
    if let Some(svg) = a.noise.as_ref().and_then(noise) {
        out.push(Plot { name: "noise", caption: "Noise over the sweep: the noise figure from the design's source (at 290 K), and the noise referred to the source EMF in dB relative to 1 nV/√Hz; the operating band is shaded and the spot frequency dashed. Where the gain falls away the referred noise climbs out of the frame.".into(), svg, file: None, max_width: None });
    }
    if let Some(svg) = a.noise.as_ref().and_then(noise_shares) {
        out.push(Plot { name: "noise_shares", caption: "Who makes the noise: each part's share of the output noise by mechanism, at the spot frequency (dark) and integrated over the band (grey), largest first; the smallest are summed as others.".into(), svg, file: None, max_width: None });
    }
    if let Some(l) = &a.large_signal {
        if let Some(svg) = crate::report::signal_plots::transfer(l) {
            let span = if l.input_amplitude_v.is_some() {
                ", the stated amplitude's span shaded"
            } else {
                ""
            };
            let caption = format!(
                "Quasi-static transfer at mid-band: the output's change from its bias against the source EMF (solid), the small-signal gain's straight line (dashed){span}, and the point on each side where a transistor reaches the edge of its bias region."
            );
            out.push(Plot { name: "transfer", caption, svg, file: None, max_width: None });
        }
        if let Some(svg) = crate::report::signal_plots::waveform(l) {
            out.push(Plot { name: "waveform", caption: "The output over one period at the stated amplitude (solid) beside the sine the small-signal gain alone would give (dashed); the difference is the distortion, any shift the rectified DC.".into(), svg, file: None, max_width: None });
        }
    }
    let asked = |name: &str| requirements.iter().find(|r| r.name == name).and_then(|r| r.min);
    let limits = crate::report::port_plots::PortLimits {
        input_return_loss_db: asked("input_return_loss"),
        output_return_loss_db: asked("output_return_loss"),
        mu: asked("stability"),
    };
    if let Some(p) = &a.ports {
        if let Some(svg) = crate::report::port_plots::ports(p, limits) {
            let band = p.band.map_or(String::new(), |b| {
                format!(
                    ", the band {} … {} shaded",
                    crate::notation::si(b.from_hz, "Hz", 4),
                    crate::notation::si(b.to_hz, "Hz", 4)
                )
            });
            let mut wanted = Vec::new();
            if limits.input_return_loss_db.is_some() || limits.output_return_loss_db.is_some() {
                wanted.push("the required minimum return loss (long dashes: input, short: output)");
            }
            if limits.mu.is_some_and(|m| m > 1.0) {
                wanted.push("the required minimum μ (long dashes)");
            }
            let wanted = if wanted.is_empty() {
                String::new()
            } else {
                format!(" Drawn across: {}.", wanted.join("; "))
            };
            let caption = format!(
                "The stage in the reference impedance: return loss at the input (solid) and output (dashed){band}, and the stability factor μ (unconditionally stable above the dotted line at 1; shaded where it is not).{wanted}"
            );
            out.push(Plot { name: "ports", caption, svg, file: None, max_width: None });
        }
    }
    if let Some(svg) = a.step.as_ref().and_then(crate::report::port_plots::step) {
        out.push(Plot { name: "step", caption: "Step response from the exact poles and zeros, as a fraction of its final value: the 10 % and 90 % levels dashed, the settling band shaded.".into(), svg, file: None, max_width: None });
    }
    if let Some((tornado, histograms)) = extra {
        if let Some(svg) = tornado {
            out.push(Plot { name: "tornado", caption: "Tornado chart: how far each toleranced lever moves the upper cut-off at its tolerance limit (S·t), largest first; dark bars raise f_H, grey bars lower it.".into(), svg, file: None, max_width: None });
        }
        if let Some(svg) = histograms {
            let flatness =
                if a.midband.band.is_some() { ", the gain flatness over the band" } else { "" };
            let caption = format!(
                "Monte Carlo histograms of the mid-band gain{flatness} and both cut-offs, each in its requirement's unit; a limit near the data is dotted, one far off is named at the edge."
            );
            out.push(Plot { name: "histograms", caption, svg, file: None, max_width: None });
        }
    }
    out
}

/// The noise figure panel, dB.
const NOISE_FIGURE: Axis =
    Axis { x_label_area: 28, y_desc: "noise figure", y_unit: " dB", x_desc: false, decimals: 0 };

/// The input-referred density panel, dB relative to 1 nV/√Hz.
const INPUT_NOISE: Axis =
    Axis { x_label_area: 44, y_desc: "dB re 1 nV/√Hz", y_unit: "", x_desc: true, decimals: 0 };

/// Noise figure and input-referred density over the sweep, each panel framed to 30 dB
/// above its value at the spot frequency so the band stays readable.
fn noise(n: &crate::analysis::noise::NoiseReport) -> Option<String> {
    let nf: Vec<(f64, f64)> =
        n.sweep.iter().filter_map(|p| Some((p.frequency_hz, p.noise_figure_db?))).collect();
    let input: Vec<(f64, f64)> = n
        .sweep
        .iter()
        .filter_map(|p| Some((p.frequency_hz, 20.0 * (p.input_density_v_per_rthz? / 1e-9).log10())))
        .collect();
    if nf.len() < 2 || input.len() < 2 {
        return None;
    }
    let (f0, f1) = (n.sweep.first()?.frequency_hz, n.sweep.last()?.frequency_hz);
    let spot_nf = n.noise_figure_db?;
    let spot_in = 20.0 * (n.input_density_v_per_rthz? / 1e-9).log10();
    let frame = |points: &[(f64, f64)], spot: f64| {
        let lowest = points.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
        let bottom = (lowest.min(spot) / 5.0).floor() * 5.0 - 5.0;
        (bottom.min(0.0).max(lowest.min(spot) - 10.0), ((spot + 30.0) / 5.0).ceil() * 5.0)
    };
    // A noise figure is never below 0 dB.
    let (nf_frame, in_frame) = ((0.0, frame(&nf, spot_nf).1), frame(&input, spot_in));
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (px(WIDTH), px(480))).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let (upper, lower) = root.split_vertically(px(230));
        for (area, axis, points, (bottom, top)) in
            [(&upper, NOISE_FIGURE, &nf, nf_frame), (&lower, INPUT_NOISE, &input, in_frame)]
        {
            let mut chart = frequency_panel(area, (f0, f1), (bottom, top), axis)?;
            if let Some(b) = &n.band {
                let (from, to) = (b.start_hz.max(f0), b.stop_hz.min(f1));
                if from < to && b.basis == crate::analysis::noise::BandBasis::Stated {
                    chart
                        .draw_series(std::iter::once(Rectangle::new(
                            [(from, bottom), (to, top)],
                            PALE.mix(0.45).filled(),
                        )))
                        .ok()?;
                }
            }
            chart
                .draw_series(DashedLineSeries::new(
                    [(n.spot_frequency_hz, bottom), (n.spot_frequency_hz, top)],
                    px(3),
                    px(5),
                    MID.stroke_width(px(1)),
                ))
                .ok()?;
            // Drawn only where inside the frame: negated, the ceiling is a floor.
            for run in above(points.iter().map(|&(f, v)| (f, -v)), -top) {
                let run: Vec<(f64, f64)> =
                    run.into_iter().map(|(f, v)| (f, -v)).filter(|p| p.1 >= bottom).collect();
                chart.draw_series(LineSeries::new(run, INK.stroke_width(px(2)))).ok()?;
            }
        }
        root.present().ok()?;
    }
    Some(finish(svg))
}

/// The levers that move the upper cut-off most at their tolerance limits, largest first.
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
    let bars: Vec<Bar> = rows
        .into_iter()
        .map(|(name, v)| Bar {
            label: name,
            value: v,
            shown: crate::notation::signed_percent(v / 100.0, 3),
            dark: v >= 0.0,
        })
        .collect();
    bar_chart(&[(None, bars)], None, "change of f_H at the tolerance limit (dark: raises it)")
}

/// One bar of a bar chart.
struct Bar {
    /// The row's name.
    label: String,
    /// Its length, in the axis unit (%).
    value: f64,
    /// Its value as written beside the name.
    shown: String,
    /// Dark (black) rather than grey.
    dark: bool,
}

/// Horizontal bars in groups, each group under an optional heading: names and values in a
/// column on the left, bars from zero on a percentage axis below, gridlines pale. `range`
/// fixes the axis; without it the axis spans the values and zero, on a 1-2-5 step.
fn bar_chart(
    groups: &[(Option<&str>, Vec<Bar>)],
    range: Option<(f64, f64)>,
    desc: &str,
) -> Option<String> {
    const ROW: u32 = 24;
    const HEAD: u32 = 22;
    let values = groups.iter().flat_map(|g| g.1.iter().map(|b| b.value));
    let (lo, hi) = range.unwrap_or_else(|| {
        let (a, b) = values.fold((0.0f64, 0.0f64), |(a, b), v| (a.min(v), b.max(v)));
        let pad = (b - a).max(1e-9) * 0.06;
        (if a < 0.0 { a - pad } else { 0.0 }, if b > 0.0 { b + pad } else { 0.0 })
    });
    let step = nice_step((hi - lo) / 5.0);
    let chars = |t: &str| t.chars().count() as u32;
    let name_w = groups.iter().flat_map(|g| &g.1).map(|b| chars(&b.label)).max().unwrap_or(4);
    let value_w = groups.iter().flat_map(|g| &g.1).map(|b| chars(&b.shown)).max().unwrap_or(4);
    let heads = groups.iter().filter(|g| g.0.is_some()).count() as u32;
    let rows = groups.iter().map(|g| g.1.len()).sum::<usize>() as u32;
    let height = 20 + HEAD * heads + ROW * rows + 50;
    // Monospace at 13 px: about 7.9 px a character.
    // Room on the right for half the last tick label ("100 %").
    let (left, right) = (12 + (name_w + value_w + 3) * 79 / 10, WIDTH - 34);
    let x = |v: f64| left as f64 + (v - lo) / (hi - lo) * (right - left) as f64;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (px(WIDTH), px(height))).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let at = |x: f64, y: f64| ((x * SCALE as f64) as i32, (y * SCALE as f64) as i32);
        let (top, bottom) = (14.0, (height - 50) as f64);
        // Gridlines over each group's rows (headings stay clear), tick labels below.
        let first = (lo / step).ceil() as i64;
        let last = (hi / step).floor() as i64;
        let mut spans = Vec::new();
        let mut y = top + 2.0;
        for (heading, bars) in groups {
            y += if heading.is_some() { HEAD as f64 } else { 0.0 };
            spans.push((y, y + (ROW as usize * bars.len()) as f64));
            y += (ROW as usize * bars.len()) as f64;
        }
        for k in first..=last {
            let v = k as f64 * step;
            let colour = if k == 0 { MID } else { PALE };
            for &(a, b) in &spans {
                root.draw(&PathElement::new(
                    vec![at(x(v), a), at(x(v), b)],
                    colour.stroke_width(px(1)),
                ))
                .ok()?;
            }
            let text = if k == 0 {
                "0".to_string()
            } else {
                crate::notation::plain(v, 3).replacen('-', "−", 1)
            };
            let centred = style(12).pos(Pos::new(HPos::Center, VPos::Top));
            root.draw(&Text::new(format!("{text} %"), at(x(v), bottom + 6.0), centred)).ok()?;
        }
        let centred = style(13).pos(Pos::new(HPos::Center, VPos::Top));
        let middle = (left + right) as f64 / 2.0;
        root.draw(&Text::new(desc.to_string(), at(middle, bottom + 26.0), centred)).ok()?;
        let mut y = top + 2.0;
        for (heading, bars) in groups {
            if let Some(h) = heading {
                root.draw(&Text::new(h.to_string(), at(12.0, y + 4.0), style(13))).ok()?;
                y += HEAD as f64;
            }
            for b in bars {
                root.draw(&Text::new(b.label.clone(), at(12.0, y + 5.0), style(13))).ok()?;
                let value = style(13).pos(Pos::new(HPos::Right, VPos::Top));
                root.draw(&Text::new(b.shown.clone(), at(left as f64 - 10.0, y + 5.0), value))
                    .ok()?;
                let fill = if b.dark { INK } else { MID };
                let (a, c) = (x(0.0_f64.clamp(lo, hi)), x(b.value.clamp(lo, hi)));
                // A bar too short to see is drawn a hair wide, so every row shows one.
                let (a, c) = if (c - a).abs() < 1.0 {
                    (a, a + if b.value < 0.0 { -1.0 } else { 1.0 })
                } else {
                    (a, c)
                };
                root.draw(&Rectangle::new(
                    [at(a.min(c), y + 4.0), at(a.max(c), y + ROW as f64 - 4.0)],
                    fill.filled(),
                ))
                .ok()?;
                y += ROW as f64;
            }
        }
        root.present().ok()?;
    }
    Some(finish(svg))
}

/// `text` broken at spaces into lines of at most `width` characters (a longer word stands on
/// a line of its own); no lines for empty text.
fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    for word in text.split(' ').filter(|w| !w.is_empty()) {
        match lines.last_mut() {
            Some(line) if line.chars().count() + 1 + word.chars().count() <= width => {
                line.push(' ');
                line.push_str(word);
            }
            _ => lines.push(word.to_string()),
        }
    }
    lines
}

/// A step of 1, 2 or 5 times a power of ten near `raw`.
fn nice_step(raw: f64) -> f64 {
    let raw = raw.max(1e-12);
    let power = 10f64.powf(raw.log10().floor());
    let m = raw / power;
    let f = if m <= 1.0 {
        1.0
    } else if m <= 2.0 {
        2.0
    } else if m <= 5.0 {
        5.0
    } else {
        10.0
    };
    f * power
}

/// One histogram panel: the requirement it belongs to, the axis label, the unit its axis is
/// written in, the values and the limits, both in that unit.
struct Panel {
    label: &'static str,
    unit: &'static str,
    values: Vec<f64>,
    limits: Vec<f64>,
}

/// How a panel reads its figure from one run.
type FigureOf = fn(&crate::analysis::Metrics) -> Option<f64>;

/// The Monte Carlo panels, each in its requirement's own unit: the gain and the flatness in
/// dB, the cut-offs in Hz.
fn histogram_panels(s: &Study, requirements: &[RequirementCheck]) -> Vec<Panel> {
    let Some(mc) = s.monte_carlo.as_ref() else { return Vec::new() };
    let db = |v: f64| (v > 0.0).then(|| 20.0 * v.log10());
    let figures: [(&str, &str, &str, FigureOf); 4] = [
        ("midband_gain", "mid-band gain (dB)", "dB", |m| {
            (m.gain > 0.0).then(|| 20.0 * m.gain.log10())
        }),
        ("gain_flatness", "gain flatness over the band (dB)", "dB", |m| m.flatness_db),
        ("upper_cutoff", "f_H", "Hz", |m| m.f_high),
        ("lower_cutoff", "f_L", "Hz", |m| m.f_low),
    ];
    figures
        .into_iter()
        .filter_map(|(key, label, unit, of)| {
            let values: Vec<f64> = mc.samples.iter().flatten().filter_map(of).collect();
            let limits = requirements
                .iter()
                .filter(|r| r.name == key)
                .flat_map(|r| [r.min, r.max])
                .flatten()
                .filter_map(|l| if key == "midband_gain" { db(l) } else { Some(l) })
                .collect();
            (values.len() >= 2).then_some(Panel { label, unit, values, limits })
        })
        .collect()
}

/// The Monte Carlo histograms, one panel per figure in its requirement's unit, the data
/// filling the frame; a limit within half the data's spread of it widens the axis and is
/// drawn as a dotted line, one farther off is named at the edge with an arrow.
///
/// Long because it is one plotters drawing sequence threading the same drawing area and
/// chart contexts from the panel layout to the labels.
fn histograms(s: &Study, requirements: &[RequirementCheck]) -> Option<String> {
    let panels = histogram_panels(s, requirements);
    if panels.is_empty() {
        return None;
    }
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (px(WIDTH), px(200 * panels.len() as u32)))
            .into_drawing_area();
        root.fill(&WHITE).ok()?;
        let areas = root.split_evenly((panels.len(), 1));
        for (panel, area) in panels.iter().zip(areas.iter()) {
            let (values, limits, unit) = (&panel.values, &panel.limits, panel.unit);
            let lo = values.iter().copied().fold(f64::MAX, f64::min);
            let hi = values.iter().copied().fold(f64::MIN, f64::max);
            // Limits within half a spread of the data widen the axis; farther ones are
            // named at the edge instead of squashing the histogram.
            let spread = (hi - lo).max(hi.abs() * 1e-6);
            let (near, far): (Vec<f64>, Vec<f64>) =
                limits.iter().partition(|&&l| l >= lo - 0.5 * spread && l <= hi + 0.5 * spread);
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
            let axis = |v: f64| {
                if unit == "dB" {
                    format!("{} dB", crate::notation::plain(v, 3))
                } else {
                    si(v, unit, 3)
                }
            };
            let mut chart = ChartBuilder::on(area)
                .margin(px(12))
                .margin_right(px(40))
                .x_label_area_size(px(40))
                .y_label_area_size(px(50))
                .build_cartesian_2d(lo..hi, 0.0..top)
                .ok()?;
            chart
                .configure_mesh()
                .light_line_style(WHITE.stroke_width(px(1)))
                .bold_line_style(PALE.stroke_width(px(1)))
                .axis_style(MID.stroke_width(px(1)))
                .set_all_tick_mark_size(px(5))
                .x_labels(6)
                .x_label_formatter(&|v| axis(*v))
                .y_label_formatter(&|v| format!("{v:.0}"))
                .label_style(style(12))
                .x_desc(panel.label.to_string())
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
                        px(2),
                        px(2),
                        INK.stroke_width(px(2)),
                    ))
                    .ok()?;
            }
            for l in far {
                let (x, text) = if l > hi {
                    (hi - (hi - lo) * 0.28, format!("limit {} →", axis(l)))
                } else {
                    (lo + (hi - lo) * 0.01, format!("← limit {}", axis(l)))
                };
                chart
                    .draw_series(std::iter::once(Text::new(text, (x, top * 0.93), style(12))))
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

/// The magnitude axis of a Bode panel, dB: from the next 10 dB above the trace (or `above`,
/// when higher) plus `headroom`, down at most 80 dB, or to 5 dB under the trace's lowest.
fn magnitude_range<'p>(
    points: impl Iterator<Item = &'p SweepPoint> + Clone,
    above: f64,
    headroom: f64,
) -> (f64, f64) {
    let high = points.clone().map(|p| p.magnitude_db).fold(f64::MIN, f64::max).max(above);
    let top = (high / 10.0).ceil() * 10.0 + headroom;
    let low = points.map(|p| p.magnitude_db).fold(f64::MAX, f64::min);
    ((top - 80.0).max(low.floor() - 5.0), top)
}

/// The phase axis of a Bode panel, degrees: whole multiples of 45° around the trace.
fn phase_range<'p>(points: impl Iterator<Item = &'p SweepPoint> + Clone) -> (f64, f64) {
    let low = points.clone().map(|p| p.phase_deg).fold(f64::MAX, f64::min);
    let high = points.map(|p| p.phase_deg).fold(f64::MIN, f64::max);
    ((low / 45.0).floor() * 45.0, (high / 45.0).ceil() * 45.0 + 1.0)
}

/// How a frequency panel labels its axes.
pub(super) struct Axis {
    /// Height of the frequency labels, display pixels.
    pub(super) x_label_area: u32,
    /// The vertical axis' name.
    pub(super) y_desc: &'static str,
    /// What follows a vertical tick's number (` dB`, `°`).
    pub(super) y_unit: &'static str,
    /// True to name the frequency axis (the lowest panel).
    pub(super) x_desc: bool,
    /// Decimals of the vertical ticks.
    pub(super) decimals: usize,
}

/// The magnitude panel of every Bode plot: |H| in dB, the frequency labelled below the phase.
const MAGNITUDE: Axis =
    Axis { x_label_area: 28, y_desc: "|H|", y_unit: " dB", x_desc: false, decimals: 0 };

/// The phase panel of every Bode plot, with the frequency axis named.
const PHASE: Axis =
    Axis { x_label_area: 44, y_desc: "phase", y_unit: "°", x_desc: true, decimals: 0 };

/// A chart on a log-frequency axis.
pub(super) type FrequencyChart<'a, 'b> = ChartContext<
    'a,
    SVGBackend<'b>,
    Cartesian2d<LogCoord<f64>, plotters::coord::types::RangedCoordf64>,
>;

/// A Bode panel on `area`: frequency `f` on a log axis, `y` linear, the house mesh and labels.
pub(super) fn frequency_panel<'a, 'b>(
    area: &'a DrawingArea<SVGBackend<'b>, plotters::coord::Shift>,
    f: (f64, f64),
    y: (f64, f64),
    axis: Axis,
) -> Option<FrequencyChart<'a, 'b>> {
    let mut chart = ChartBuilder::on(area)
        .margin(px(14))
        .margin_right(px(34))
        .x_label_area_size(px(axis.x_label_area))
        .y_label_area_size(px(76))
        .build_cartesian_2d((f.0..f.1).log_scale(), y.0..y.1)
        .ok()?;
    let y_label = |v: &f64| format!("{v:.*}{}", axis.decimals, axis.y_unit).replace('-', "−");
    // Every decade while the labels fit (about 62 px each), else every second one.
    let every = if (f.1 / f.0).log10() * 62.0 > (WIDTH - 76 - 48) as f64 { 2 } else { 1 };
    let x_label = |v: &f64| {
        let k = v.log10().round() as i64;
        if k.rem_euclid(every) == 0 { decade_label(*v, "Hz") } else { String::new() }
    };
    let mut mesh = chart.configure_mesh();
    mesh.light_line_style(PALE.mix(0.5).stroke_width(px(1)))
        .bold_line_style(PALE.stroke_width(px(1)))
        .axis_style(MID.stroke_width(px(1)))
        .set_all_tick_mark_size(px(5))
        .x_label_formatter(&x_label)
        .y_label_formatter(&y_label)
        .label_style(style(12))
        .y_desc(axis.y_desc)
        .axis_desc_style(style(13));
    if axis.x_desc {
        mesh.x_desc("frequency");
    }
    mesh.draw().ok()?;
    Some(chart)
}

/// The runs of a log-frequency trace at or above `floor`, each cut where it crosses the
/// floor (the crossing interpolated in log frequency), so a plot can leave its frame.
fn above(points: impl Iterator<Item = (f64, f64)>, floor: f64) -> Vec<Vec<(f64, f64)>> {
    let mut runs: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut current: Vec<(f64, f64)> = Vec::new();
    let mut last: Option<(f64, f64)> = None;
    for (f, y) in points {
        if let Some((f0, y0)) = last {
            if (y0 >= floor) != (y >= floor) {
                let t = (floor - y0) / (y - y0);
                let fc = 10f64.powf(f0.log10() + t * (f.log10() - f0.log10()));
                current.push((fc, floor));
                if y < floor {
                    runs.push(std::mem::take(&mut current));
                }
            }
        }
        if y >= floor {
            current.push((f, y));
        }
        last = Some((f, y));
    }
    if current.len() >= 2 {
        runs.push(current);
    }
    runs.retain(|r| r.len() >= 2);
    runs
}

/// How a vertical marker of the Bode plot is drawn, and what the legend calls it.
#[derive(Clone, Copy, Debug, PartialEq)]
enum MarkKind {
    /// An exact −3 dB point: solid.
    Exact,
    /// A time-constant estimate: dashed.
    Estimate,
    /// A requirement limit: dotted.
    Limit,
}

/// A vertical marker: where, how, and its legend text.
#[derive(Clone, Debug, PartialEq)]
struct Mark {
    f: f64,
    kind: MarkKind,
    text: String,
}

/// The markers of the Bode plot, numbered in order of frequency.
fn bode_marks(a: &Analysis, requirements: &[RequirementCheck]) -> Vec<Mark> {
    let mut marks = Vec::new();
    let mut add = |f: Option<f64>, kind, text: String| {
        if let Some(f) = f.filter(|f| f.is_finite() && *f > 0.0) {
            marks.push(Mark { f, kind, text });
        }
    };
    let f = |v: f64| si(v, "Hz", 4);
    add(
        a.low.f3db_hz,
        MarkKind::Exact,
        format!("f_L = {}, exact −3 dB", a.low.f3db_hz.map_or_else(String::new, f)),
    );
    add(
        a.high.f3db_hz,
        MarkKind::Exact,
        format!("f_H = {}, exact −3 dB", a.high.f3db_hz.map_or_else(String::new, f)),
    );
    add(
        a.low.sctc.f_estimate_hz,
        MarkKind::Estimate,
        format!(
            "Σ 1/(2πτ) = {}, short-circuit estimate of f_L",
            a.low.sctc.f_estimate_hz.map_or_else(String::new, f)
        ),
    );
    add(
        a.high.octc.f_estimate_hz,
        MarkKind::Estimate,
        format!(
            "1/(2π Στ) = {}, open-circuit estimate of f_H",
            a.high.octc.f_estimate_hz.map_or_else(String::new, f)
        ),
    );
    for r in requirements.iter().filter(|r| r.unit == "Hz") {
        let what = if r.name == "upper_cutoff" { "f_H" } else { "f_L" };
        add(
            r.min,
            MarkKind::Limit,
            format!("{what} ≥ {}, required", r.min.map_or_else(String::new, f)),
        );
        add(
            r.max,
            MarkKind::Limit,
            format!("{what} ≤ {}, required", r.max.map_or_else(String::new, f)),
        );
    }
    marks.sort_by(|x, y| x.f.total_cmp(&y.f));
    marks
}

/// A row for each tag so that no two tags in a row are closer than `width` (pixels):
/// first fit, left to right.
fn tag_rows(xs: &[i32], width: i32) -> Vec<usize> {
    let mut ends: Vec<i32> = Vec::new();
    xs.iter()
        .map(|&x| match ends.iter().position(|&end| x >= end) {
            Some(row) => {
                ends[row] = x + width;
                row
            }
            None => {
                ends.push(x + width);
                ends.len() - 1
            }
        })
        .collect()
}

/// The line style of a marker kind: (dash, gap) in display pixels; solid has no gap.
fn dashes(kind: MarkKind) -> (u32, u32) {
    match kind {
        MarkKind::Exact => (1000, 0),
        MarkKind::Estimate => (7, 4),
        MarkKind::Limit => (2, 3),
    }
}

/// The Bode plot: magnitude and phase of the exact response. Vertical markers (exact −3 dB
/// points solid, time-constant estimates dashed, requirement limits dotted) carry a number
/// at the top of the plot, stacked so numbers never overlap, and a legend below the phase
/// explains each; the −3 dB level, the operating band and the required gain window are
/// drawn and named in the legend too.
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
    let marks: Vec<Mark> =
        bode_marks(a, requirements).into_iter().filter(|m| m.f > f0 && m.f < f1).collect();
    let window = requirements
        .iter()
        .find(|r| r.name == "midband_gain")
        .map(|r| (r.min.map(|v| 20.0 * v.log10()), r.max.map(|v| 20.0 * v.log10())));
    let window_top = window.and_then(|w| w.1).unwrap_or(f64::MIN);
    // Headroom above the trace (and the gain window) for the marker numbers.
    let (bottom, top) = magnitude_range(sweep.iter(), window_top, 10.0);
    let (ph_lo, ph_hi) = phase_range(sweep.iter());
    let mid_db = 20.0 * a.midband.gain.abs().log10();
    let level = mid_db - 3.0103;
    // The legend: one line per entry, the line style first.
    let mut legend: Vec<(LegendKey, String)> = vec![
        (LegendKey::Line(2, 1000, 0), "|H|, exact response, every capacitor present".into()),
        (
            LegendKey::Line(1, 3, 5),
            format!(
                "−3 dB below the idealised mid-band gain ({} dB)",
                crate::notation::plain(level, 4)
            ),
        ),
    ];
    if let Some(b) = &a.midband.band {
        legend.push((
            LegendKey::Fill(0.45),
            format!("operating band {} … {}", si(b.from_hz, "Hz", 3), si(b.to_hz, "Hz", 3)),
        ));
    }
    if let Some((lo, hi)) = window {
        let show = |v: Option<f64>| {
            v.map_or("—".to_string(), |v| format!("{} dB", crate::notation::plain(v, 3)))
        };
        legend
            .push((LegendKey::Hatch, format!("required gain window {} … {}", show(lo), show(hi))));
    }
    let legend_rows = legend.len() + marks.len();
    let legend_height = 16 + 17 * legend_rows as u32;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (px(WIDTH), px(514 + legend_height)))
            .into_drawing_area();
        root.fill(&WHITE).ok()?;
        let (upper, rest) = root.split_vertically(px(300));
        let (lower, key) = rest.split_vertically(px(214));
        let mut mag = frequency_panel(&upper, (f0, f1), (bottom, top), MAGNITUDE)?;
        if let Some(b) = &a.midband.band {
            let (from, to) = (b.from_hz.max(f0), b.to_hz.min(f1));
            if from < to {
                mag.draw_series(std::iter::once(Rectangle::new(
                    [(from, bottom), (to, top)],
                    PALE.mix(0.45).filled(),
                )))
                .ok()?;
            }
        }
        if let Some((lo, hi)) = window {
            let (lo, hi) = (lo.unwrap_or(bottom).max(bottom), hi.unwrap_or(top).min(top));
            if lo < hi {
                // Hatched: thin diagonal-free horizontal rules, distinct from the band's fill.
                let steps = 6;
                for k in 0..=steps {
                    let y = lo + (hi - lo) * k as f64 / steps as f64;
                    mag.draw_series(LineSeries::new(
                        [(f0, y), (f1, y)],
                        MID.mix(0.6).stroke_width(px(1)),
                    ))
                    .ok()?;
                }
            }
        }
        mag.draw_series(DashedLineSeries::new(
            [(f0, level), (f1, level)],
            px(3),
            px(5),
            MID.stroke_width(px(1)),
        ))
        .ok()?;
        for m in &marks {
            let (dash, gap) = dashes(m.kind);
            mag.draw_series(DashedLineSeries::new(
                [(m.f, bottom), (m.f, top)],
                px(dash),
                px(gap),
                INK.stroke_width(px(1)),
            ))
            .ok()?;
        }
        // The trace leaves the frame where it falls below it, never runs along its floor.
        for segment in above(sweep.iter().map(|p| (p.frequency_hz, p.magnitude_db)), bottom) {
            mag.draw_series(LineSeries::new(segment, INK.stroke_width(px(2)))).ok()?;
        }
        // The marker numbers, in the headroom at the top, stacked where they would touch.
        // Each number beside its line, on the side where no other line runs through it.
        let xs: Vec<i32> = marks.iter().map(|m| mag.backend_coord(&(m.f, top)).0).collect();
        let starts: Vec<i32> = xs
            .iter()
            .enumerate()
            .map(|(k, &x)| {
                let w = px(8 * (k + 1).to_string().len() as u32) as i32;
                let gap = px(3) as i32;
                let clear = |lo: i32, hi: i32| {
                    xs.iter().enumerate().all(|(j, &o)| j == k || o < lo || o > hi)
                };
                if clear(x, x + gap + w + gap) || !clear(x - gap - w - gap, x) {
                    x + gap
                } else {
                    x - gap - w
                }
            })
            .collect();
        let rows = tag_rows(&starts, px(22) as i32);
        for (k, ((m, x), row)) in marks.iter().zip(&starts).zip(&rows).enumerate() {
            let (_, y_top) = mag.backend_coord(&(m.f, top));
            let pos = (*x, y_top + px(3) as i32 + px(14) as i32 * *row as i32);
            upper.draw(&Text::new(format!("{}", k + 1), pos, style(12))).ok()?;
        }
        let mut phase = frequency_panel(&lower, (f0, f1), (ph_lo, ph_hi), PHASE)?;
        for m in &marks {
            let (dash, gap) = dashes(m.kind);
            phase
                .draw_series(DashedLineSeries::new(
                    [(m.f, ph_lo), (m.f, ph_hi)],
                    px(dash),
                    px(gap),
                    INK.stroke_width(px(1)),
                ))
                .ok()?;
        }
        phase
            .draw_series(LineSeries::new(
                sweep.iter().map(|p| (p.frequency_hz, p.phase_deg)),
                INK.stroke_width(px(2)),
            ))
            .ok()?;
        let entries: Vec<(LegendKey, String)> = legend
            .into_iter()
            .chain(marks.iter().enumerate().map(|(k, m)| {
                let (dash, gap) = dashes(m.kind);
                (LegendKey::Numbered(k + 1, dash, gap), m.text.clone())
            }))
            .collect();
        draw_legend(&key, &entries)?;
        root.present().ok()?;
    }
    Some(finish(svg))
}

/// What stands before a legend entry's text.
enum LegendKey {
    /// A line sample: width, dash and gap in display pixels (gap 0: solid).
    Line(u32, u32, u32),
    /// A grey fill of this opacity.
    Fill(f64),
    /// The hatching of the gain window.
    Hatch,
    /// A marker number beside a sample of its line.
    Numbered(usize, u32, u32),
}

/// Draws `entries` one per line into `area`, 64 display pixels in (under the y axis labels).
fn draw_legend(
    area: &DrawingArea<SVGBackend, plotters::coord::Shift>,
    entries: &[(LegendKey, String)],
) -> Option<()> {
    let p = |n: u32| px(n) as i32;
    for (row, (key, text)) in entries.iter().enumerate() {
        let y = p(8) + p(17) * row as i32;
        let (x0, x1) = (p(72), p(104));
        let mid = y + p(7);
        let dashed = |w: u32, dash: u32, gap: u32| -> Option<()> {
            let mut x = x0;
            while x < x1 {
                let end = (x + p(dash)).min(x1);
                area.draw(&PathElement::new(vec![(x, mid), (end, mid)], INK.stroke_width(px(w))))
                    .ok()?;
                if gap == 0 {
                    break;
                }
                x = end + p(gap);
            }
            Some(())
        };
        match key {
            LegendKey::Line(w, dash, gap) => dashed(*w, *dash, *gap)?,
            LegendKey::Fill(opacity) => {
                area.draw(&Rectangle::new(
                    [(x0, y + p(2)), (x1, y + p(12))],
                    PALE.mix(*opacity).filled(),
                ))
                .ok()?;
            }
            LegendKey::Hatch => {
                for k in 0..3 {
                    let yy = y + p(3) + p(4) * k;
                    area.draw(&PathElement::new(
                        vec![(x0, yy), (x1, yy)],
                        MID.mix(0.6).stroke_width(px(1)),
                    ))
                    .ok()?;
                }
            }
            LegendKey::Numbered(n, dash, gap) => {
                area.draw(&Text::new(format!("{n}"), (p(56), y), style(12))).ok()?;
                dashed(1, *dash, *gap)?;
            }
        }
        area.draw(&Text::new(text.clone(), (p(114), y), style(12))).ok()?;
    }
    Some(())
}

/// How far out the pole–zero map reaches, Hz: two decades beyond the upper cut-off (or the
/// largest pole when there is none); and the roots beyond it, listed as a note.
fn pz_window(a: &Analysis) -> (f64, String) {
    let largest_pole = a.poles.iter().map(RootHz::magnitude_hz).fold(0.0, f64::max);
    let edge = a.high.f3db_hz.unwrap_or(largest_pole);
    let reach = if edge > 0.0 { edge * 100.0 } else { f64::INFINITY };
    let text = |r: &RootHz| {
        let mut t = format!("{}{}", if r.re_hz > 0.0 { "+" } else { "" }, si(r.re_hz, "Hz", 4));
        if r.im_hz != 0.0 {
            t.push_str(&format!(" ± j{}", si(r.im_hz.abs(), "Hz", 4)));
        }
        t
    };
    let beyond = |list: &[RootHz]| -> Vec<String> {
        list.iter().filter(|r| r.magnitude_hz() > reach && r.im_hz >= 0.0).map(text).collect()
    };
    let (p, z) = (beyond(&a.poles), beyond(&a.zeros));
    let mut parts = Vec::new();
    if !p.is_empty() {
        parts.push(format!("poles {}", p.join(", ")));
    }
    if !z.is_empty() {
        parts.push(format!("zeros {}", z.join(", ")));
    }
    let note = if parts.is_empty() {
        String::new()
    } else {
        format!("Beyond {}, not drawn: {}", si(reach, "Hz", 3), parts.join("; "))
    };
    (reach, note)
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
    let (reach, far) = pz_window(a);
    let near = |r: &&RootHz| r.magnitude_hz() <= reach;
    let poles: Vec<RootHz> = a.poles.iter().filter(near).copied().collect();
    let zeros: Vec<RootHz> = a.zeros.iter().filter(near).copied().collect();
    let all: Vec<&RootHz> = poles.iter().chain(zeros.iter()).collect();
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
        // The list of far roots, wrapped to the plot's width (12 px monospace: 7.44 px a
        // character).
        let lines = wrap(
            &crate::report::decimal::keep_units(&far),
            ((WIDTH - 80 - 14) as f64 / 7.44) as usize,
        );
        let extra = 6 + 18 * lines.len() as u32;
        let root =
            SVGBackend::with_string(&mut svg, (px(WIDTH), px(432 + extra))).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let (map, note) = root.split_vertically(px(432));
        for (k, line) in lines.iter().enumerate() {
            let at = (px(80) as i32, px(4 + 18 * k as u32) as i32);
            note.draw(&Text::new(line.clone(), at, style(12))).ok()?;
        }
        let mut chart = ChartBuilder::on(&map)
            .margin(px(14))
            .x_label_area_size(px(46))
            .y_label_area_size(px(80))
            .build_cartesian_2d(-reach_x..reach_x, -reach_y..reach_y)
            .ok()?;
        // Every decade whose label fits (about 64 px for `−100 MHz`), else every second or
        // third one.
        let per_decade = (WIDTH - 80 - 28) as f64 / (2.0 * reach_x);
        let step_x = ((64.0 / per_decade).ceil() as i64).max(1);
        // Rows need about 20 px each on the imaginary axis.
        let per_decade_y = (432 - 14 - 46 - 14) as f64 / (2.0 * reach_y);
        let step_y = ((20.0 / per_decade_y).ceil() as i64).max(1);
        let tick = move |v: f64, step: i64| -> String {
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
            .light_line_style(WHITE.stroke_width(px(1)))
            .bold_line_style(PALE.stroke_width(px(1)))
            .axis_style(MID.stroke_width(px(1)))
            .set_all_tick_mark_size(px(5))
            .x_labels((2.0 * reach_x) as usize + 1)
            .y_labels((2.0 * reach_y) as usize + 1)
            .x_label_formatter(&|v| tick(*v, step_x))
            .y_label_formatter(&|v| {
                let t = tick(*v, step_y);
                if t.is_empty() || t == "0" {
                    t
                } else if *v < 0.0 {
                    format!("−j{}", t.trim_start_matches('−'))
                } else {
                    format!("j{t}")
                }
            })
            .label_style(style(12))
            .x_desc("real part, s/2π (left half-plane: stable)")
            .axis_desc_style(style(12))
            .draw()
            .ok()?;
        chart
            .draw_series(LineSeries::new(
                [(0.0, -reach_y), (0.0, reach_y)],
                MID.stroke_width(px(1)),
            ))
            .ok()?;
        chart
            .draw_series(LineSeries::new(
                [(-reach_x, 0.0), (reach_x, 0.0)],
                MID.stroke_width(px(1)),
            ))
            .ok()?;
        let xy = |r: &RootHz| (slog(r.re_hz, unit), slog(r.im_hz, unit));
        chart
            .draw_series(
                poles.iter().map(|p| Cross::new(xy(p), px(7) as i32, INK.stroke_width(px(2)))),
            )
            .ok()?;
        chart
            .draw_series(
                zeros.iter().map(|z| Circle::new(xy(z), px(6) as i32, INK.stroke_width(px(2)))),
            )
            .ok()?;
        // Multiplicity of coincident roots.
        for list in [&poles, &zeros] {
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
                        style(12),
                    )))
                    .ok()?;
            }
        }
        root.present().ok()?;
    }
    Some(finish(svg))
}

/// Each capacitor's share of the estimate that sets each cut-off, in two groups.
/// Rows of the noise share chart before the rest are summed as "others".
const NOISE_ROWS: usize = 6;

/// Each contributor's share of the output noise at the spot frequency and over the band.
fn noise_shares(n: &crate::analysis::noise::NoiseReport) -> Option<String> {
    use crate::analysis::noise::Mechanism;
    if n.contributors.is_empty() {
        return None;
    }
    let short = |m: Mechanism| match m {
        Mechanism::Thermal => "thermal",
        Mechanism::BaseResistance => "base resistance",
        Mechanism::CollectorShot => "I_C shot",
        Mechanism::BaseShot => "I_B shot",
        Mechanism::Channel => "channel",
        Mechanism::Flicker => "1/f",
    };
    let bars = |share: &dyn Fn(&crate::analysis::noise::Contributor) -> Option<f64>,
                dark: bool|
     -> Option<Vec<Bar>> {
        let mut rows: Vec<(String, f64)> = n
            .contributors
            .iter()
            .map(|c| Some((format!("{} {}", c.part, short(c.mechanism)), share(c)?)))
            .collect::<Option<_>>()?;
        rows.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
        if rows.len() > NOISE_ROWS + 1 {
            let rest: f64 = rows[NOISE_ROWS..].iter().map(|r| r.1).sum();
            let count = rows.len() - NOISE_ROWS;
            rows.truncate(NOISE_ROWS);
            rows.push((format!("{count} others"), rest));
        }
        Some(
            rows.into_iter()
                .map(|(label, v)| Bar {
                    label,
                    value: v * 100.0,
                    shown: format!("{} %", crate::notation::plain(v * 100.0, 3)),
                    dark,
                })
                .collect(),
        )
    };
    let spot_head = format!(
        "at {}: share of the output density",
        crate::notation::si(n.spot_frequency_hz, "Hz", 4)
    );
    let mut groups = vec![(Some(spot_head.as_str()), bars(&|c| Some(c.share), true)?)];
    let band_head = n.band.as_ref().map(|b| {
        format!(
            "over {} … {}: share of the rms²",
            crate::notation::si(b.start_hz, "Hz", 4),
            crate::notation::si(b.stop_hz, "Hz", 4)
        )
    });
    if let (Some(head), Some(rows)) = (band_head.as_deref(), bars(&|c| c.band_share, false)) {
        groups.push((Some(head), rows));
    }
    bar_chart(&groups, Some((0.0, 100.0)), "share of the output noise")
}

fn shares(a: &Analysis) -> Option<String> {
    let group = |caps: Vec<(String, f64)>, dark: bool| -> Vec<Bar> {
        caps.into_iter()
            .map(|(part, share)| Bar {
                label: part,
                value: share * 100.0,
                shown: format!("{} %", crate::notation::plain(share * 100.0, 3)),
                dark,
            })
            .collect()
    };
    let high = group(a.high.octc.caps.iter().map(|c| (c.part.clone(), c.share)).collect(), true);
    let low = group(a.low.sctc.caps.iter().map(|c| (c.part.clone(), c.share)).collect(), false);
    let mut groups = Vec::new();
    if !high.is_empty() {
        groups.push((Some("upper cut-off f_H: share of Σ τ"), high));
    }
    if !low.is_empty() {
        groups.push((Some("lower cut-off f_L: share of Σ 1/τ"), low));
    }
    if groups.is_empty() {
        return None;
    }
    bar_chart(&groups, Some((0.0, 100.0)), "share of the time-constant estimate")
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
    let (bottom, top) = magnitude_range(both(), f64::MIN, 5.0);
    let (ph_lo, ph_hi) = phase_range(both());
    let earlier = MID.stroke_width(px(2));
    let later = INK.stroke_width(px(2));
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (px(WIDTH), px(520))).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let (upper, lower) = root.split_vertically(px(300));
        let mut mag = frequency_panel(&upper, (f0, f1), (bottom, top), MAGNITUDE)?;
        let line = |s: &[SweepPoint], f: fn(&SweepPoint) -> f64| -> Vec<(f64, f64)> {
            s.iter().map(|p| (p.frequency_hz, f(p))).collect()
        };
        for segment in above(before.iter().map(|p| (p.frequency_hz, p.magnitude_db)), bottom) {
            mag.draw_series(DashedLineSeries::new(segment, px(7), px(4), earlier)).ok()?;
        }
        for segment in above(after.iter().map(|p| (p.frequency_hz, p.magnitude_db)), bottom) {
            mag.draw_series(LineSeries::new(segment, later)).ok()?;
        }
        // The legend, in the panel's top-right corner, in pixels.
        let (w, _) = upper.dim_in_pixel();
        let p = |n: i32| n * px(1) as i32;
        let x = w as i32 - p(300);
        for (row, (label, dashed)) in
            [(before_label, true), (after_label, false)].iter().enumerate()
        {
            let y = p(28) + p(18) * row as i32;
            let color = if *dashed { MID } else { INK };
            let segments: Vec<(i32, i32)> =
                if *dashed { vec![(x, y), (x + p(10), y)] } else { vec![(x, y), (x + p(28), y)] };
            upper.draw(&PathElement::new(segments, color.stroke_width(px(2)))).ok()?;
            if *dashed {
                upper
                    .draw(&PathElement::new(
                        vec![(x + p(16), y), (x + p(28), y)],
                        color.stroke_width(px(2)),
                    ))
                    .ok()?;
            }
            upper.draw(&Text::new(label.to_string(), (x + p(36), y - p(7)), style(12))).ok()?;
        }
        let mut phase = frequency_panel(&lower, (f0, f1), (ph_lo, ph_hi), PHASE)?;
        phase
            .draw_series(DashedLineSeries::new(
                line(before, |p| p.phase_deg),
                px(7),
                px(4),
                earlier,
            ))
            .ok()?;
        phase.draw_series(LineSeries::new(line(after, |p| p.phase_deg), later)).ok()?;
        root.present().ok()?;
    }
    Some(finish(svg))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn demo() -> (Analysis, Vec<RequirementCheck>, Study) {
        let text = std::fs::read_to_string("designs/rx-preamp-ce.yaml").unwrap();
        let d = crate::design::load(&text).design.unwrap();
        let r =
            crate::review::review(&d, &crate::review::ReviewOptions::quiet(&d, Some(50))).unwrap();
        (r.analysis, r.requirements, r.study)
    }

    /// Every number in the `points` of the polylines of `svg`, in display pixels.
    fn trace_coordinates(svg: &str) -> Vec<f64> {
        svg.split("points=\"")
            .skip(1)
            .filter_map(|rest| rest.split('"').next())
            .flat_map(|pts| pts.split([' ', ',']).filter_map(|v| v.parse::<f64>().ok()))
            .map(|v| v / SCALE as f64)
            .collect()
    }

    /// Text in a plot prints no smaller than the captions and footnotes (8.5 pt): a plot fills
    /// the text width of an A4 page with 2.2 cm margins (595.3 pt − 2 × 62.4 pt = 470.5 pt).
    #[test]
    fn plot_text_prints_no_smaller_than_the_captions() {
        let (a, req, study) = demo();
        for plot in all(&a, &req, Some(&study)) {
            let sizes: Vec<f64> = plot
                .svg
                .split("<text")
                .skip(1)
                .filter_map(|t| t.split("font-size=\"").nth(1)?.split('"').next()?.parse().ok())
                .collect();
            assert!(!sizes.is_empty(), "{} has no text", plot.name);
            let smallest = sizes.iter().copied().fold(f64::INFINITY, f64::min) / SCALE as f64;
            let printed = smallest * 470.5 / WIDTH as f64;
            assert!(printed >= 8.4, "{}: smallest text prints at {printed:.2} pt", plot.name);
        }
    }

    /// Curves are drawn between whole display pixels: a plot whose trace coordinates were
    /// all whole pixels would look stair-stepped at print resolution.
    #[test]
    fn traces_are_not_whole_pixels_only() {
        let (a, req, study) = demo();
        for plot in all(&a, &req, Some(&study)) {
            assert!(
                plot.svg.contains(&format!("viewBox=\"0 0 {} ", WIDTH * SCALE)),
                "{}",
                plot.name
            );
            let coords = trace_coordinates(&plot.svg);
            if plot.name == "bode" {
                let fractional = coords.iter().filter(|v| v.fract() != 0.0).count();
                assert!(
                    fractional * 2 > coords.len(),
                    "{}: {fractional} of {} coordinates between pixels",
                    plot.name,
                    coords.len()
                );
            }
        }
    }

    #[test]
    fn a_trace_below_the_floor_leaves_the_frame_instead_of_running_along_it() {
        let trace = [(1.0, 0.0), (10.0, -20.0), (100.0, -60.0), (1000.0, -20.0)];
        let runs = above(trace.into_iter(), -40.0);
        assert_eq!(runs.len(), 2, "{runs:?}");
        // −20 → −60 over one decade crosses −40 half way: at √10 × 10 Hz.
        let cut = runs[0].last().unwrap();
        assert!((cut.0 - 10f64.powf(1.5)).abs() < 1e-9 && cut.1 == -40.0, "{cut:?}");
        assert!(runs.iter().flatten().all(|p| p.1 >= -40.0));
    }

    #[test]
    fn marker_numbers_never_share_a_row_closer_than_their_width() {
        let xs = [100, 110, 130, 400, 405, 900];
        let rows = tag_rows(&xs, 22);
        for i in 0..xs.len() {
            for j in 0..i {
                if rows[i] == rows[j] {
                    assert!(xs[i] - xs[j] >= 22, "{xs:?} {rows:?}");
                }
            }
        }
        assert_eq!(rows, [0, 1, 0, 0, 1, 0]);
    }

    #[test]
    fn the_bode_markers_are_the_cutoffs_estimates_and_limits_in_frequency_order() {
        let (a, req, _) = demo();
        let marks = bode_marks(&a, &req);
        let kinds: Vec<MarkKind> = marks.iter().map(|m| m.kind).collect();
        assert_eq!(marks.len(), 6, "{marks:?}");
        assert!(marks.windows(2).all(|w| w[0].f <= w[1].f));
        assert_eq!(kinds.iter().filter(|k| **k == MarkKind::Limit).count(), 2);
        assert_eq!(
            marks.iter().find(|m| m.kind == MarkKind::Exact).unwrap().f,
            a.low.f3db_hz.unwrap()
        );
    }

    #[test]
    fn far_roots_are_listed_not_drawn() {
        let (a, _, _) = demo();
        let (reach, note) = pz_window(&a);
        assert_eq!(reach, a.high.f3db_hz.unwrap() * 100.0);
        let far = a.poles.iter().chain(&a.zeros).filter(|r| r.magnitude_hz() > reach).count();
        assert!(far > 0 && note.starts_with("Beyond "), "{note}");
        // Each far root (a conjugate pair once) is named in the note.
        assert_eq!(note.matches("GHz").count(), far, "{note}");
    }
}
