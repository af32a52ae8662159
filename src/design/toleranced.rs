//! The one description of every toleranced model parameter: its key in the design file,
//! the way it scales the circuit, and where its value lives in a [`DeviceModel`].
//!
//! The reader accepts these keys (each a value with an optional tolerance), the JSON Schema
//! describes them, and tolerance analysis turns each into a lever — all from this list, so
//! a parameter added here is read, described and toleranced alike (unit tests hold the
//! reader's key lists to it). Part values, the source resistance and supplies are toleranced
//! too; they are one field each and need no table. No I/O.

use crate::design::types::{DeviceModel, Toleranced, TransitSpec};

/// How a parameter scales the circuit, for the scaling identities of tolerance analysis.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Scaling {
    /// A resistance.
    Resistance,
    /// A capacitance, or a parameter that scales one (a transit time).
    Capacitance,
    /// A parameter that scales like 1/C (a transition frequency).
    InverseCapacitance,
    /// Anything else (current gains, currents, voltages).
    Other,
}

/// A toleranced model parameter.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ModelParameter {
    /// Bipolar: forward current gain β.
    Beta,
    /// Bipolar: saturation current I_S.
    SaturationCurrent,
    /// Bipolar: Early voltage V_A.
    EarlyVoltage,
    /// Bipolar: base resistance r_x.
    BaseResistance,
    /// Bipolar: forward transit time τ_F.
    TransitTime,
    /// Bipolar: transition frequency f_T (at its stated collector current).
    TransitionFrequency,
    /// Bipolar: zero-bias base–emitter junction capacitance.
    EmitterJunction,
    /// Bipolar: zero-bias base–collector junction capacitance.
    CollectorJunction,
    /// MOSFET: process transconductance k'.
    ProcessTransconductance,
    /// MOSFET: threshold voltage.
    Threshold,
    /// MOSFET: channel-length modulation λ.
    ChannelLengthModulation,
    /// MOSFET: gate-oxide capacitance per area.
    OxideCapacitance,
    /// MOSFET: gate overlap capacitance per width.
    OverlapCapacitance,
    /// MOSFET: gate–source capacitance given directly.
    GateSourceCapacitance,
    /// MOSFET: gate–drain capacitance given directly.
    GateDrainCapacitance,
    /// MOSFET: drain–body capacitance given directly.
    DrainBodyCapacitance,
}

impl ModelParameter {
    /// The toleranced parameters of a bipolar model, in lever order.
    pub const BIPOLAR: [ModelParameter; 8] = [
        ModelParameter::Beta,
        ModelParameter::SaturationCurrent,
        ModelParameter::EarlyVoltage,
        ModelParameter::BaseResistance,
        ModelParameter::TransitTime,
        ModelParameter::TransitionFrequency,
        ModelParameter::EmitterJunction,
        ModelParameter::CollectorJunction,
    ];

    /// The toleranced parameters of a MOSFET model, in lever order.
    pub const MOS: [ModelParameter; 8] = [
        ModelParameter::ProcessTransconductance,
        ModelParameter::Threshold,
        ModelParameter::ChannelLengthModulation,
        ModelParameter::OxideCapacitance,
        ModelParameter::OverlapCapacitance,
        ModelParameter::GateSourceCapacitance,
        ModelParameter::GateDrainCapacitance,
        ModelParameter::DrainBodyCapacitance,
    ];

    /// The parameters a model of this family can have.
    pub fn of(model: &DeviceModel) -> &'static [ModelParameter] {
        match model {
            DeviceModel::Bipolar(_) => &ModelParameter::BIPOLAR,
            DeviceModel::Mos(_) => &ModelParameter::MOS,
        }
    }

    /// Its key under `models.NAME` in the design file.
    pub fn key(self) -> &'static str {
        match self {
            ModelParameter::Beta => "beta",
            ModelParameter::SaturationCurrent => "saturation_current",
            ModelParameter::EarlyVoltage => "early_voltage",
            ModelParameter::BaseResistance => "base_resistance",
            ModelParameter::TransitTime => "transit_time",
            ModelParameter::TransitionFrequency => "transition_frequency",
            ModelParameter::EmitterJunction => "emitter_junction",
            ModelParameter::CollectorJunction => "collector_junction",
            ModelParameter::ProcessTransconductance => "process_transconductance",
            ModelParameter::Threshold => "threshold",
            ModelParameter::ChannelLengthModulation => "channel_length_modulation",
            ModelParameter::OxideCapacitance => "oxide_capacitance",
            ModelParameter::OverlapCapacitance => "overlap_capacitance",
            ModelParameter::GateSourceCapacitance => "gate_source_capacitance",
            ModelParameter::GateDrainCapacitance => "gate_drain_capacitance",
            ModelParameter::DrainBodyCapacitance => "drain_body_capacitance",
        }
    }

    /// How it scales the circuit.
    pub fn scaling(self) -> Scaling {
        match self {
            ModelParameter::BaseResistance => Scaling::Resistance,
            ModelParameter::TransitTime
            | ModelParameter::EmitterJunction
            | ModelParameter::CollectorJunction
            | ModelParameter::OxideCapacitance
            | ModelParameter::OverlapCapacitance
            | ModelParameter::GateSourceCapacitance
            | ModelParameter::GateDrainCapacitance
            | ModelParameter::DrainBodyCapacitance => Scaling::Capacitance,
            ModelParameter::TransitionFrequency => Scaling::InverseCapacitance,
            _ => Scaling::Other,
        }
    }

    /// Where its value lives in `model`; None when the model does not give it (or is of
    /// the other family).
    pub fn get_mut(self, model: &mut DeviceModel) -> Option<&mut Toleranced> {
        use ModelParameter as P;
        match model {
            DeviceModel::Bipolar(b) => match self {
                P::Beta => Some(&mut b.beta),
                P::SaturationCurrent => Some(&mut b.saturation_current),
                P::EarlyVoltage => b.early_voltage.as_mut(),
                P::BaseResistance => Some(&mut b.base_resistance),
                P::TransitTime => match &mut b.transit {
                    Some(TransitSpec::TransitTime(t)) => Some(t),
                    _ => None,
                },
                P::TransitionFrequency => match &mut b.transit {
                    Some(TransitSpec::TransitionFrequency { frequency, .. }) => Some(frequency),
                    _ => None,
                },
                P::EmitterJunction => b.emitter_junction.as_mut().map(|j| &mut j.capacitance),
                P::CollectorJunction => b.collector_junction.as_mut().map(|j| &mut j.capacitance),
                _ => None,
            },
            DeviceModel::Mos(m) => match self {
                P::ProcessTransconductance => Some(&mut m.process_transconductance),
                P::Threshold => Some(&mut m.threshold),
                P::ChannelLengthModulation => Some(&mut m.channel_length_modulation),
                P::OxideCapacitance => m.oxide_capacitance.as_mut(),
                P::OverlapCapacitance => m.overlap_capacitance.as_mut(),
                P::GateSourceCapacitance => m.gate_source_capacitance.as_mut(),
                P::GateDrainCapacitance => m.gate_drain_capacitance.as_mut(),
                P::DrainBodyCapacitance => m.drain_body_capacitance.as_mut(),
                _ => None,
            },
        }
    }

    /// Its value in `model` (one accessor, [`ModelParameter::get_mut`], serves both).
    pub fn get(self, model: &DeviceModel) -> Option<Toleranced> {
        self.get_mut(&mut model.clone()).copied()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::reader::{BIPOLAR_KEYS, JUNCTION_KEYS, MOS_KEYS};

    #[test]
    fn every_toleranced_parameter_is_a_key_the_reader_accepts() {
        for p in ModelParameter::BIPOLAR {
            assert!(BIPOLAR_KEYS.contains(&p.key()), "{}", p.key());
        }
        for p in ModelParameter::MOS {
            assert!(MOS_KEYS.contains(&p.key()), "{}", p.key());
        }
        // A junction is toleranced through its capacitance.
        assert!(JUNCTION_KEYS.contains(&"capacitance"));
    }

    #[test]
    fn every_model_key_is_toleranced_or_a_plain_setting() {
        // The keys read as plain numbers (no tolerance travels to a lever): the type, the
        // reverse gain, the geometry, the dissipation rating, the temperature laws and the
        // flicker corner.
        let plain = [
            "type",
            "beta_reverse",
            "width",
            "length",
            "max_power",
            "reference_temperature",
            "saturation_current_exponent",
            "band_gap_voltage",
            "beta_exponent",
            "threshold_drift",
            "mobility_exponent",
            "flicker_corner",
        ];
        for key in BIPOLAR_KEYS.iter().chain(MOS_KEYS) {
            let toleranced =
                ModelParameter::BIPOLAR.iter().chain(&ModelParameter::MOS).any(|p| p.key() == *key);
            assert!(toleranced != plain.contains(key), "{key}");
        }
    }

    #[test]
    fn each_parameter_reads_and_writes_the_same_field() {
        let text = std::fs::read_to_string("designs/rx-preamp-ce.yaml").unwrap();
        let design = crate::design::load(&text).design.unwrap();
        let mut model = design.models[0].device.clone();
        for p in ModelParameter::BIPOLAR {
            let Some(before) = p.get(&model) else { continue };
            p.get_mut(&mut model).unwrap().nominal *= 2.0;
            assert_eq!(p.get(&model).unwrap().nominal, 2.0 * before.nominal, "{}", p.key());
        }
        assert_eq!(ModelParameter::Threshold.get(&model), None, "a MOS key on a bipolar model");
    }
}
