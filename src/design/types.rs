//! The validated design: what the rest of tauweave trusts.
//!
//! Every value is in SI units and finite, every reference resolves (a part's model is an
//! index into `models`), every node name is known. Built only by the reader after the
//! checks pass; later stages never re-validate it. No I/O.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::design::diagnostic::Span;

/// Name of the reference node.
pub const GROUND: &str = "gnd";

/// A validated design file.
#[derive(Clone, Debug, Serialize)]
pub struct Design {
    /// Format version (1).
    pub format: u32,
    /// Identification and purpose.
    pub meta: Meta,
    /// Junction temperature of the analysis, K.
    pub temperature_k: f64,
    /// True when the stage is built into mains-powered equipment (`environment.mains_powered`).
    pub mains_powered: bool,
    /// Named params in file order, evaluated.
    pub params: Vec<Param>,
    /// DC supplies, in file order.
    pub supplies: Vec<Supply>,
    /// The signal source.
    pub signal: Signal,
    /// Where the response is taken.
    pub output: Output,
    /// The parts, in file order (loads from `output` come last as `load.r`, `load.c`).
    pub parts: Vec<Part>,
    /// Device models, in file order.
    pub models: Vec<Model>,
    /// Limits the design must meet.
    pub requirements: Requirements,
    /// Sweep and Monte Carlo settings.
    pub analysis: AnalysisSettings,
    /// The what-if questions: sweeps and limits.
    pub what_if: WhatIf,
    /// The text the design was read from, so a param can be replaced and the design read
    /// again (shared, not copied).
    #[serde(skip)]
    pub source: std::sync::Arc<str>,
    /// The project file's house style the design was read under, if any (shared).
    #[serde(skip)]
    pub project: Option<std::sync::Arc<crate::design::project::Project>>,
    /// Where each key was written, by dotted path (`parts.R1.value`), for later messages.
    /// Shared, not copied, by the perturbed copies tolerance work makes of a design.
    #[serde(skip)]
    pub places: std::sync::Arc<BTreeMap<String, Span>>,
}

/// Identification of a design.
#[derive(Clone, Debug, Serialize)]
pub struct Meta {
    /// Short identifier; names the output folder.
    pub id: String,
    /// One-line title.
    pub title: String,
    /// Revision label.
    pub revision: String,
    /// The report's date, `YYYY-MM-DD`.
    pub date: String,
    /// Who is responsible.
    pub author: Option<String>,
    /// What the stage is for.
    pub purpose: Option<String>,
    /// A schematic drawing (`.svg` or `.png`), relative to the design file: shown near the
    /// top of the review and archived with it.
    pub schematic: Option<String>,
}

/// A named param.
#[derive(Clone, Debug, Serialize)]
pub struct Param {
    /// Its name.
    pub name: String,
    /// Its value in SI units.
    pub value: f64,
    /// Its unit symbol ("F", "m", "" for a pure number).
    pub unit: String,
    /// The text it was written as.
    pub written: String,
}

/// How a toleranced value is spread.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Distribution {
    /// Every value within ±tolerance equally likely.
    Uniform,
    /// Normal, with the tolerance at three standard deviations.
    Gaussian,
}

/// A tolerance, as a fraction of the nominal value.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Tolerance {
    /// Half-width as a fraction of |nominal| (5 % → 0.05).
    pub fraction: f64,
    /// How values spread within it.
    pub distribution: Distribution,
    /// True when it was written as an absolute amount (`0.25 pF`).
    pub absolute: bool,
}

/// A value with an optional tolerance.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Toleranced {
    /// Nominal value, SI units.
    pub nominal: f64,
    /// Spread, when the value has one.
    pub tolerance: Option<Tolerance>,
}

impl Toleranced {
    /// A value known exactly.
    pub fn exact(nominal: f64) -> Toleranced {
        Toleranced { nominal, tolerance: None }
    }
}

/// An ideal DC supply from a node to ground.
#[derive(Clone, Debug, Serialize)]
pub struct Supply {
    /// The node it holds.
    pub node: String,
    /// Its voltage, V.
    pub voltage: Toleranced,
}

impl Part {
    /// True when the design cannot change this part (see [`Part::fixed`]).
    pub fn is_fixed(&self) -> bool {
        self.fixed
            || matches!(&self.kind, PartKind::Capacitor { role: Some(CapacitorRole::Load), .. })
    }
}

/// The small-signal source: 0 V DC in series with its resistance.
#[derive(Clone, Debug, Serialize)]
pub struct Signal {
    /// Node it drives.
    pub positive: String,
    /// Node it returns to.
    pub negative: String,
    /// Series resistance, Ω.
    pub resistance: Toleranced,
    /// The band the stage must serve, when the design states one.
    pub band: Option<Band>,
    /// The signal's peak amplitude at the source EMF, V, when the design states one.
    pub amplitude_v: Option<f64>,
    /// The frequency of interest, Hz, when the design states one: where the signal-handling
    /// review says it stands.
    pub frequency_hz: Option<f64>,
}

/// The operating band: the frequencies the stage must serve.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Band {
    /// Lower end, Hz.
    pub from_hz: f64,
    /// Upper end, Hz.
    pub to_hz: f64,
}

impl Band {
    /// The geometric centre √(from·to), Hz: the middle of the band on a log axis.
    pub fn centre_hz(&self) -> f64 {
        (self.from_hz * self.to_hz).sqrt()
    }
}

/// Where the response is taken.
#[derive(Clone, Debug, Serialize)]
pub struct Output {
    /// Output node.
    pub positive: String,
    /// Reference node of the output.
    pub negative: String,
}

/// Which time-constant set a capacitor joins.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CapacitorRole {
    /// Couples a signal between stages; sets the low cut-off.
    Coupling,
    /// Bypasses a bias resistor; sets the low cut-off.
    Bypass,
    /// An unwanted capacitance; sets the high cut-off.
    Parasitic,
    /// The load's capacitance; sets the high cut-off.
    Load,
}

/// One part of the circuit.
#[derive(Clone, Debug, Serialize)]
pub struct Part {
    /// Reference designator.
    pub name: String,
    /// What it is and how it connects.
    pub kind: PartKind,
    /// Free text for the part list.
    pub note: Option<String>,
    /// True for a part the design cannot change (a cable, the next stage's input): the
    /// review never advises changing it. The load parts of `output` are always fixed, and
    /// so is a capacitor with the `load` role.
    pub fixed: bool,
    /// A resistor's power rating (W) or a capacitor's voltage rating (V), when given.
    pub rating: Option<f64>,
}

/// A part's kind, value and connections.
#[derive(Clone, Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum PartKind {
    /// A resistor, Ω.
    Resistor {
        /// Terminals.
        between: [String; 2],
        /// Resistance, Ω.
        value: Toleranced,
    },
    /// A capacitor, F.
    Capacitor {
        /// Terminals.
        between: [String; 2],
        /// Capacitance, F.
        value: Toleranced,
        /// Role, when given.
        role: Option<CapacitorRole>,
    },
    /// An inductor, H.
    Inductor {
        /// Terminals.
        between: [String; 2],
        /// Inductance, H.
        value: Toleranced,
    },
    /// A voltage-controlled current source: `value·v(control)` flows from `between[0]` to
    /// `between[1]` through it.
    Transconductance {
        /// Output terminals.
        between: [String; 2],
        /// Controlling node pair.
        control: [String; 2],
        /// Transconductance, S.
        value: Toleranced,
    },
    /// A voltage-controlled voltage source: v(between) = value·v(control).
    VoltageAmplifier {
        /// Output terminals.
        between: [String; 2],
        /// Controlling node pair.
        control: [String; 2],
        /// Voltage gain, V/V.
        value: Toleranced,
    },
    /// A bipolar transistor.
    Bjt {
        /// Collector node.
        c: String,
        /// Base node.
        b: String,
        /// Emitter node.
        e: String,
        /// Index into `Design::models`.
        model: usize,
    },
    /// A MOSFET with its body tied to its source.
    Mosfet {
        /// Drain node.
        d: String,
        /// Gate node.
        g: String,
        /// Source node.
        s: String,
        /// Index into `Design::models`.
        model: usize,
    },
}

impl PartKind {
    /// The kind's name as written in the design file.
    pub fn name(&self) -> &'static str {
        match self {
            PartKind::Resistor { .. } => "resistor",
            PartKind::Capacitor { .. } => "capacitor",
            PartKind::Inductor { .. } => "inductor",
            PartKind::Transconductance { .. } => "transconductance",
            PartKind::VoltageAmplifier { .. } => "voltage_amplifier",
            PartKind::Bjt { .. } => "bjt",
            PartKind::Mosfet { .. } => "mosfet",
        }
    }

    /// Every node the part touches, in terminal order.
    pub fn nodes(&self) -> Vec<&str> {
        match self {
            PartKind::Resistor { between, .. }
            | PartKind::Capacitor { between, .. }
            | PartKind::Inductor { between, .. } => vec![&between[0], &between[1]],
            PartKind::Transconductance { between, control, .. }
            | PartKind::VoltageAmplifier { between, control, .. } => {
                vec![&between[0], &between[1], &control[0], &control[1]]
            }
            PartKind::Bjt { c, b, e, .. } => vec![c, b, e],
            PartKind::Mosfet { d, g, s, .. } => vec![d, g, s],
        }
    }
}

/// A device model shared by name.
#[derive(Clone, Debug, Serialize)]
pub struct Model {
    /// Its name.
    pub name: String,
    /// Its parameters.
    pub device: DeviceModel,
}

/// Bipolar or MOSFET parameters.
#[derive(Clone, Debug, Serialize)]
#[serde(tag = "family", rename_all = "snake_case")]
pub enum DeviceModel {
    /// A bipolar transistor model.
    Bipolar(BipolarModel),
    /// A MOSFET model.
    Mos(MosModel),
}

/// Polarity of a bipolar transistor.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum BipolarType {
    /// NPN.
    Npn,
    /// PNP.
    Pnp,
}

/// Polarity of a MOSFET.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum MosType {
    /// n-channel.
    Nmos,
    /// p-channel.
    Pmos,
}

/// A depletion capacitance C(V) = C0 / (1 + V_R/φ)^m.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Junction {
    /// Zero-bias capacitance, F.
    pub capacitance: Toleranced,
    /// Built-in potential φ, V.
    pub potential: f64,
    /// Grading exponent m.
    pub grading: f64,
}

/// How the forward transit time is given.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TransitSpec {
    /// τ_F directly, s.
    TransitTime(Toleranced),
    /// f_T measured at a collector current.
    TransitionFrequency {
        /// f_T, Hz.
        frequency: Toleranced,
        /// I_C at which it holds, A.
        collector_current: f64,
    },
}

/// Bipolar transistor parameters (transport Ebers–Moll with Early effect, hybrid-π).
#[derive(Clone, Debug, Serialize)]
pub struct BipolarModel {
    /// NPN or PNP.
    pub polarity: BipolarType,
    /// Forward current gain β_F.
    pub beta: Toleranced,
    /// Reverse current gain β_R.
    pub beta_reverse: f64,
    /// Forward Early voltage, V (None: no Early effect).
    pub early_voltage: Option<Toleranced>,
    /// Transport saturation current, A.
    pub saturation_current: Toleranced,
    /// Ohmic base resistance, Ω.
    pub base_resistance: Toleranced,
    /// Transit time or f_T.
    pub transit: Option<TransitSpec>,
    /// Base–emitter depletion capacitance.
    pub emitter_junction: Option<Junction>,
    /// Base–collector depletion capacitance.
    pub collector_junction: Option<Junction>,
    /// Dissipation rating, W.
    pub max_power: Option<f64>,
    /// The temperature the parameters were measured at, K (default 27 °C).
    pub reference_temperature_k: f64,
    /// Exponent η of I_S ∝ T^η·exp(−E_g/(kT)) (default 3).
    pub saturation_current_exponent: f64,
    /// Band-gap voltage E_g/q of that law, V (default 1.11 V, silicon).
    pub band_gap_v: f64,
    /// Exponent of β ∝ T^x (default 1.5).
    pub beta_exponent: f64,
    /// Corner frequency of the base current's flicker (1/f) noise, Hz (None: no flicker).
    pub flicker_corner_hz: Option<f64>,
}

/// MOSFET parameters (square law with channel-length modulation).
#[derive(Clone, Debug, Serialize)]
pub struct MosModel {
    /// n- or p-channel.
    pub polarity: MosType,
    /// k′ = µC_ox, A/V².
    pub process_transconductance: Toleranced,
    /// Channel width, m.
    pub width: f64,
    /// Channel length, m.
    pub length: f64,
    /// Threshold voltage, V.
    pub threshold: Toleranced,
    /// λ, 1/V.
    pub channel_length_modulation: Toleranced,
    /// C_ox, F/m².
    pub oxide_capacitance: Option<Toleranced>,
    /// Overlap capacitance per width, F/m.
    pub overlap_capacitance: Option<Toleranced>,
    /// Direct C_gs, F.
    pub gate_source_capacitance: Option<Toleranced>,
    /// Direct C_gd, F.
    pub gate_drain_capacitance: Option<Toleranced>,
    /// C_db, F.
    pub drain_body_capacitance: Option<Toleranced>,
    /// Dissipation rating, W.
    pub max_power: Option<f64>,
    /// The temperature the parameters were measured at, K (default 27 °C).
    pub reference_temperature_k: f64,
    /// dV_th/dT of an n-channel device, V/K (default −2 mV/K; mirrored for p-channel, so
    /// the threshold's magnitude falls as the device warms).
    pub threshold_drift_v_per_k: f64,
    /// Exponent of k′ ∝ T^x, the mobility's temperature law (default −1.5).
    pub mobility_exponent: f64,
    /// Corner frequency of the channel's flicker (1/f) noise, Hz (None: no flicker).
    pub flicker_corner_hz: Option<f64>,
}

/// A min and/or max.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Limits {
    /// Lowest allowed value.
    pub min: Option<f64>,
    /// Highest allowed value.
    pub max: Option<f64>,
}

impl Limits {
    /// True when `v` is within both limits (each inclusive).
    pub fn contains(&self, v: f64) -> bool {
        self.min.is_none_or(|lo| v >= lo) && self.max.is_none_or(|hi| v <= hi)
    }

    /// The relative distance of `v` to the nearer limit, positive inside:
    /// (v − min)/|min| or (max − v)/|max|, the smaller.
    pub fn relative_margin(&self, v: f64) -> f64 {
        let to_min = self.min.map(|lo| (v - lo) / lo.abs().max(f64::MIN_POSITIVE));
        let to_max = self.max.map(|hi| (hi - v) / hi.abs().max(f64::MIN_POSITIVE));
        [to_min, to_max].into_iter().flatten().fold(f64::INFINITY, f64::min)
    }
}

/// What the design must meet.
#[derive(Clone, Debug, Default, Serialize)]
pub struct Requirements {
    /// |A| at mid-band, V/V.
    pub midband_gain: Option<Limits>,
    /// Upper −3 dB frequency, Hz.
    pub upper_cutoff: Option<Limits>,
    /// Lower −3 dB frequency, Hz.
    pub lower_cutoff: Option<Limits>,
    /// Input resistance at mid-band, Ω.
    pub input_resistance: Option<Limits>,
    /// Output resistance at mid-band, Ω.
    pub output_resistance: Option<Limits>,
    /// Gain flatness over the operating band, max − min, dB (limits in dB, not V/V).
    pub gain_flatness: Option<Limits>,
    /// Spot noise figure, dB (limits in dB), with the source at T0 = 290 K.
    pub noise_figure: Option<Limits>,
    /// Spot input-referred noise density at the source EMF, V/√Hz.
    pub input_noise_density: Option<Limits>,
    /// rms output noise over the band (the stated operating band, else between the
    /// cut-offs), V.
    pub output_noise: Option<Limits>,
    /// Signal-to-noise ratio at the output over the band, dB (limits in dB): the stated
    /// signal amplitude's rms through the gain at the spot frequency, over the rms output
    /// noise.
    pub snr: Option<Limits>,
    /// The largest current any supply delivers (or sinks), A.
    pub supply_current: Option<Limits>,
    /// The largest symmetric output peak before a transistor reaches an edge of its bias
    /// region, V.
    pub output_swing: Option<Limits>,
    /// Total harmonic distortion at the stated amplitude, %.
    pub thd: Option<Limits>,
    /// The source EMF at which the fundamental's gain is 1 dB down, peak V.
    pub input_compression: Option<Limits>,
    /// The smallest return loss at the input port across the band, dB, in the reference
    /// impedance.
    pub input_return_loss: Option<Limits>,
    /// The smallest return loss at the output port across the band, dB.
    pub output_return_loss: Option<Limits>,
    /// The smallest Edwards–Sinsky μ over the sweep (above 1: unconditionally stable).
    pub stability: Option<Limits>,
    /// The step response's 10–90 % rise time, s.
    pub rise_time: Option<Limits>,
    /// The step response's overshoot, %.
    pub overshoot: Option<Limits>,
    /// The group delay's spread (max − min) across the band, s.
    pub group_delay_variation: Option<Limits>,
}

impl Requirements {
    /// Every requirement by its name in the design file, set or not, in report order.
    pub fn items(&self) -> [(&'static str, Option<Limits>); 20] {
        [
            ("midband_gain", self.midband_gain),
            ("gain_flatness", self.gain_flatness),
            ("upper_cutoff", self.upper_cutoff),
            ("lower_cutoff", self.lower_cutoff),
            ("input_resistance", self.input_resistance),
            ("output_resistance", self.output_resistance),
            ("noise_figure", self.noise_figure),
            ("input_noise_density", self.input_noise_density),
            ("output_noise", self.output_noise),
            ("snr", self.snr),
            ("supply_current", self.supply_current),
            ("output_swing", self.output_swing),
            ("thd", self.thd),
            ("input_compression", self.input_compression),
            ("input_return_loss", self.input_return_loss),
            ("output_return_loss", self.output_return_loss),
            ("stability", self.stability),
            ("rise_time", self.rise_time),
            ("overshoot", self.overshoot),
            ("group_delay_variation", self.group_delay_variation),
        ]
    }

    /// Sets the requirement named `name` (a name of [`Requirements::items`]).
    pub fn set(&mut self, name: &str, limits: Option<Limits>) {
        let slot = match name {
            "midband_gain" => &mut self.midband_gain,
            "gain_flatness" => &mut self.gain_flatness,
            "upper_cutoff" => &mut self.upper_cutoff,
            "lower_cutoff" => &mut self.lower_cutoff,
            "input_resistance" => &mut self.input_resistance,
            "output_resistance" => &mut self.output_resistance,
            "noise_figure" => &mut self.noise_figure,
            "input_noise_density" => &mut self.input_noise_density,
            "output_noise" => &mut self.output_noise,
            "snr" => &mut self.snr,
            "supply_current" => &mut self.supply_current,
            "output_swing" => &mut self.output_swing,
            "thd" => &mut self.thd,
            "input_compression" => &mut self.input_compression,
            "input_return_loss" => &mut self.input_return_loss,
            "output_return_loss" => &mut self.output_return_loss,
            "stability" => &mut self.stability,
            "rise_time" => &mut self.rise_time,
            "overshoot" => &mut self.overshoot,
            "group_delay_variation" => &mut self.group_delay_variation,
            _ => panic!("no requirement is named `{name}`"),
        };
        *slot = limits;
    }

    /// How many limits are set.
    pub fn count(&self) -> usize {
        self.items().iter().filter(|(_, l)| l.is_some()).count()
    }
}

/// A quantity a what-if study varies.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Varied {
    /// A param: the design is read again with it replaced, so everything computed from it
    /// follows.
    Param(String),
    /// A part's value, by designator.
    Part(String),
    /// The junction temperature.
    Temperature,
    /// A supply's voltage, by its node.
    Supply(String),
}

/// A sweep: every figure at each of `values`.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SweepSpec {
    /// What varies.
    pub varied: Varied,
    /// Its name as written (`cable_length`, `RE1`, `temperature`, `vcc`).
    pub name: String,
    /// Its SI unit symbol (`m`, `Ω`, `K`, `V`; empty for a pure number).
    pub unit: String,
    /// The values, SI, in the order given.
    pub values: Vec<f64>,
    /// True when the values are log-spaced (plots use a log axis).
    pub log: bool,
}

/// A limit: how far `varied` can go before `requirement` stops passing.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct LimitSpec {
    /// What varies.
    pub varied: Varied,
    /// Its name as written.
    pub name: String,
    /// Its SI unit symbol.
    pub unit: String,
    /// The requirement that must keep passing.
    pub requirement: &'static str,
    /// How far to search from the nominal value (`up_to` or `down_to`), SI.
    pub bound: f64,
    /// The relative precision of the answer.
    pub precision: f64,
}

/// An operating range: the quantity and its two ends, SI.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Range {
    /// `Temperature` or a `Supply`.
    pub varied: Varied,
    /// Its name as written.
    pub name: String,
    /// The low and high ends, SI.
    pub ends: [f64; 2],
}

/// The what-if questions the design asks.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct WhatIf {
    /// Operating ranges of the temperature and the supplies: the review evaluates every
    /// requirement at each combination of their ends, and at nominal.
    pub corners: Vec<Range>,
    /// True when each operating corner also takes the worst tolerance corner of every
    /// limited requirement (`tolerance_corners: true`).
    pub tolerance_corners: bool,
    /// Sweeps, in file order.
    pub sweeps: Vec<SweepSpec>,
    /// Limits, in file order.
    pub limits: Vec<LimitSpec>,
}

/// Sweep and Monte Carlo settings.
#[derive(Clone, Debug, Serialize)]
pub struct AnalysisSettings {
    /// Lowest sweep frequency, Hz.
    pub sweep_start_hz: f64,
    /// Highest sweep frequency, Hz.
    pub sweep_stop_hz: f64,
    /// Log-spaced points per decade.
    pub points_per_decade: u32,
    /// Monte Carlo runs.
    pub monte_carlo_runs: u32,
    /// Monte Carlo seed.
    pub seed: u64,
    /// The Monte Carlo yield each requirement must reach, a fraction, when the design sets
    /// one (a CI report fails a requirement's yield case below it).
    pub min_yield: Option<f64>,
    /// The fraction of a resistor's power rating it should stay under.
    pub resistor_power_derating: f64,
    /// The fraction of a capacitor's voltage rating it should stay under.
    pub capacitor_voltage_derating: f64,
    /// The reference impedance of the scattering parameters, Ω, when the design states one.
    pub reference_impedance_ohm: Option<f64>,
    /// The band the step response must settle within, a fraction of its final value.
    pub settling_band: f64,
}

impl AnalysisSettings {
    /// The settings used when a design gives none.
    pub fn defaults() -> AnalysisSettings {
        AnalysisSettings {
            sweep_start_hz: 1.0,
            sweep_stop_hz: 10e9,
            points_per_decade: 40,
            monte_carlo_runs: 1000,
            seed: 1,
            min_yield: None,
            resistor_power_derating: crate::analysis::stress::RESISTOR_POWER_DERATING,
            capacitor_voltage_derating: crate::analysis::stress::CAPACITOR_VOLTAGE_DERATING,
            reference_impedance_ohm: None,
            settling_band: crate::analysis::step::DEFAULT_SETTLING_BAND,
        }
    }
}

impl Design {
    /// Every node name, ground first, then in order of first use.
    pub fn nodes<'a>(&'a self) -> Vec<String> {
        let mut seen: Vec<String> = vec![GROUND.to_string()];
        let mut known = std::collections::HashSet::from([GROUND]);
        let mut add = |n: &'a str| {
            if known.insert(n) {
                seen.push(n.to_string());
            }
        };
        for s in &self.supplies {
            add(&s.node);
        }
        add(&self.signal.positive);
        add(&self.signal.negative);
        for p in &self.parts {
            for n in p.kind.nodes() {
                add(n);
            }
        }
        add(&self.output.positive);
        add(&self.output.negative);
        seen
    }
}
