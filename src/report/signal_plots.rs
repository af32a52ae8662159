//! The signal-handling plots: the quasi-static transfer with its swing limits, and the output
//! waveform at the stated amplitude beside the ideal sine the small-signal gain would give.
//!
//! In: the [`LargeSignalReport`]. Out: SVG strings in the style of the other plots
//! ([`crate::report::plots`]). No I/O.

use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;

use crate::analysis::large_signal::LargeSignalReport;
use crate::report::plots::{INK, MID, PALE, WIDTH, finish, px, style};

/// Volts shown in the unit that keeps the axis numbers between 1 and 1000: (factor, unit).
fn volt_unit(largest: f64) -> (f64, &'static str) {
    match largest {
        v if v >= 1.0 => (1.0, "V"),
        v if v >= 1e-3 => (1e3, "mV"),
        _ => (1e6, "µV"),
    }
}

/// A tick label with a real minus sign.
fn tick(v: f64) -> String {
    let t = if v.abs() >= 100.0 || v == v.round() {
        format!("{v:.0}")
    } else {
        format!("{v:.2}").trim_end_matches('0').trim_end_matches('.').to_string()
    };
    let t = if t == "-0" { "0".into() } else { t };
    t.replace('-', "−")
}

/// A tick label.
pub(super) type Label<'f> = &'f dyn Fn(&f64) -> String;

/// A chart's linear axes: ranges, tick counts, tick labels and names.
pub(super) struct Linear<'f> {
    /// Horizontal range.
    pub x: (f64, f64),
    /// Vertical range.
    pub y: (f64, f64),
    /// How many ticks on each axis.
    pub ticks: (usize, usize),
    /// Tick labels.
    pub labels: (Label<'f>, Label<'f>),
    /// Axis names.
    pub names: (String, String),
}

/// A chart on `root` with linear axes, the house mesh and labels drawn.
pub(super) fn linear_chart<'a, 'b>(
    root: &'a DrawingArea<SVGBackend<'b>, plotters::coord::Shift>,
    axes: Linear,
) -> Option<ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>> {
    let mut chart = ChartBuilder::on(root)
        .margin(px(14))
        .margin_right(px(34))
        .x_label_area_size(px(44))
        .y_label_area_size(px(64))
        .build_cartesian_2d(axes.x.0..axes.x.1, axes.y.0..axes.y.1)
        .ok()?;
    chart
        .configure_mesh()
        .light_line_style(PALE.mix(0.5).stroke_width(px(1)))
        .bold_line_style(PALE.stroke_width(px(1)))
        .axis_style(MID.stroke_width(px(1)))
        .set_all_tick_mark_size(px(5))
        .x_labels(axes.ticks.0)
        .y_labels(axes.ticks.1)
        .x_label_formatter(axes.labels.0)
        .y_label_formatter(axes.labels.1)
        .label_style(style(12))
        .x_desc(axes.names.0)
        .y_desc(axes.names.1)
        .axis_desc_style(style(13))
        .draw()
        .ok()?;
    Some(chart)
}

/// The transfer: output change against source EMF, the small-signal line dashed, each side's
/// limit marked and named, the stated amplitude's span shaded.
pub fn transfer(l: &LargeSignalReport) -> Option<String> {
    if l.curve.len() < 3 {
        return None;
    }
    let xs = l.curve.iter().map(|p| p[0].abs()).fold(0.0, f64::max);
    let ys = l.curve.iter().map(|p| p[1].abs()).fold(0.0, f64::max);
    if xs <= 0.0 || ys <= 0.0 {
        return None;
    }
    let (fx, ux) = volt_unit(xs);
    let (fy, uy) = volt_unit(ys);
    let (x0, x1) = (l.curve[0][0] * fx, l.curve[l.curve.len() - 1][0] * fx);
    let (ylo, yhi) = l.curve.iter().fold((0.0f64, 0.0f64), |(a, b), p| (a.min(p[1]), b.max(p[1])));
    let pad = (yhi - ylo) * 0.08;
    let (y0, y1) = ((ylo - pad) * fy, (yhi + pad) * fy);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (px(WIDTH), px(360))).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let tick = |v: &f64| tick(*v);
        let mut chart = linear_chart(
            &root,
            Linear {
                x: (x0, x1),
                y: (y0, y1),
                ticks: (7, 7),
                labels: (&tick, &tick),
                names: (format!("source EMF, {ux}"), format!("output change, {uy}")),
            },
        )?;
        if let Some(a) = l.input_amplitude_v {
            let (from, to) = ((-a * fx).max(x0), (a * fx).min(x1));
            if from < to {
                chart
                    .draw_series(std::iter::once(Rectangle::new(
                        [(from, y0), (to, y1)],
                        PALE.mix(0.45).filled(),
                    )))
                    .ok()?;
            }
        }
        if let Some(s) = &l.series {
            // The small-signal line, drawn only inside the frame.
            let gain = s.a1 * fy / fx;
            let clip = |x: f64| (gain * x).clamp(y0, y1) / gain;
            let (a, b) = (clip(x0), clip(x1));
            let (a, b) = (a.min(b), a.max(b));
            chart
                .draw_series(DashedLineSeries::new(
                    [(a, gain * a), (b, gain * b)],
                    px(4),
                    px(4),
                    MID.stroke_width(px(1)),
                ))
                .ok()?;
        }
        chart
            .draw_series(LineSeries::new(
                l.curve.iter().map(|p| (p[0] * fx, p[1] * fy)),
                INK.stroke_width(px(2)),
            ))
            .ok()?;
        let s = &l.output_swing;
        for limit in [s.positive_limit.as_ref(), s.negative_limit.as_ref()].into_iter().flatten() {
            let (x, y) = (limit.input_v * fx, limit.output_v * fy);
            if x < x0 || x > x1 {
                continue;
            }
            let edge = limit.edge.noun();
            let name = format!("{} {edge}", limit.part);
            chart.draw_series(std::iter::once(Circle::new((x, y), px(5), INK.filled()))).ok()?;
            // The name inside the frame, on the side away from the nearer vertical edge.
            let right = x < 0.5 * (x0 + x1);
            let dx = if right {
                px(9) as i32
            } else {
                -(px(9) as i32 + px(name.chars().count() as u32 * 8) as i32)
            };
            let dy = if y > 0.5 * (y0 + y1) { px(6) as i32 } else { -(px(18) as i32) };
            chart
                .draw_series(std::iter::once(
                    EmptyElement::at((x, y)) + Text::new(name, (dx, dy), style(12)),
                ))
                .ok()?;
        }
        root.present().ok()?;
    }
    Some(finish(svg))
}

/// One period of the output at the stated amplitude (solid) and the small-signal gain's
/// ideal sine (dashed).
pub fn waveform(l: &LargeSignalReport) -> Option<String> {
    let d = l.distortion.as_ref()?;
    if d.waveform.len() < 3 {
        return None;
    }
    let largest = d.waveform.iter().map(|p| p[1].abs().max(p[2].abs())).fold(0.0, f64::max);
    if largest <= 0.0 {
        return None;
    }
    let (f, unit) = volt_unit(largest);
    let (y0, y1) = (-largest * f * 1.12, largest * f * 1.12);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (px(WIDTH), px(260))).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let degrees = |v: &f64| format!("{v:.0}°");
        let tick = |v: &f64| tick(*v);
        let mut chart = linear_chart(
            &root,
            Linear {
                x: (0.0, 360.0),
                y: (y0, y1),
                ticks: (9, 5),
                labels: (&degrees, &tick),
                names: (
                    "phase of the source EMF over one period".into(),
                    format!("output change, {unit}"),
                ),
            },
        )?;
        chart
            .draw_series(DashedLineSeries::new(
                d.waveform.iter().map(|p| (p[0], p[2] * f)),
                px(4),
                px(4),
                MID.stroke_width(px(1)),
            ))
            .ok()?;
        chart
            .draw_series(LineSeries::new(
                d.waveform.iter().map(|p| (p[0], p[1] * f)),
                INK.stroke_width(px(2)),
            ))
            .ok()?;
        root.present().ok()?;
    }
    Some(finish(svg))
}
