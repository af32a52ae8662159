//! The cautions a review states: computed ones, shown only when they apply and with their
//! numbers, and the standard notes of the trade.
//!
//! In: the design and its [`Analysis`]. Out: a list of [`Caution`]s in a fixed order.

use serde::Serialize;

use crate::analysis::{Analysis, OperatingPointReport};
use crate::circuit::devices::{BjtRegion, MosRegion};
use crate::circuit::operating_point::DeviceState;
use crate::design::Design;
use crate::notation::{absent, plain, si};
use crate::report::explain::DOMINANT_RATIO;

/// Supply magnitude from which the hazard caution is raised, V. 60 V DC is the usual
/// safety-extra-low-voltage limit for dry locations (IEC 61140 / IEC 62368-1 ES1 — from
/// memory; local codes decide).
pub const HAZARDOUS_SUPPLY_V: f64 = 60.0;
/// Fraction of the dissipation rating from which a device is flagged (common practice
/// derating).
pub const DISSIPATION_FLAG: f64 = 0.5;
/// V_CE below which a bipolar transistor is near saturation, V (common practice).
pub const VCE_EDGE_V: f64 = 0.5;
/// V_DS − V_ov below which a MOSFET is near the triode edge, V (common practice).
pub const VDS_EDGE_V: f64 = 0.2;

/// One caution.
#[derive(Clone, Debug, Serialize)]
pub struct Caution {
    /// Stable key, e.g. `close_poles`, `hazardous_voltage`.
    pub key: &'static str,
    /// `computed` (from this design's numbers) or `standard`.
    pub kind: &'static str,
    /// The caution, one or two sentences.
    pub text: String,
}

fn computed(key: &'static str, text: String) -> Caution {
    Caution { key, kind: "computed", text }
}

fn standard(key: &'static str, text: &str) -> Caution {
    Caution { key, kind: "standard", text: text.to_string() }
}

/// Every caution that applies to `design`.
pub fn cautions(design: &Design, a: &Analysis) -> Vec<Caution> {
    let mut out = Vec::new();
    response_cautions(a, &mut out);
    if let Some(op) = &a.operating_point {
        bias_cautions(op, design.temperature_k, &mut out);
    }
    if a.has_inductors {
        let gap = a
            .high
            .estimate_errors
            .time_constant
            .map_or_else(absent, |e| format!("{} %", plain(e * 100.0, 2)));
        out.push(computed(
            "inductors",
            format!(
                "The network has inductors: the time-constant estimates treat them as wires, so \
                 they can be far from the exact response here (the upper estimate is off by {gap}). \
                 Use the exact cut-offs."
            ),
        ));
    }
    standard_cautions(design, &mut out);
    out
}

/// Computed cautions on the response: poles too close for the estimates, complex poles,
/// peaking, a right-half-plane zero near the band.
fn response_cautions(a: &Analysis, out: &mut Vec<Caution>) {
    let h = &a.high;
    if let Some(k) = h.dominance_ratio.filter(|k| *k < DOMINANT_RATIO) {
        if h.poles_hz.first().is_some_and(|p| p.im_hz == 0.0) {
            out.push(computed(
                "close_poles",
                format!(
                    "The two lowest high-frequency poles are {}× apart (under {}×): the time-constant \
                     estimate of f_H is off by {}; use the exact value or the second-order estimate.",
                    plain(k, 3),
                    plain(DOMINANT_RATIO, 2),
                    h.estimate_errors.time_constant.map_or_else(absent, |e| format!("{} %", plain(e * 100.0, 2)))
                ),
            ));
        }
    }
    if let Some(p) = h.poles_hz.iter().find(|p| p.im_hz != 0.0) {
        let q = p.magnitude_hz() / (2.0 * p.re_hz.abs());
        out.push(computed(
            "complex_poles",
            format!(
                "The high-frequency poles include a complex pair at {} ± j{} (Q = {}). The \
                 time-constant sum can be optimistic or pessimistic here, and the step response \
                 can overshoot.",
                si(p.re_hz, "Hz", 4),
                si(p.im_hz.abs(), "Hz", 4),
                plain(q, 3)
            ),
        ));
    }
    if let Some(pk) = &h.peaking {
        out.push(computed(
            "peaking",
            format!(
                "The response peaks {} dB above mid-band at {}.",
                plain(pk.peak_db, 3),
                si(pk.at_hz, "Hz", 3)
            ),
        ));
    }
    if let (Some(f), Some(z)) = (
        h.f3db_hz,
        h.zeros_hz.iter().filter(|z| z.re_hz > 0.0).map(|z| z.magnitude_hz()).reduce(f64::min),
    ) {
        if z < 10.0 * f {
            out.push(computed(
                "rhp_zero",
                format!(
                    "A right-half-plane zero at {} is within a decade of the upper cut-off ({}): it \
                     adds phase lag that matters inside a feedback loop.",
                    si(z, "Hz", 4),
                    si(f, "Hz", 4)
                ),
            ));
        }
    }
}

/// Computed cautions on the bias: regions, dissipation against ratings, capacitances that
/// hold only at this bias.
fn bias_cautions(op: &OperatingPointReport, temperature_k: f64, out: &mut Vec<Caution>) {
    for d in &op.devices {
        let part = &d.bias.part;
        match &d.bias.state {
            DeviceState::Bjt { region, vce_v, .. } => match region {
                BjtRegion::Active if vce_v.abs() < VCE_EDGE_V => out.push(computed(
                    "bias_edge",
                    format!("{part} has V_CE = {}: close to saturation, its gain and Cμ will move with signal swing.", si(*vce_v, "V", 3)),
                )),
                BjtRegion::Active => {}
                other => out.push(computed(
                    "bias_region",
                    format!("{part} is not in the active region ({}); the small-signal figures do not describe an amplifier.", other.label()),
                )),
            },
            DeviceState::Mosfet { region, vds_v, overdrive_v, .. } => match region {
                MosRegion::Saturation if vds_v.abs() - overdrive_v < VDS_EDGE_V => out.push(computed(
                    "bias_edge",
                    format!("{part} has V_DS = {} against an overdrive of {}: close to the triode edge.", si(*vds_v, "V", 3), si(*overdrive_v, "V", 3)),
                )),
                MosRegion::Saturation => {}
                other => out.push(computed(
                    "bias_region",
                    format!("{part} is not in saturation ({}); the small-signal figures do not describe an amplifier.", other.label()),
                )),
            },
        }
        if let Some(max) = d.bias.max_power_w {
            if d.bias.power_w > DISSIPATION_FLAG * max {
                out.push(computed(
                    "dissipation",
                    format!(
                        "{part} dissipates {} of its {} rating ({} %); check the derating at \
                         the highest ambient temperature.",
                        si(d.bias.power_w, "W", 3),
                        si(max, "W", 3),
                        plain(d.bias.power_w / max * 100.0, 3)
                    ),
                ));
            }
        }
    }
    for s in op.stress.iter().filter(|s| s.over()) {
        let (unit, what) = match s.quantity {
            "power" => ("W", "dissipates"),
            _ => ("V", "holds"),
        };
        out.push(computed(
            "part_stress",
            format!(
                "{} {what} {} at the operating point, {} % of its {} rating: above the \
                 derating to {} % (half the power and 80 % of the voltage are common practice; \
                 `analysis.derating` sets them); choose a higher rating.",
                s.part,
                si(s.value, unit, 3),
                plain(s.fraction * 100.0, 3),
                si(s.rating, unit, 3),
                plain(s.derated_limit / s.rating * 100.0, 3)
            ),
        ));
    }
    if !op.devices.is_empty() {
        out.push(computed(
            "bias_dependent_capacitance",
            format!(
                "Device capacitances and gm hold at this operating point and {} °C only; a bias \
                 or temperature change moves them.",
                plain(temperature_k - 273.15, 4)
            ),
        ));
    }
}

/// The standard notes, and the hazardous-voltage caution when the supplies call for it.
fn standard_cautions(design: &Design, out: &mut Vec<Caution>) {
    out.push(standard(
        "small_signal",
        "These are small-signal results for the stated models; confirm gain and bandwidth by \
         measurement on the built stage.",
    ));
    // The cable note, only where the load is one: a load capacitance at the output.
    let load_c: f64 = design
        .parts
        .iter()
        .filter_map(|p| match &p.kind {
            crate::design::PartKind::Capacitor {
                value,
                role: Some(crate::design::CapacitorRole::Load),
                ..
            } => Some(value.nominal),
            crate::design::PartKind::Capacitor { value, .. } if p.name == "load.c" => {
                Some(value.nominal)
            }
            _ => None,
        })
        .sum();
    if load_c > 0.0 {
        out.push(computed(
            "fixtures",
            format!(
                "The load is modelled as {} of capacitance; a longer cable, a probe or a \
                 fixture adds to it, and the upper cut-off moves with it.",
                si(load_c, "F", 3)
            ),
        ));
    }
    // The largest voltage between any two rails (ground included): ±40 V rails are 80 V apart.
    let top = design.supplies.iter().map(|s| s.voltage.nominal).fold(0.0, f64::max);
    let bottom = design.supplies.iter().map(|s| s.voltage.nominal).fold(0.0, f64::min);
    let highest = top - bottom;
    if highest >= HAZARDOUS_SUPPLY_V {
        out.push(computed(
            "hazardous_voltage",
            format!(
                "The supplies span {}, a hazardous voltage. Work on this stage needs qualified \
                 hands; local electrical codes and licensed practice take precedence over this \
                 document.",
                si(highest, "V", 3)
            ),
        ));
    } else if design.mains_powered {
        out.push(standard(
            "hazardous_voltage",
            "This stage is built into mains-powered equipment: the work needs qualified hands, \
             and local electrical codes and licensed practice take precedence over this document.",
        ));
    }
}

#[cfg(test)]
mod standard_note_tests {
    use super::*;

    fn keys_of(text: &str) -> Vec<&'static str> {
        let d = crate::design::load(text).design.expect("a valid design");
        let a = crate::analysis::analyze(&d).expect("analysis");
        cautions(&d, &a).iter().map(|c| c.key).collect()
    }

    fn divider(environment: &str, load: &str) -> String {
        format!(
            "tauweave: 1\ndesign: {{id: t, title: T, revision: A, date: 2026-12-01}}\n{environment}\
             supplies: {{vcc: 9 V}}\nsignal: {{at: in, resistance: 50}}\noutput: {{at: out{load}}}\n\
             parts:\n  R0: {{kind: resistor, value: 10k, between: [vcc, in]}}\n  \
             R1: {{kind: resistor, value: 1k, between: [in, out]}}\n  \
             R2: {{kind: resistor, value: 1k, between: [out, gnd]}}\n"
        )
    }

    #[test]
    fn the_safety_note_needs_hazardous_supplies_or_mains() {
        assert!(!keys_of(&divider("", "")).contains(&"hazardous_voltage"));
        let mains = divider("environment: {mains_powered: true}\n", "");
        assert!(keys_of(&mains).contains(&"hazardous_voltage"));
        let high = divider("", "").replace("vcc: 9 V", "vcc: 120 V");
        assert!(keys_of(&high).contains(&"hazardous_voltage"));
    }

    #[test]
    fn the_cable_note_needs_a_load_capacitance() {
        assert!(!keys_of(&divider("", "")).contains(&"fixtures"));
        assert!(keys_of(&divider("", ", load_capacitance: 100 pF")).contains(&"fixtures"));
    }
}
