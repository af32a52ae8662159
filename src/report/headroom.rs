//! The computed explanation of signal handling: which transistor ends the swing on each
//! side and where, how to balance the two sides, which harmonic dominates the distortion
//! and how close the bias-point power series comes to it, where compression sets in against
//! the extrapolated intercept, and how far the quasi-static view holds.
//!
//! In: the [`LargeSignalReport`]. Out: Markdown paragraphs for `explanation(side="signal")`.
//! No I/O.

use crate::analysis::large_signal::{LargeSignalReport, SwingLimit};
use crate::notation::{plain, si};

/// How far the IIP3 lies above the 1 dB compression point for y = a₁x + a₃x³ alone, dB:
/// 10·log10((4/3)/0.145) ≈ 9.6 (Razavi, RF Microelectronics, ch. 2, from memory; common
/// practice).
const CUBIC_INTERCEPT_ABOVE_COMPRESSION_DB: f64 = 9.6;

fn signed(v: f64, unit: &str) -> String {
    let s = si(v.abs(), unit, 3);
    if v < 0.0 { format!("−{s}") } else { format!("+{s}") }
}

fn what(l: &SwingLimit) -> String {
    let verb = l.edge.verb();
    format!("{} {verb} (node `{}`, at a source EMF of {})", l.part, l.node, signed(l.input_v, "V"))
}

/// Paragraphs about `l`.
pub fn explain(l: &LargeSignalReport) -> Vec<String> {
    let mut out = Vec::new();
    let s = &l.output_swing;
    let rise = s.positive_limit.as_ref().map(|p| {
        format!("rising, the output moves **{}** before {}", signed(p.output_v, "V"), what(p))
    });
    let fall = s
        .negative_limit
        .as_ref()
        .map(|n| format!("falling, **{}** before {}", signed(n.output_v, "V"), what(n)));
    let sides: Vec<String> = [rise, fall].into_iter().flatten().collect();
    if !sides.is_empty() {
        let mut p = format!("{}.", capitalised(&sides.join("; ")));
        if let Some(clip) = l.clipping_input_v {
            let first = [s.positive_limit.as_ref(), s.negative_limit.as_ref()]
                .into_iter()
                .flatten()
                .min_by(|a, b| a.input_v.abs().total_cmp(&b.input_v.abs()));
            if let Some(f) = first {
                p.push_str(&format!(
                    " A sine at the source first reaches a limit at **{} peak**, where {} {}.",
                    si(clip, "V", 3),
                    f.part,
                    f.edge.verb()
                ));
            }
        }
        if let (Some(up), Some(down)) = (s.positive_v, s.negative_v) {
            let (small, side) = if up <= down { (up, "rising") } else { (down, "falling") };
            let shift = 0.5 * (up - down).abs();
            p.push_str(&format!(
                " The largest symmetric output is **{} peak**, set by the {side} side",
                si(small, "V", 3)
            ));
            if shift > 0.05 * small {
                let way = if up < down { "lower" } else { "higher" };
                // The node whose bias sets the room: the limiting transistor's collector or
                // drain (the output follows it through any coupling capacitor).
                let limit = if up <= down { &s.positive_limit } else { &s.negative_limit };
                let node =
                    limit.as_ref().map_or("the output".to_string(), |l| format!("`{}`", l.node));
                p.push_str(&format!(
                    "; moving the quiescent voltage at {node} about {} {way} would balance the sides near {} peak (to first order: the bias move changes the gain and the limits too).",
                    si(shift, "V", 3),
                    si(0.5 * (up + down), "V", 3)
                ));
            } else {
                p.push_str(", and the two sides are balanced within 10 %.");
            }
        }
        out.push(p);
    }
    if !l.unwatched.is_empty() {
        out.push(format!(
            "{} {} outside its normal region at the bias (a bipolar transistor not forward-active, a MOSFET not in saturation), so the swing limits here do not watch {}: where {} turns on or moves, the figures below may change abruptly.",
            l.unwatched.join(", "),
            if l.unwatched.len() == 1 { "is" } else { "are" },
            if l.unwatched.len() == 1 { "it" } else { "them" },
            if l.unwatched.len() == 1 { "it" } else { "one" },
        ));
    }
    if let Some(d) = &l.distortion {
        let mut p = format!(
            "At the stated **{} peak** the output's fundamental is {} peak with a total harmonic distortion of **{} %**",
            si(d.amplitude_v, "V", 3),
            si(d.fundamental_v, "V", 3),
            plain(d.thd_percent, 3)
        );
        let (h2, h3) = (
            d.harmonics.get(1).copied().unwrap_or(0.0),
            d.harmonics.get(2).copied().unwrap_or(0.0),
        );
        let db = |v: Option<f64>| {
            v.map_or("below the resolution".to_string(), |v| format!("{} dB", plain(v, 3)))
        };
        let even = h2 >= h3;
        p.push_str(&format!(
            "; the {} harmonic dominates (HD2 {}, HD3 {})",
            if even { "second" } else { "third" },
            db(d.hd2_db),
            db(d.hd3_db)
        ));
        if let Some(series) = &l.series {
            let (est, exact) = if even {
                (series.hd2(d.amplitude_v), d.hd2_db)
            } else {
                (series.hd3(d.amplitude_v), d.hd3_db)
            };
            if let (true, Some(exact)) = (est > 0.0, exact) {
                let est_db = 20.0 * est.log10();
                let off = est_db - exact;
                let gap = if off.abs() < 0.01 {
                    "within 0.01 dB of the exact figure".to_string()
                } else {
                    format!("{} dB from the exact figure", format!("{off:+.2}").replace('-', "−"))
                };
                p.push_str(&format!(
                    ". The power series at the bias (HD2 ≈ |a₂|A/2|a₁|, HD3 ≈ |a₃|A²/4|a₁|) gives {} dB, {gap}",
                    plain(est_db, 3)
                ));
            }
        }
        p.push_str(if even {
            ". Second-order distortion grows 6 dB per doubling of the amplitude and falls by about the loop gain (1 + T) under local feedback such as emitter or source degeneration, at the same output; a balanced (differential) stage cancels it."
        } else {
            ". Third-order distortion grows 12 dB per doubling of the amplitude; local feedback reduces it by about (1 + T)² at the same input."
        });
        out.push(p);
    }
    if let Some(c) = l.compression_1db_input_v {
        let mut p = format!(
            "The fundamental's gain is 1 dB down at **{} peak** at the source",
            si(c, "V", 3)
        );
        if let Some(clip) = l.clipping_input_v {
            p.push_str(&format!(" ({} × the clipping input)", plain(c / clip, 3)));
        }
        if let Some(ip3) = l.iip3_v {
            let above = 20.0 * (ip3 / c).log10();
            p.push_str(&format!(
                "; the third-order intercept extrapolated from the power series is {} peak per tone, {} dB above it (a memoryless cubic alone would put it about {} dB above; the difference is the higher-order curvature and the clipping)",
                si(ip3, "V", 3),
                plain(above, 3),
                plain(CUBIC_INTERCEPT_ABOVE_COMPRESSION_DB, 2)
            ));
        }
        p.push('.');
        if let Some(dr) = l.dynamic_range_db {
            p.push_str(&format!(
                " From the band's noise referred to the source up to the compression point (both rms) the dynamic range is **{} dB**.",
                plain(dr, 3)
            ));
        }
        out.push(p);
    }
    out.push(format!(
        "These figures are quasi-static: the nonlinear circuit solved at each instantaneous value of the source EMF, with the coupling and bypass capacitors holding their bias voltages and the device and load capacitances open — the mid-band view, for {}.{}",
        si(l.frequency_hz, "Hz", 3),
        if l.well_inside_band {
            " That frequency lies more than a decade inside both cut-offs, where the view holds."
        } else {
            " That frequency lies within a decade of a cut-off: there the capacitors take part, and the swing and distortion near the band edge differ from these."
        }
    ));
    out
}

fn capitalised(s: &str) -> String {
    let mut c = s.chars();
    c.next().map_or_else(String::new, |f| f.to_uppercase().collect::<String>() + c.as_str())
}
