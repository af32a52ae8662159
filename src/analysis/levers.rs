//! The levers of tolerance analysis: every quantity a tolerance can move (part values, the
//! source resistance, supplies, the temperature, model parameters), where each acts in a
//! [`Design`], and copies of a design with levers scaled.
//!
//! In: a validated design. Out: [`Lever`]s in a fixed order and perturbed copies. No
//! evaluation here; `tolerance.rs` and the evaluation core use these.

use serde::Serialize;

use crate::design::toleranced::{ModelParameter, Scaling};
use crate::design::{Design, PartKind, Tolerance};

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

impl From<Scaling> for LeverClass {
    fn from(s: Scaling) -> LeverClass {
        match s {
            Scaling::Resistance => LeverClass::Resistance,
            Scaling::Capacitance => LeverClass::Capacitance,
            Scaling::InverseCapacitance => LeverClass::InverseCapacitance,
            Scaling::Other => LeverClass::Other,
        }
    }
}

/// Where a lever acts.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Target {
    Part(usize),
    SourceResistance,
    Supply(usize),
    Temperature,
    Model(usize, ModelParameter),
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

impl Lever {
    /// The part whose value this lever is (index into `Design::parts`).
    pub(crate) fn part(&self) -> Option<usize> {
        match self.target {
            Target::Part(i) => Some(i),
            _ => None,
        }
    }

    /// True for the signal source's resistance.
    pub(crate) fn is_source_resistance(&self) -> bool {
        self.target == Target::SourceResistance
    }
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
        Target::Model(i, parameter) => {
            parameter.get_mut(&mut design.models[i].device).map(|t| &mut t.nominal)
        }
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
        for &parameter in ModelParameter::of(&m.device) {
            let Some(t) = parameter.get(&m.device).filter(|t| t.nominal != 0.0) else { continue };
            out.push(Lever {
                name: format!("{}.{}", m.name, parameter.key()),
                nominal: t.nominal,
                tolerance: t.tolerance,
                class: LeverClass::from(parameter.scaling()),
                target: Target::Model(i, parameter),
            });
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
