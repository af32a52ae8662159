//! The plots of the stage at its ports and in time: return loss at both ports and the μ
//! stability factor over the sweep, and the step response with its 10 %, 90 % and settling
//! marks.
//!
//! In: the [`PortsReport`] and the [`StepReport`]. Out: SVG strings in the house style
//! ([`crate::report::plots`]). No I/O.

use plotters::prelude::*;

use crate::analysis::ports::PortsReport;
use crate::analysis::step::StepReport;
use crate::report::plots::{Axis, INK, MID, PALE, WIDTH, finish, frequency_panel, px};
use crate::report::signal_plots::{Linear, linear_chart};

/// The limits a ports plot draws: the least return loss asked at each port, the least μ.
#[derive(Clone, Copy, Debug, Default)]
pub struct PortLimits {
    /// `input_return_loss.min`, dB.
    pub input_return_loss_db: Option<f64>,
    /// `output_return_loss.min`, dB.
    pub output_return_loss_db: Option<f64>,
    /// `stability.min`.
    pub mu: Option<f64>,
}

/// Return loss at each port (solid: input, dashed: output) with the review band shaded and
/// any required minimum drawn, and μ (unconditionally stable above the dotted line at 1; a
/// required minimum above 1 drawn too), over the sweep.
pub fn ports(p: &PortsReport, limits: PortLimits) -> Option<String> {
    if p.points.len() < 2 {
        return None;
    }
    let (f0, f1) = (p.points[0].frequency_hz, p.points[p.points.len() - 1].frequency_hz);
    let rl: Vec<(f64, f64, f64)> = p
        .points
        .iter()
        .filter_map(|q| {
            Some((q.frequency_hz, q.input_return_loss_db()?, q.output_return_loss_db()?))
        })
        .collect();
    let mu: Vec<(f64, f64)> =
        p.points.iter().filter_map(|q| Some((q.frequency_hz, q.mu()?.clamp(0.0, 3.0)))).collect();
    if rl.len() < 2 || mu.len() < 2 {
        return None;
    }
    let asked = [limits.input_return_loss_db, limits.output_return_loss_db];
    let top = rl
        .iter()
        .map(|r| r.1.max(r.2))
        .chain(asked.into_iter().flatten())
        .fold(0.0, f64::max)
        .min(60.0);
    let top = ((top / 5.0).ceil() * 5.0).max(5.0);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (px(WIDTH), px(460))).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let (upper, lower) = root.split_vertically(px(240));
        let axis = Axis {
            x_label_area: 28,
            y_desc: "return loss",
            y_unit: " dB",
            x_desc: false,
            decimals: 1,
        };
        let mut chart = frequency_panel(&upper, (f0, f1), (0.0, top), axis)?;
        if let Some(b) = &p.band {
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(b.from_hz.max(f0), 0.0), (b.to_hz.min(f1), top)],
                    PALE.mix(0.45).filled(),
                )))
                .ok()?;
        }
        for (limit, gap) in asked.iter().zip([6, 2]) {
            let Some(db) = limit.filter(|d| *d > 0.0 && *d <= top) else { continue };
            chart
                .draw_series(DashedLineSeries::new(
                    [(f0, db), (f1, db)],
                    px(gap),
                    px(3),
                    MID.stroke_width(px(1)),
                ))
                .ok()?;
        }
        chart
            .draw_series(LineSeries::new(
                rl.iter().map(|r| (r.0, r.1.min(top))),
                INK.stroke_width(px(2)),
            ))
            .ok()?;
        chart
            .draw_series(DashedLineSeries::new(
                rl.iter().map(|r| (r.0, r.2.min(top))),
                px(5),
                px(4),
                INK.stroke_width(px(2)),
            ))
            .ok()?;
        let axis = Axis {
            x_label_area: 44,
            y_desc: "μ (stable above 1)",
            y_unit: "",
            x_desc: true,
            decimals: 1,
        };
        let mut chart = frequency_panel(&lower, (f0, f1), (0.0, 3.0), axis)?;
        for (a, b) in p.conditionally_stable() {
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(a, 0.0), (b, 3.0)],
                    PALE.mix(0.45).filled(),
                )))
                .ok()?;
        }
        chart
            .draw_series(DashedLineSeries::new(
                [(f0, 1.0), (f1, 1.0)],
                px(2),
                px(3),
                MID.stroke_width(px(1)),
            ))
            .ok()?;
        if let Some(m) = limits.mu.filter(|m| *m > 1.0 && *m < 3.0) {
            chart
                .draw_series(DashedLineSeries::new(
                    [(f0, m), (f1, m)],
                    px(6),
                    px(3),
                    MID.stroke_width(px(1)),
                ))
                .ok()?;
        }
        chart.draw_series(LineSeries::new(mu, INK.stroke_width(px(2)))).ok()?;
        root.present().ok()?;
    }
    Some(finish(svg))
}

/// The step response over time, normalised to its final value, with the 10 % and 90 % levels
/// and the settling band.
pub fn step(s: &StepReport) -> Option<String> {
    if s.curve.len() < 2 {
        return None;
    }
    let end = s.curve[s.curve.len() - 1][0];
    let (scale, unit) = match end {
        t if t >= 1e-3 => (1e3, "ms"),
        t if t >= 1e-6 => (1e6, "µs"),
        _ => (1e9, "ns"),
    };
    let top = (1.0 + s.overshoot).max(1.0) * 1.1;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (px(WIDTH), px(280))).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let time =
            |v: &f64| format!("{v:.3}").trim_end_matches('0').trim_end_matches('.').to_string();
        let level = |v: &f64| format!("{v:.1}");
        let mut chart = linear_chart(
            &root,
            Linear {
                x: (0.0, end * scale),
                y: (0.0, top),
                ticks: (8, 6),
                labels: (&time, &level),
                names: (format!("time, {unit}"), "output / final value".into()),
            },
        )?;
        let band = s.settling_band;
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(0.0, 1.0 - band), (end * scale, 1.0 + band)],
                PALE.mix(0.45).filled(),
            )))
            .ok()?;
        for level in [0.1, 0.9] {
            chart
                .draw_series(DashedLineSeries::new(
                    [(0.0, level), (end * scale, level)],
                    px(2),
                    px(3),
                    MID.stroke_width(px(1)),
                ))
                .ok()?;
        }
        chart
            .draw_series(LineSeries::new(
                s.curve.iter().map(|p| (p[0] * scale, p[1])),
                INK.stroke_width(px(2)),
            ))
            .ok()?;
        root.present().ok()?;
    }
    Some(finish(svg))
}
