//! The computed explanation of the stage at its ports and in time: how each port presents
//! itself to the reference impedance and what resistance a match would need, where and how
//! the stage is only conditionally stable, and where the step's rise and overshoot come from
//! beside the one-pole rule and the damping of the dominant pole pair.
//!
//! In: the [`Analysis`] and the limits the design asks. Out: Markdown paragraphs for
//! `explanation(side="ports")`. Every sentence is chosen by the numbers and carries them.
//! No I/O.

use faer::c64;

use crate::analysis::Analysis;
use crate::analysis::ports::{PortPoint, PortsReport, vswr};
use crate::analysis::step::StepReport;
use crate::notation::{plain, si};

/// The return loss a port is called matched at when the design asks none, dB (common
/// practice: 10 dB, a VSWR of 1.92).
pub const MATCHED_RETURN_LOSS_DB: f64 = 10.0;

/// A port at least this many times above (or below) Z₀ is a bridging (or a low-impedance)
/// port rather than a poor match.
const MISMATCH_RATIO: f64 = 3.0;

/// The return losses and μ the design asks, when it does.
#[derive(Clone, Copy, Debug, Default)]
pub struct Asked {
    /// `input_return_loss.min`, dB.
    pub input_return_loss_db: Option<f64>,
    /// `output_return_loss.min`, dB.
    pub output_return_loss_db: Option<f64>,
}

impl Asked {
    /// The minimum return losses `req` states.
    pub fn of(req: &crate::design::Requirements) -> Asked {
        Asked {
            input_return_loss_db: req.input_return_loss.and_then(|l| l.min),
            output_return_loss_db: req.output_return_loss.and_then(|l| l.min),
        }
    }
}

/// The resistive range that gives a return loss of at least `db` in `z0`: |Γ| = 10^(−RL/20),
/// R from Z₀(1 − |Γ|)/(1 + |Γ|) to Z₀(1 + |Γ|)/(1 − |Γ|).
pub fn matched_range(z0: f64, db: f64) -> (f64, f64) {
    let g = 10f64.powf(-db / 20.0);
    (z0 * (1.0 - g) / (1.0 + g), z0 * (1.0 + g) / (1.0 - g))
}

fn impedance(z: c64) -> String {
    let sign = if z.im < 0.0 { "−" } else { "+" };
    format!("{} {sign} j{}", si(z.re, "Ω", 4), si(z.im.abs(), "Ω", 4))
}

/// One port's sentence: what it presents, its reflection, and what a match would need.
fn port(
    which: &str,
    z: c64,
    gamma: c64,
    z0: f64,
    asked: Option<f64>,
    worst: Option<(f64, f64)>,
) -> String {
    let rl = (gamma.norm() > 0.0).then(|| -20.0 * gamma.norm().log10());
    let lead = if which == "input" {
        format!("With both ports in the {} reference the input", si(z0, "Ω", 4))
    } else {
        "The output, likewise,".to_string()
    };
    let mut p = format!(
        "{lead} presents **{}**: |S{}| = {}, a return loss of **{}**{}.",
        impedance(z),
        if which == "input" { "₁₁" } else { "₂₂" },
        plain(gamma.norm(), 3),
        rl.map_or("beyond measure".to_string(), |r| format!("{} dB", plain(r, 3))),
        vswr(gamma).map_or(String::new(), |v| format!(" (VSWR {})", plain(v, 3)))
    );
    let ratio = z.norm() / z0;
    if ratio >= MISMATCH_RATIO {
        p.push_str(&format!(
            " At {}× the reference it bridges the line rather than terminating it.",
            plain(ratio, 3)
        ));
    } else if ratio <= 1.0 / MISMATCH_RATIO {
        p.push_str(&format!(
            " At 1/{} of the reference it all but shorts the line.",
            plain(1.0 / ratio, 3)
        ));
    }
    let target = asked.unwrap_or(MATCHED_RETURN_LOSS_DB);
    let (lo, hi) = matched_range(z0, target);
    let why = if asked.is_some() { "the required" } else { "a matched port's usual" };
    let need = format!(
        "to reach {why} {} dB it would have to look like {} … {}, resistive",
        plain(target, 3),
        si(lo, "Ω", 3),
        si(hi, "Ω", 3)
    );
    // A port far from Z₀ that no requirement asks to match is so by design (a bridging
    // input): no advice to match it.
    let deliberate = asked.is_none() && (ratio >= MISMATCH_RATIO || ratio <= 1.0 / MISMATCH_RATIO);
    match worst {
        Some((db, f)) if db < target && !deliberate => p.push_str(&format!(
            " Across the band it is least at {}, {} dB: {need} there.",
            si(f, "Hz", 4),
            plain(db, 3)
        )),
        Some((db, f)) => p.push_str(&format!(
            " Across the band it is least at {}, {} dB.",
            si(f, "Hz", 4),
            plain(db, 3)
        )),
        None if rl.is_none_or(|r| r < target) && !deliberate => {
            p.push_str(&format!(" {}.", capitalised(&need)));
        }
        None => {}
    }
    p
}

fn capitalised(s: &str) -> String {
    let mut c = s.chars();
    c.next().map_or(String::new(), |f| f.to_uppercase().collect::<String>() + c.as_str())
}

/// The stability paragraph: unconditional over the sweep, or where and how not.
fn stability(p: &PortsReport) -> Option<String> {
    let first = p.points.first()?.frequency_hz;
    let last = p.points.last()?.frequency_hz;
    let least = p
        .points
        .iter()
        .filter_map(|q| q.mu().map(|m| (m, q)))
        .min_by(|a, b| a.0.total_cmp(&b.0))?;
    let (mu, at): (f64, &PortPoint) = least;
    let ranges = p.conditionally_stable();
    if ranges.is_empty() {
        return Some(format!(
            "μ stays at or above 1 from {} to {} (least {} at {}): no passive source or load \
             impedance makes the stage oscillate there.",
            si(first, "Hz", 3),
            si(last, "Hz", 3),
            plain(mu, 4),
            si(at.frequency_hz, "Hz", 4)
        ));
    }
    let list: Vec<String> =
        ranges.iter().map(|(a, b)| format!("{} … {}", si(*a, "Hz", 3), si(*b, "Hz", 3))).collect();
    let k = at.k().map_or(String::new(), |k| format!(", K = {}", plain(k, 3)));
    Some(format!(
        "The stage is only **conditionally stable** at {}: μ falls to **{}** at {}{k}, |Δ| = {}. \
         There some passive source or load impedance would make it oscillate, though the \
         design's own terminations may not; loss where the gain is not needed (a resistor in \
         series with the input or across the output at those frequencies, common practice) \
         raises μ.",
        list.join(", "),
        plain(mu, 3),
        si(at.frequency_hz, "Hz", 4),
        plain(at.delta().norm(), 3)
    ))
}

/// The step paragraph: rise against the one-pole rule, the overshoot against the damping of
/// the dominant complex pole pair, the settling time against the one-pole 4.6τ.
fn step(s: &StepReport, poles: &[crate::analysis::RootHz]) -> String {
    let mut p = format!("The step rises (10–90 %) in **{}**", si(s.rise_time_s, "s", 4));
    if let Some(rule) = s.rule_of_thumb_s {
        let err = rule / s.rise_time_s - 1.0;
        p.push_str(&format!(
            "; the one-pole rule 0.35/f_H gives {} ({})",
            si(rule, "s", 4),
            crate::notation::signed_percent(err, 2)
        ));
    }
    p.push('.');
    // The complex pair nearest the origin: a lone pair of its damping overshoots by
    // e^(−πζ/√(1 − ζ²)) (common practice).
    let pair = poles
        .iter()
        .filter(|r| r.im_hz > 0.0 && r.re_hz < 0.0)
        .min_by(|a, b| a.re_hz.hypot(a.im_hz).total_cmp(&b.re_hz.hypot(b.im_hz)));
    if s.overshoot > 0.0 {
        p.push_str(&format!(" It overshoots by **{} %**", plain(100.0 * s.overshoot, 3)));
        match pair {
            Some(r) => {
                let fn_hz = r.re_hz.hypot(r.im_hz);
                let zeta = -r.re_hz / fn_hz;
                let alone = (-std::f64::consts::PI * zeta / (1.0 - zeta * zeta).sqrt()).exp();
                p.push_str(&format!(
                    ": the pole pair at f_n = {} has damping ζ = {}, and a lone pair of that \
                     damping would overshoot by {} %; the other poles and the zeros make the \
                     difference.",
                    si(fn_hz, "Hz", 4),
                    plain(zeta, 3),
                    plain(100.0 * alone, 3)
                ));
            }
            None => p.push_str(" with only real poles: the zeros make it."),
        }
    } else {
        p.push_str(" It does not overshoot.");
    }
    if let (Some(t), Some(rule)) = (s.settling_time_s, s.rule_of_thumb_s) {
        // One pole at f_H settles to a band b in τ·ln(1/b), τ = 1/(2πf_H) = rule/0.35/(2π).
        let tau = rule / 0.35 / (2.0 * std::f64::consts::PI);
        let one_pole = tau * (1.0 / s.settling_band).ln();
        p.push_str(&format!(
            " It settles within ±{} % in {}, against {} for a single pole at f_H.",
            plain(100.0 * s.settling_band, 3),
            si(t, "s", 4),
            si(one_pole, "s", 4)
        ));
    }
    p
}

/// Paragraphs about the ports and the step of `a`.
pub fn explain(a: &Analysis, asked: Asked) -> Vec<String> {
    let mut out = Vec::new();
    if let Some(p) = &a.ports
        && let Some(q) = &p.spot
    {
        let z0 = p.reference_ohm;
        // The port's impedance with the other port in Z₀: the one its return loss is of.
        let one = c64::new(1.0, 0.0);
        let seen = |g: c64| c64::new(z0, 0.0) * (one + g) / (one - g);
        let band = p.band.as_ref();
        out.push(port(
            "input",
            seen(q.s[0]),
            q.s[0],
            z0,
            asked.input_return_loss_db,
            band.and_then(|b| b.input_return_loss_db),
        ));
        out.push(port(
            "output",
            seen(q.s[3]),
            q.s[3],
            z0,
            asked.output_return_loss_db,
            band.and_then(|b| b.output_return_loss_db),
        ));
    }
    if let Some(p) = &a.ports {
        out.extend(stability(p));
    }
    if let Some(s) = &a.step {
        let poles = if a.low.sctc.caps.is_empty() { &a.poles } else { &a.high.poles_hz };
        out.push(step(s, poles));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ten_db_in_fifty_ohms_is_26_to_96_ohms() {
        // |Γ| = 10^(−0.5) = 0.3162: R = 50·0.6838/1.3162 = 25.98 Ω and 50·1.3162/0.6838 =
        // 96.25 Ω (by hand; common practice: VSWR 1.92).
        let (lo, hi) = matched_range(50.0, 10.0);
        assert!((lo - 25.975).abs() < 1e-3 && (hi - 96.248).abs() < 1e-3, "{lo} {hi}");
        assert!((hi / 50.0 - vswr(c64::new(10f64.powf(-0.5), 0.0)).unwrap()).abs() < 1e-12);
    }
}
