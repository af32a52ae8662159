//! The computed explanation: which capacitor sets each cut-off and why, which estimate to
//! trust and by how much, where a right-half-plane zero sits when it is near enough to
//! matter, and what would move the cut-off — said once, and never by changing a part the
//! design marks fixed; and likewise which source sets the noise floor, through which
//! mechanism, what the noise figure would be without it and what would reduce it. Every
//! sentence is chosen by the numbers and carries them.
//!
//! In: the [`Analysis`]. Out: paragraphs of Markdown. Formatting of numbers goes through
//! [`crate::notation`].

use serde::Serialize;

use crate::analysis::time_constants::OpenCircuitCap;
use crate::analysis::tolerance::Study;
use crate::analysis::{Analysis, High, RootHz};
use crate::notation::{absent, plain, si};
use crate::report::tables::cell;

/// Pole separation at or above which one pole dominates (common practice: the nearest
/// other pole or zero at least 4× away; docs/methods.md, Estimates).
pub const DOMINANT_RATIO: f64 = 4.0;
/// Relative error within which an estimate is called trustworthy in the explanation.
pub const TRUSTED_ERROR: f64 = 0.05;

/// The explanation of both cut-offs and of the noise.
#[derive(Clone, Debug, Default, Serialize)]
pub struct Explanation {
    /// Paragraphs about the upper cut-off.
    pub high: Vec<String>,
    /// Paragraphs about the lower cut-off.
    pub low: Vec<String>,
    /// Paragraphs about the noise.
    pub noise: Vec<String>,
    /// Paragraphs about signal handling: swing, distortion, compression.
    pub signal: Vec<String>,
    /// Paragraphs about the ports and the step: match, stability, rise and overshoot.
    pub ports: Vec<String>,
}

fn pct(x: f64) -> String {
    format!("{} %", plain(x * 100.0, 3))
}

fn signed_pct(x: f64) -> String {
    crate::notation::signed_percent(x, 2)
}

/// The explanation for `a`, with the strongest levers when a tolerance study ran; `fixed`
/// names the parts the design cannot change.
pub fn explain(
    a: &Analysis,
    study: Option<&Study>,
    fixed: &[String],
    asked: crate::report::port_words::Asked,
) -> Explanation {
    let mut high = high(a, study, fixed);
    let mut low = low(a, study, fixed);
    if let Some(s) = study {
        high.extend(levers(s, "upper_cutoff", "f_H", fixed));
        low.extend(levers(s, "lower_cutoff", "f_L", fixed));
    }
    let mut noise = noise(a, study);
    if let Some(s) = study
        && !noise.is_empty()
    {
        noise.extend(levers(s, "noise_figure", "the noise figure", fixed));
    }
    let signal = a.large_signal.as_ref().map(crate::report::headroom::explain).unwrap_or_default();
    let mut ports = crate::report::port_words::explain(a, asked);
    if let Some(s) = study {
        ports.extend(levers(s, "input_return_loss", "the input return loss", fixed));
        ports.extend(levers(s, "output_return_loss", "the output return loss", fixed));
        ports.extend(levers(s, "stability", "μ", fixed));
    }
    Explanation { high, low, noise, signal, ports }
}

/// Which source sets the noise, what the noise figure would be without it, what would
/// reduce it, and where the source resistance stands against the optimum.
fn noise(a: &Analysis, study: Option<&Study>) -> Vec<String> {
    use crate::analysis::noise::Mechanism;
    let Some(n) = &a.noise else { return Vec::new() };
    let (Some(factor), Some(nf)) = (n.noise_factor, n.noise_figure_db) else {
        return Vec::new();
    };
    let total: f64 = n.contributors.iter().map(|c| c.density_v2_per_hz).sum();
    let from_source: f64 =
        n.contributors.iter().filter(|c| c.part == "source").map(|c| c.density_v2_per_hz).sum();
    // The stage's own largest source (the load's resistor is the next stage's business).
    let Some(top) = n.contributors.iter().find(|c| c.part != "source" && c.part != "load") else {
        return Vec::new();
    };
    let added = total - from_source;
    let without = (total - top.density_v2_per_hz) / from_source;
    let what = format!("{}'s {}", cell(&top.part), top.mechanism.describe());
    let mut first = format!(
        "At {} the stage adds {} of the source's own noise (noise factor F = {}). Its largest part is \
         {what}: {} of the output noise, {} of what the stage adds; without it the noise figure \
         would be {} dB.",
        si(n.spot_frequency_hz, "Hz", 4),
        pct(factor - 1.0),
        plain(factor, 3),
        pct(top.share),
        pct(if added > 0.0 { top.density_v2_per_hz / added } else { 0.0 }),
        plain(10.0 * without.log10(), 3),
    );
    let device = a
        .operating_point
        .as_ref()
        .and_then(|op| op.devices.iter().find(|d| d.bias.part == top.part));
    let advice = match top.mechanism {
        Mechanism::BaseResistance => {
            let rx =
                device.and_then(|d| d.small_signal.rx_ohm).map_or_else(absent, |r| si(r, "Ω", 3));
            format!(
                " A device with a lower base resistance (r_x is {rx}), or a lower source \
                 impedance at the base, would reduce it."
            )
        }
        Mechanism::CollectorShot => {
            let ic = device.map(|d| crate::analysis::evaluate::bias_current(&d.bias.state));
            format!(
                " Referred to the input it is 2qI_C/g_m², which falls as 1/I_C: more collector \
                 current (now {}) would reduce it, until the base current's shot noise takes over.",
                ic.map_or_else(absent, |i| si(i, "A", 3))
            )
        }
        Mechanism::BaseShot => format!(
            " It is 2qI_B = 2qI_C/β flowing in the impedance at the base: a device with a higher \
             β{}, less collector current, or a lower source impedance would reduce it.",
            device
                .and_then(|d| d.small_signal.beta_ac)
                .map_or(String::new(), |b| format!(" (β is {} here)", plain(b, 3)))
        ),
        Mechanism::Channel => format!(
            " Referred to the gate it is 4kTγ/g_m: more g_m (a wider device or more drain \
             current; g_m is {} now) would reduce it.",
            device.map_or_else(absent, |d| si(d.small_signal.gm_s, "S", 3))
        ),
        Mechanism::Flicker => " It is 1/f noise below the model's corner frequency: a device \
             with a lower corner, or a band that starts higher, would reduce it."
            .to_string(),
        Mechanism::Thermal => {
            let lever = study.and_then(|s| {
                let i = s.levers.iter().position(|l| l.lever.name == top.part)?;
                s.s(i, "noise_figure")
            });
            match lever {
                // ∂NF/∂ln R = NF·S: a 10 % rise moves NF by about NF·S·ln 1.1 dB.
                Some(v) if v.abs() >= 1e-4 => format!(
                    " Raising {} by 10 % would move the noise figure by about {} dB; {} it \
                     reduces the noise.",
                    cell(&top.part),
                    plain(nf * v * 1.1f64.ln(), 2),
                    if v > 0.0 { "lowering" } else { "raising" }
                ),
                _ => " A resistor's noise current is 4kT/R: in series with the signal (a \
                     degeneration or a series resistor) a lower value makes less noise at the \
                     output, across it (a bias or a shunt resistor) a higher value does."
                    .to_string(),
            }
        }
    };
    first.push_str(&advice);
    let mut out = vec![first];
    if let (Some(r_opt), Some(nf_min)) = (n.r_opt_ohm, n.nf_min_db) {
        let rs = n.source_resistance_ohm;
        let ratio = rs / r_opt;
        let sentence = if ratio < 1.0 / 1.5 {
            format!(
                "The {} source is {}× below the optimum source resistance e_n/i_n = {} (where \
                 the noise figure would be {} dB, e_n and i_n taken as uncorrelated): the stage's \
                 voltage noise e_n dominates, so lowering it (more g_m in the input device, less \
                 resistance in series with the input) helps more than lowering its current noise.",
                si(rs, "Ω", 3),
                plain(1.0 / ratio, 2),
                si(r_opt, "Ω", 4),
                plain(nf_min, 3)
            )
        } else if ratio > 1.5 {
            format!(
                "The {} source is {}× above the optimum source resistance e_n/i_n = {} (where \
                 the noise figure would be {} dB, e_n and i_n taken as uncorrelated): the stage's \
                 current noise i_n dominates, so lowering it (less base current in a bipolar input, \
                 more resistance across the input) helps more than lowering its voltage noise.",
                si(rs, "Ω", 3),
                plain(ratio, 2),
                si(r_opt, "Ω", 4),
                plain(nf_min, 3)
            )
        } else {
            format!(
                "The {} source is within 1.5× of the optimum source resistance e_n/i_n = {}: \
                 matching it exactly would gain at most {} dB.",
                si(rs, "Ω", 3),
                si(r_opt, "Ω", 4),
                plain((nf - nf_min).max(0.0), 2)
            )
        };
        out.push(sentence);
    }
    out
}

/// The levers on `figure` from the study, strongest first: (name, sensitivity).
fn ranked(s: &Study, figure: &str) -> Vec<(String, f64)> {
    let mut ranked: Vec<(String, f64)> = s
        .levers
        .iter()
        .enumerate()
        .filter_map(|(i, l)| s.s(i, figure).map(|v| (l.lever.name.clone(), v)))
        .filter(|(_, v)| v.abs() >= 1e-3)
        .collect();
    ranked.sort_by(|a, b| b.1.abs().total_cmp(&a.1.abs()).then(a.0.cmp(&b.0)));
    ranked
}

/// "The strongest levers on f_H (…): load.c −0.998 %/% (fixed), RC −0.498 %/%, …" — the
/// list only; the advice is given once, with the capacitor that sets the cut-off.
fn levers(s: &Study, figure: &str, symbol: &str, fixed: &[String]) -> Option<String> {
    let ranked = ranked(s, figure);
    if ranked.is_empty() {
        return None;
    }
    let list: Vec<String> = ranked
        .iter()
        .take(4)
        .map(|(n, v)| {
            let mark = if fixed.contains(n) { " (fixed)" } else { "" };
            format!("{} {} %/%{mark}", cell(n), plain(*v, 3))
        })
        .collect();
    Some(format!(
        "The strongest levers on {symbol} (normalised sensitivity, % change of {symbol} per % \
         change of the part): {}.",
        list.join(", ")
    ))
}

/// The strongest lever on `figure` the design may change, and whether to raise it, to move
/// the figure up (`up`) or down.
fn free_lever(
    s: &Study,
    figure: &str,
    up: bool,
    fixed: &[String],
) -> Option<(String, f64, &'static str)> {
    // Parts and model parameters only: temperature and supplies are conditions, not choices.
    let (name, v) = ranked(s, figure).into_iter().find(|(n, _)| {
        !fixed.contains(n)
            && n != "temperature"
            && !n.starts_with("supply ")
            && n != "signal.resistance"
    })?;
    let verb = if (v < 0.0) == up { "lower" } else { "raise" };
    Some((name, v, verb))
}

fn high(a: &Analysis, study: Option<&Study>, fixed: &[String]) -> Vec<String> {
    let h = &a.high;
    let mut caps: Vec<_> = h.octc.caps.iter().collect();
    if caps.is_empty() {
        return vec!["No capacitor limits the bandwidth at the high end: the design has no high-frequency capacitances.".to_string()];
    }
    caps.sort_by(|x, y| y.share.total_cmp(&x.share));
    let mut out = vec![high_cause(h, &caps)];
    out.push(high_estimate_accuracy(a));
    if let Some(text) = right_half_plane_zero(a) {
        out.push(text);
    }
    out.push(high_lever(caps[0], study, fixed));
    out
}

/// Which capacitor sets the upper cut-off, with what share, and whether Miller
/// multiplication is why; `caps` sorted by share, largest first.
fn high_cause(h: &High, caps: &[&OpenCircuitCap]) -> String {
    let top = caps[0];
    let mut lead = format!(
        "The upper cut-off is set mainly by **{}**: it holds {} of the time-constant sum Στ = {} \
         (f_H ≈ {} from the sum), with {} seeing {}.",
        cell(&top.part),
        pct(top.share),
        h.b1_s.map_or_else(absent, |b| si(b, "s", 4)),
        h.octc.f_estimate_hz.map_or_else(absent, |f| si(f, "Hz", 4)),
        si(top.c_f, "F", 3),
        si(top.r_ohm, "Ω", 4),
    );
    if let Some(m) = top.miller_factor {
        if m >= 2.0 {
            lead.push_str(&format!(
                " That resistance is {}× the sum of the resistances from its terminals to ground \
                 ({} + {}): the capacitor bridges a gain, and Miller multiplication makes it look \
                 {}× larger.",
                plain(m, 3),
                si(top.r_a_ohm, "Ω", 3),
                si(top.r_b_ohm, "Ω", 3),
                plain(m, 3)
            ));
        }
    }
    if caps.len() > 1 && caps[1].share >= 0.2 {
        lead.push_str(&format!(
            " **{}** follows with {}.",
            cell(&caps[1].part),
            pct(caps[1].share)
        ));
    }
    lead
}

/// Which estimate of the upper cut-off to trust, and why.
fn high_estimate_accuracy(a: &Analysis) -> String {
    let h = &a.high;
    let exact = h.f3db_hz;
    let e = &h.estimate_errors;
    let exact_text = exact.map_or_else(absent, |f| si(f, "Hz", 4));
    let best = best_of(&[
        ("the time-constant sum", e.time_constant),
        ("the second-order estimate from b1 and b2", e.second_order),
        ("the root-sum-square of the poles and zeros", e.root_sum_square),
    ]);
    let best_text = best.map_or(String::new(), |(name, err)| {
        format!(" The closest estimate here is {name} ({}).", signed_pct(err))
    });
    let complex = h.poles_hz.first().is_some_and(|p| p.im_hz != 0.0);
    let tc_ok = e.time_constant.is_some_and(|x| x.abs() <= TRUSTED_ERROR);
    if exact.is_none() {
        "No upper −3 dB point was found within three decades above the sweep: the response does not fall by 3 dB there.".to_string()
    } else if complex {
        let q = quality(&h.poles_hz[0]);
        format!(
            "The two lowest high-frequency poles form a complex pair (Q = {}), so no single pole dominates; \
             the time-constant sum is {} off the exact {exact_text}.{best_text} Check the response for peaking.",
            plain(q, 3),
            e.time_constant.map_or_else(absent, signed_pct),
        )
    } else if tc_ok && h.dominance_ratio.is_none_or(|k| k >= DOMINANT_RATIO) {
        match h.dominance_ratio {
            Some(k) => format!(
                "The next pole is {}× higher, so the single-pole estimate holds: the time-constant sum \
                 is within {} of the exact {exact_text}.",
                plain(k, 3),
                e.time_constant.map_or_else(absent, signed_pct),
            ),
            None => format!(
                "There is one high-frequency pole; the time-constant sum is within {} of the exact {exact_text}.",
                e.time_constant.map_or_else(absent, signed_pct),
            ),
        }
    } else {
        let cause = match h.dominance_ratio {
            Some(k) if k < DOMINANT_RATIO => {
                format!("the two lowest poles are only {}× apart", plain(k, 3))
            }
            _ => {
                let near_zero = exact.and_then(|f| {
                    h.zeros_hz
                        .iter()
                        .map(|z| z.magnitude_hz())
                        .filter(|m| *m > 0.0 && *m < 10.0 * f)
                        .reduce(f64::min)
                });
                match near_zero {
                    Some(z) => format!(
                        "a zero at {} sits within a decade of the band edge",
                        si(z, "Hz", 3)
                    ),
                    None if a.has_inductors => {
                        "inductors shape the band edge, and the time constants count them as wires"
                            .to_string()
                    }
                    None => "the poles beyond the first add up".to_string(),
                }
            }
        };
        format!(
            "Warning: the time-constant sum misses the exact {exact_text} by {}, because {cause}.{best_text}",
            e.time_constant.map_or_else(absent, signed_pct),
        )
    }
}

/// Where the nearest right-half-plane zero sits against the upper cut-off, when it is within
/// a decade of it.
fn right_half_plane_zero(a: &Analysis) -> Option<String> {
    let h = &a.high;
    let exact = h.f3db_hz;
    let z = h
        .zeros_hz
        .iter()
        .filter(|z| z.re_hz > 0.0)
        .min_by(|x, y| x.magnitude_hz().total_cmp(&y.magnitude_hz()))?;
    let f_z = z.magnitude_hz();
    // A zero more than a decade above the band edge does not shape the band: not discussed.
    let place = match exact.map(|f| f_z / f) {
        Some(r) if r < 1.0 => "below the upper cut-off, inside the band".to_string(),
        Some(r) if r < 10.0 => {
            format!("only {}× above the cut-off, close enough to shape the band edge", plain(r, 3))
        }
        _ => return None,
    };
    let effect = if a.midband.gain < 0.0 {
        "above it the stage stops inverting and the phase keeps falling"
    } else {
        "above it the phase keeps falling"
    };
    Some(format!("A right-half-plane zero sits at {}, {place}; {effect}.", si(f_z, "Hz", 4)))
}

/// What would raise the upper cut-off, from the capacitor that sets it; through the
/// resistance it sees and the strongest free lever when the capacitor is fixed.
fn high_lever(top: &OpenCircuitCap, study: Option<&Study>, fixed: &[String]) -> String {
    let name = cell(&top.part);
    let free = study.and_then(|s| free_lever(s, "upper_cutoff", true, fixed));
    let through = |verb: &str| match &free {
        Some((lever, v, dir)) => format!(
            "; the strongest lever the design may change is {}: {dir} it ({} %/%)",
            cell(lever),
            plain(*v, 3)
        ),
        None => format!("; {verb}"),
    };
    let proportion = if top.share >= 0.8 {
        format!("with {} of the sum it sets f_H almost in proportion", pct(top.share))
    } else {
        format!(
            "the time-constant estimate moves by about {} % per % change of its time constant",
            plain(top.share * 100.0, 2)
        )
    };
    if fixed.contains(&top.part) {
        return format!(
            "**{name}** is fixed, so f_H is raised through the {} it sees ({proportion}){}.",
            si(top.r_ohm, "Ω", 3),
            through("lower the resistances that set it")
        );
    }
    let lever = if top.miller_factor.is_some_and(|m| m >= 2.0) {
        format!(
            "lower the gain across {name} or the resistance driving its input side, or shrink the \
             capacitance itself"
        )
    } else {
        format!("lower the {} that {name} sees, or its capacitance", si(top.r_ohm, "Ω", 3))
    };
    format!("To raise f_H, {lever}: {proportion}.")
}

/// The estimate with the smallest error, if any has one.
fn best_of(list: &[(&'static str, Option<f64>)]) -> Option<(&'static str, f64)> {
    list.iter()
        .filter_map(|(n, e)| e.map(|e| (*n, e)))
        .min_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))
}

fn quality(p: &RootHz) -> f64 {
    let w = p.magnitude_hz();
    w / (2.0 * p.re_hz.abs())
}

fn low(a: &Analysis, study: Option<&Study>, fixed: &[String]) -> Vec<String> {
    let l = &a.low;
    let mut out = Vec::new();
    let mut caps: Vec<_> = l.sctc.caps.iter().collect();
    if caps.is_empty() {
        out.push("No coupling or bypass capacitor: the response extends to DC.".to_string());
        return out;
    }
    caps.sort_by(|x, y| y.share.total_cmp(&x.share));
    let top = caps[0];
    out.push(format!(
        "The lower cut-off is set mainly by **{}** ({}, seeing {}): it holds {} of Σ 1/τ, which \
         gives f_L ≈ {}.",
        cell(&top.part),
        si(top.c_f, "F", 3),
        si(top.r_ohm, "Ω", 4),
        pct(top.share),
        l.sctc.f_estimate_hz.map_or_else(absent, |f| si(f, "Hz", 4))
    ));
    let exact = l.f3db_hz.map_or_else(absent, |f| si(f, "Hz", 4));
    let err = l.estimate_errors.time_constant.map_or_else(absent, signed_pct);
    let tc = l.estimate_errors.time_constant;
    let one_pole_no_zero =
        l.poles_hz.len() == 1 && l.zeros_hz.iter().all(|z| z.magnitude_hz() == 0.0);
    if l.f3db_hz.is_none() {
        out.push(
            "No lower −3 dB point was found within three decades below the sweep.".to_string(),
        );
    } else if one_pole_no_zero && tc.is_some_and(|x| x.abs() < 1e-6) {
        out.push(format!("One low-frequency pole and no zero off the origin: the short-circuit estimate is exact ({err})."));
    } else if tc.is_some_and(|x| x.abs() <= TRUSTED_ERROR)
        && l.dominance_ratio.is_none_or(|k| k >= DOMINANT_RATIO)
    {
        out.push(format!("The short-circuit sum holds: {err} from the exact {exact}."));
    } else {
        let cause = match l.dominance_ratio {
            Some(k) if k < DOMINANT_RATIO => format!("the highest low-frequency pole is only {}× above the next", plain(k, 3)),
            _ => "the other low-frequency poles, and the zeros of the coupling and bypass networks, add to the sum".to_string(),
        };
        let best = best_of(&[
            ("the short-circuit sum", tc),
            ("the root-sum-square of the poles and zeros", l.estimate_errors.root_sum_square),
        ]);
        out.push(format!(
            "Warning: the short-circuit sum is {err} off the exact {exact}, because {cause}.{}",
            best.map_or(String::new(), |(n, e)| format!(
                " The closest estimate here is {n} ({}).",
                signed_pct(e)
            ))
        ));
    }
    if fixed.contains(&top.part) {
        let free = study.and_then(|s| free_lever(s, "lower_cutoff", false, fixed));
        out.push(format!(
            "**{}** is fixed, so f_L is lowered through the {} it sees{}.",
            cell(&top.part),
            si(top.r_ohm, "Ω", 3),
            free.map_or(String::new(), |(lever, v, dir)| format!(
                "; the strongest lever the design may change is {}: {dir} it ({} %/%)",
                cell(&lever),
                plain(v, 3)
            ))
        ));
    } else {
        out.push(format!(
            "To lower f_L, enlarge {} or raise the {} it sees.",
            cell(&top.part),
            si(top.r_ohm, "Ω", 3)
        ));
    }
    out
}
