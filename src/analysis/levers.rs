//! The levers of tolerance analysis: every quantity a tolerance can move (part values, the
//! source resistance, supplies, the temperature, model parameters), where each acts in a
//! [`Design`], and copies of a design with levers scaled.
//!
//! In: a validated design. Out: [`Lever`]s in a fixed order and perturbed copies. No
//! evaluation here; `tolerance.rs` and the evaluation core use these.

use serde::Serialize;

use crate::design::Design;
use crate::design::{DeviceModel, PartKind, Tolerance, TransitSpec};

/// What kind of quantity a lever is (for the scaling identities).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum LeverClass {
    /// A resistance (parts, source, base resistance).
    Resistance,
    /// A capacitance, or a parameter that scales one (transit time, junction or oxide
    /// capacitance).
    Capacitance,
    /// A parameter that scales like 1/C (a transition frequency).
    InverseCapacitance,
    /// An inductance.
    Inductance,
    /// A transconductance part.
    Transconductance,
    /// Anything else (gains, currents, voltages, temperature).
    Other,
}

/// Where a lever acts.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Target {
    Part(usize),
    SourceResistance,
    Supply(usize),
    Temperature,
    Model(usize, &'static str),
}

/// A quantity tolerance analysis can move.
#[derive(Clone, Debug, Serialize)]
pub struct Lever {
    /// `R1`, `signal.resistance`, `vcc`, `temperature`, `RFN1.beta`.
    pub name: String,
    /// Nominal value, SI units.
    pub nominal: f64,
    /// Its tolerance, when it has one.
    pub tolerance: Option<Tolerance>,
    /// Its kind.
    pub class: LeverClass,
    #[serde(skip)]
    target: Target,
}

fn slot(design: &mut Design, target: Target) -> Option<&mut f64> {
    match target {
        Target::Part(i) => match &mut design.parts[i].kind {
            PartKind::Resistor { value, .. }
            | PartKind::Capacitor { value, .. }
            | PartKind::Inductor { value, .. }
            | PartKind::Transconductance { value, .. }
            | PartKind::VoltageAmplifier { value, .. } => Some(&mut value.nominal),
            _ => None,
        },
        Target::SourceResistance => Some(&mut design.signal.resistance.nominal),
        Target::Supply(i) => Some(&mut design.supplies[i].voltage.nominal),
        Target::Temperature => Some(&mut design.temperature_k),
        Target::Model(i, key) => match &mut design.models[i].device {
            DeviceModel::Bipolar(b) => match key {
                "beta" => Some(&mut b.beta.nominal),
                "saturation_current" => Some(&mut b.saturation_current.nominal),
                "early_voltage" => b.early_voltage.as_mut().map(|v| &mut v.nominal),
                "base_resistance" => Some(&mut b.base_resistance.nominal),
                "transit_time" => match &mut b.transit {
                    Some(TransitSpec::TransitTime(t)) => Some(&mut t.nominal),
                    _ => None,
                },
                "transition_frequency" => match &mut b.transit {
                    Some(TransitSpec::TransitionFrequency { frequency, .. }) => {
                        Some(&mut frequency.nominal)
                    }
                    _ => None,
                },
                "emitter_junction" => {
                    b.emitter_junction.as_mut().map(|j| &mut j.capacitance.nominal)
                }
                "collector_junction" => {
                    b.collector_junction.as_mut().map(|j| &mut j.capacitance.nominal)
                }
                _ => None,
            },
            DeviceModel::Mos(m) => match key {
                "process_transconductance" => Some(&mut m.process_transconductance.nominal),
                "threshold" => Some(&mut m.threshold.nominal),
                "channel_length_modulation" => Some(&mut m.channel_length_modulation.nominal),
                "oxide_capacitance" => m.oxide_capacitance.as_mut().map(|c| &mut c.nominal),
                "overlap_capacitance" => m.overlap_capacitance.as_mut().map(|c| &mut c.nominal),
                "gate_source_capacitance" => {
                    m.gate_source_capacitance.as_mut().map(|c| &mut c.nominal)
                }
                "gate_drain_capacitance" => {
                    m.gate_drain_capacitance.as_mut().map(|c| &mut c.nominal)
                }
                "drain_body_capacitance" => {
                    m.drain_body_capacitance.as_mut().map(|c| &mut c.nominal)
                }
                _ => None,
            },
        },
    }
}

/// Every lever of a design, in a fixed order: parts, source, supplies, temperature, model
/// parameters. Levers whose nominal is zero (nothing to scale) are left out.
pub fn levers(design: &Design) -> Vec<Lever> {
    let mut out = Vec::new();
    for (i, p) in design.parts.iter().enumerate() {
        let (value, class) = match &p.kind {
            PartKind::Resistor { value, .. } => (value, LeverClass::Resistance),
            PartKind::Capacitor { value, .. } => (value, LeverClass::Capacitance),
            PartKind::Inductor { value, .. } => (value, LeverClass::Inductance),
            PartKind::Transconductance { value, .. } => (value, LeverClass::Transconductance),
            PartKind::VoltageAmplifier { value, .. } => (value, LeverClass::Other),
            _ => continue,
        };
        out.push(Lever {
            name: p.name.clone(),
            nominal: value.nominal,
            tolerance: value.tolerance,
            class,
            target: Target::Part(i),
        });
    }
    let r = &design.signal.resistance;
    out.push(Lever {
        name: "signal.resistance".into(),
        nominal: r.nominal,
        tolerance: r.tolerance,
        class: LeverClass::Resistance,
        target: Target::SourceResistance,
    });
    for (i, s) in design.supplies.iter().enumerate() {
        out.push(Lever {
            name: s.node.clone(),
            nominal: s.voltage.nominal,
            tolerance: s.voltage.tolerance,
            class: LeverClass::Other,
            target: Target::Supply(i),
        });
    }
    out.push(Lever {
        name: "temperature".into(),
        nominal: design.temperature_k,
        tolerance: None,
        class: LeverClass::Other,
        target: Target::Temperature,
    });
    for (i, m) in design.models.iter().enumerate() {
        let mut add =
            |key: &'static str, t: Option<&crate::design::Toleranced>, class: LeverClass| {
                if let Some(t) = t {
                    if t.nominal != 0.0 {
                        out.push(Lever {
                            name: format!("{}.{key}", m.name),
                            nominal: t.nominal,
                            tolerance: t.tolerance,
                            class,
                            target: Target::Model(i, key),
                        });
                    }
                }
            };
        match &m.device {
            DeviceModel::Bipolar(b) => {
                add("beta", Some(&b.beta), LeverClass::Other);
                add("saturation_current", Some(&b.saturation_current), LeverClass::Other);
                add("early_voltage", b.early_voltage.as_ref(), LeverClass::Other);
                add("base_resistance", Some(&b.base_resistance), LeverClass::Resistance);
                match &b.transit {
                    Some(TransitSpec::TransitTime(t)) => {
                        add("transit_time", Some(t), LeverClass::Capacitance)
                    }
                    Some(TransitSpec::TransitionFrequency { frequency, .. }) => {
                        add("transition_frequency", Some(frequency), LeverClass::InverseCapacitance)
                    }
                    None => {}
                }
                add(
                    "emitter_junction",
                    b.emitter_junction.as_ref().map(|j| &j.capacitance),
                    LeverClass::Capacitance,
                );
                add(
                    "collector_junction",
                    b.collector_junction.as_ref().map(|j| &j.capacitance),
                    LeverClass::Capacitance,
                );
            }
            DeviceModel::Mos(x) => {
                add(
                    "process_transconductance",
                    Some(&x.process_transconductance),
                    LeverClass::Other,
                );
                add("threshold", Some(&x.threshold), LeverClass::Other);
                add(
                    "channel_length_modulation",
                    Some(&x.channel_length_modulation),
                    LeverClass::Other,
                );
                add("oxide_capacitance", x.oxide_capacitance.as_ref(), LeverClass::Capacitance);
                add("overlap_capacitance", x.overlap_capacitance.as_ref(), LeverClass::Capacitance);
                add(
                    "gate_source_capacitance",
                    x.gate_source_capacitance.as_ref(),
                    LeverClass::Capacitance,
                );
                add(
                    "gate_drain_capacitance",
                    x.gate_drain_capacitance.as_ref(),
                    LeverClass::Capacitance,
                );
                add(
                    "drain_body_capacitance",
                    x.drain_body_capacitance.as_ref(),
                    LeverClass::Capacitance,
                );
            }
        }
    }
    out
}

/// A copy of `design` with each `(lever, factor)` applied multiplicatively.
pub fn perturbed(design: &Design, levers: &[Lever], changes: &[(usize, f64)]) -> Design {
    let mut d = design.clone();
    for &(i, factor) in changes {
        if let Some(v) = slot(&mut d, levers[i].target) {
            *v *= factor;
        }
    }
    d
}
