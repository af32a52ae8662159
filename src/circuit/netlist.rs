//! The netlist: a design's parts as numbered nodes and resolved numbers.
//!
//! In: a validated [`Design`]. Out: a [`Netlist`] whose elements refer to nodes by index
//! (0 is ground) and whose device models are plain numbers in SI units. Values can be
//! changed in place (sensitivities and Monte Carlo perturb them). No solving here.

use crate::design::{
    self, BipolarType, CapacitorRole, Design, DeviceModel, MosType, PartKind, TransitSpec,
};

/// Which time-constant set a capacitor belongs to.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CapSet {
    /// Coupling and bypass capacitors: short at mid-band, set the low cut-off.
    Low,
    /// Device, parasitic and load capacitances: open at mid-band, set the high cut-off.
    High,
}

/// Why a capacitor is in its set.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CapReason {
    /// The part's `role` says so.
    Role,
    /// No role: 1 nF and above is taken as coupling or bypass, below as parasitic.
    ValueRule,
    /// A capacitance inside a device model.
    Device,
}

/// The value above which a capacitor without a role joins the low-frequency set.
pub const LOW_SET_THRESHOLD_F: f64 = 1e-9;

/// A bipolar model resolved to numbers.
#[derive(Clone, Debug)]
pub struct BjtParams {
    /// +1 for npn, −1 for pnp.
    pub sign: f64,
    /// Transport saturation current, A.
    pub is: f64,
    /// Forward current gain.
    pub beta_f: f64,
    /// Reverse current gain.
    pub beta_r: f64,
    /// Early voltage, V (infinite when not given).
    pub early_voltage: f64,
    /// Ohmic base resistance still to be added by the small-signal model, Ω (0 once the
    /// netlist carries it as the resistor `<part>.rx`).
    pub rb: f64,
    /// The model's base resistance, Ω, for reports.
    pub rb_external: f64,
    /// Transit time or f_T.
    pub transit: Transit,
    /// Emitter junction (C0, φ, m), F / V / —.
    pub cje: (f64, f64, f64),
    /// Collector junction (C0, φ, m).
    pub cjc: (f64, f64, f64),
    /// Dissipation rating, W.
    pub max_power: Option<f64>,
}

/// Forward transit time, or f_T at a stated collector current.
#[derive(Clone, Copy, Debug)]
pub enum Transit {
    /// τ_F in s.
    Time(f64),
    /// f_T in Hz at I_C in A.
    Frequency(f64, f64),
}

/// A MOSFET model resolved to numbers.
#[derive(Clone, Debug)]
pub struct MosParams {
    /// +1 for nmos, −1 for pmos.
    pub sign: f64,
    /// k′·W/L, A/V².
    pub k: f64,
    /// Threshold voltage as written (negative for pmos), V.
    pub vth: f64,
    /// λ, 1/V.
    pub lambda: f64,
    /// W·L·C_ox, F (0 when not given).
    pub gate_oxide_f: f64,
    /// W·C_ov, F.
    pub overlap_f: f64,
    /// Direct C_gs, F.
    pub cgs_direct: Option<f64>,
    /// Direct C_gd, F.
    pub cgd_direct: Option<f64>,
    /// C_db, F.
    pub cdb: f64,
    /// Dissipation rating, W.
    pub max_power: Option<f64>,
}

/// One element of the netlist.
#[derive(Clone, Debug)]
pub enum Element {
    /// A resistor.
    Resistor {
        /// Designator.
        name: String,
        /// Terminals.
        a: usize,
        /// Terminals.
        b: usize,
        /// Ω.
        r: f64,
    },
    /// A capacitor.
    Capacitor {
        /// Designator.
        name: String,
        /// Terminals.
        a: usize,
        /// Terminals.
        b: usize,
        /// F.
        c: f64,
        /// Its time-constant set.
        set: CapSet,
        /// Why it is in that set.
        reason: CapReason,
    },
    /// An inductor.
    Inductor {
        /// Designator.
        name: String,
        /// Terminals.
        a: usize,
        /// Terminals.
        b: usize,
        /// H.
        l: f64,
    },
    /// Current gm·v(p, n) from a through the part to b.
    Transconductance {
        /// Designator.
        name: String,
        /// Output terminals.
        a: usize,
        /// Output terminals.
        b: usize,
        /// Control terminals.
        p: usize,
        /// Control terminals.
        n: usize,
        /// S.
        gm: f64,
    },
    /// v(a) − v(b) = gain·v(p, n).
    VoltageAmplifier {
        /// Designator.
        name: String,
        /// Output terminals.
        a: usize,
        /// Output terminals.
        b: usize,
        /// Control terminals.
        p: usize,
        /// Control terminals.
        n: usize,
        /// V/V.
        gain: f64,
    },
    /// A bipolar transistor.
    Bjt {
        /// Designator.
        name: String,
        /// Collector.
        c: usize,
        /// Base.
        b: usize,
        /// Emitter.
        e: usize,
        /// Model.
        params: BjtParams,
    },
    /// A MOSFET (body tied to source).
    Mosfet {
        /// Designator.
        name: String,
        /// Drain.
        d: usize,
        /// Gate.
        g: usize,
        /// Source.
        s: usize,
        /// Model.
        params: MosParams,
    },
}

impl Element {
    /// Its name: a designator, or one derived from it (`Q1.rx`, `load.r`).
    pub fn name(&self) -> &str {
        match self {
            Element::Resistor { name, .. }
            | Element::Capacitor { name, .. }
            | Element::Inductor { name, .. }
            | Element::Transconductance { name, .. }
            | Element::VoltageAmplifier { name, .. }
            | Element::Bjt { name, .. }
            | Element::Mosfet { name, .. } => name,
        }
    }
}

/// The circuit with numbered nodes.
#[derive(Clone, Debug)]
pub struct Netlist {
    /// Node names; index 0 is ground.
    pub nodes: Vec<String>,
    /// Parts, in design order (output loads last).
    pub elements: Vec<Element>,
    /// DC supplies: (node, volts).
    pub supplies: Vec<(usize, f64)>,
    /// The signal source's nodes (p, n) and series resistance.
    pub signal: (usize, usize, f64),
    /// The output's nodes (p, n).
    pub output: (usize, usize),
    /// Junction temperature, K.
    pub temperature_k: f64,
}

impl Netlist {
    /// Builds the netlist of a validated design with its nominal values.
    pub fn from_design(design: &Design) -> Netlist {
        let design_nodes = design.nodes();
        let positions: std::collections::HashMap<&str, usize> =
            design_nodes.iter().enumerate().map(|(k, n)| (n.as_str(), k)).collect();
        let index = |name: &str| positions.get(name).copied().unwrap_or(0);
        let mut elements = Vec::new();
        // Internal base nodes: r_x is a real resistor at DC and at small signal alike.
        let mut internal: Vec<(usize, String)> = Vec::new();
        for part in &design.parts {
            let name = part.name.clone();
            let el = match &part.kind {
                PartKind::Resistor { between, value } => Element::Resistor {
                    name,
                    a: index(&between[0]),
                    b: index(&between[1]),
                    r: value.nominal,
                },
                PartKind::Capacitor { between, value, role } => {
                    let (set, reason) = match role {
                        Some(CapacitorRole::Coupling | CapacitorRole::Bypass) => {
                            (CapSet::Low, CapReason::Role)
                        }
                        Some(CapacitorRole::Parasitic | CapacitorRole::Load) => {
                            (CapSet::High, CapReason::Role)
                        }
                        None if value.nominal >= LOW_SET_THRESHOLD_F => {
                            (CapSet::Low, CapReason::ValueRule)
                        }
                        None => (CapSet::High, CapReason::ValueRule),
                    };
                    Element::Capacitor {
                        name,
                        a: index(&between[0]),
                        b: index(&between[1]),
                        c: value.nominal,
                        set,
                        reason,
                    }
                }
                PartKind::Inductor { between, value } => Element::Inductor {
                    name,
                    a: index(&between[0]),
                    b: index(&between[1]),
                    l: value.nominal,
                },
                PartKind::Transconductance { between, control, value } => {
                    Element::Transconductance {
                        name,
                        a: index(&between[0]),
                        b: index(&between[1]),
                        p: index(&control[0]),
                        n: index(&control[1]),
                        gm: value.nominal,
                    }
                }
                PartKind::VoltageAmplifier { between, control, value } => {
                    Element::VoltageAmplifier {
                        name,
                        a: index(&between[0]),
                        b: index(&between[1]),
                        p: index(&control[0]),
                        n: index(&control[1]),
                        gain: value.nominal,
                    }
                }
                PartKind::Bjt { c, b, e, model } => {
                    let mut params =
                        bjt_params(&design.models[*model].device, design.temperature_k);
                    let mut base = index(b);
                    if params.rb > 0.0 {
                        let inner = format!("{name}.b'");
                        let at = design_nodes.len() + internal.len();
                        internal.push((at, inner));
                        elements.push(Element::Resistor {
                            name: format!("{name}.rx"),
                            a: base,
                            b: at,
                            r: params.rb,
                        });
                        base = at;
                        params.rb_external = params.rb;
                        params.rb = 0.0;
                    }
                    Element::Bjt { name, c: index(c), b: base, e: index(e), params }
                }
                PartKind::Mosfet { d, g, s, model } => Element::Mosfet {
                    name,
                    d: index(d),
                    g: index(g),
                    s: index(s),
                    params: mos_params(&design.models[*model].device, design.temperature_k),
                },
            };
            elements.push(el);
        }
        let mut nodes = design_nodes.clone();
        nodes.extend(internal.into_iter().map(|(_, n)| n));
        Netlist {
            supplies: design.supplies.iter().map(|s| (index(&s.node), s.voltage.nominal)).collect(),
            signal: (
                index(&design.signal.positive),
                index(&design.signal.negative),
                design.signal.resistance.nominal,
            ),
            output: (index(&design.output.positive), index(&design.output.negative)),
            temperature_k: design.temperature_k,
            nodes,
            elements,
        }
    }

    /// True when the netlist holds transistors (needs an operating point).
    pub fn has_devices(&self) -> bool {
        self.elements.iter().any(|e| matches!(e, Element::Bjt { .. } | Element::Mosfet { .. }))
    }
}

/// The bipolar model's numbers at `temperature_k`. The saturation current follows
/// I_S(T) = I_S(T0)·(T/T0)^η·exp((E_g/V_T(T))·(T/T0 − 1)) and the current gain
/// β(T) = β(T0)·(T/T0)^x, both normalised at the model's reference temperature T0
/// (docs/methods.md, Device equations). Junction capacitances and potentials are taken as
/// given: their drift is small beside these.
fn bjt_params(device: &DeviceModel, temperature_k: f64) -> BjtParams {
    let DeviceModel::Bipolar(m) = device else {
        unreachable!("validated: bjt part, bipolar model")
    };
    let ratio = temperature_k / m.reference_temperature_k;
    let is = m.saturation_current.nominal
        * ratio.powf(m.saturation_current_exponent)
        * ((m.band_gap_v / crate::circuit::devices::thermal_voltage(temperature_k))
            * (ratio - 1.0))
            .exp();
    let junction = |j: &Option<design::Junction>| {
        j.map_or((0.0, 0.75, 0.33), |j| (j.capacitance.nominal, j.potential, j.grading))
    };
    BjtParams {
        sign: if m.polarity == BipolarType::Npn { 1.0 } else { -1.0 },
        is,
        beta_f: m.beta.nominal * ratio.powf(m.beta_exponent),
        beta_r: m.beta_reverse,
        early_voltage: m.early_voltage.map_or(f64::INFINITY, |v| v.nominal),
        rb: m.base_resistance.nominal,
        rb_external: 0.0,
        transit: match m.transit {
            Some(TransitSpec::TransitTime(t)) => Transit::Time(t.nominal),
            Some(TransitSpec::TransitionFrequency { frequency, collector_current }) => {
                Transit::Frequency(frequency.nominal, collector_current)
            }
            None => Transit::Time(0.0),
        },
        cje: junction(&m.emitter_junction),
        cjc: junction(&m.collector_junction),
        max_power: m.max_power,
    }
}

/// The MOSFET model's numbers at `temperature_k`: the threshold drifts linearly, its
/// magnitude falling as the device warms (V_th(T) = V_th(T0) + s·dV_th/dT·(T − T0), s = +1
/// for n-channel, −1 for p-channel), and the mobility, hence k′, follows (T/T0)^x
/// (docs/methods.md, Device equations).
fn mos_params(device: &DeviceModel, temperature_k: f64) -> MosParams {
    let DeviceModel::Mos(m) = device else { unreachable!("validated: mosfet part, MOS model") };
    let wl = m.width * m.length;
    let sign = if m.polarity == MosType::Nmos { 1.0 } else { -1.0 };
    let warming = temperature_k - m.reference_temperature_k;
    let mobility = (temperature_k / m.reference_temperature_k).powf(m.mobility_exponent);
    MosParams {
        sign,
        k: m.process_transconductance.nominal * m.width / m.length * mobility,
        vth: m.threshold.nominal + sign * m.threshold_drift_v_per_k * warming,
        lambda: m.channel_length_modulation.nominal,
        gate_oxide_f: m.oxide_capacitance.map_or(0.0, |c| c.nominal * wl),
        overlap_f: m.overlap_capacitance.map_or(0.0, |c| c.nominal * m.width),
        cgs_direct: m.gate_source_capacitance.map(|c| c.nominal),
        cgd_direct: m.gate_drain_capacitance.map(|c| c.nominal),
        cdb: m.drain_body_capacitance.map_or(0.0, |c| c.nominal),
        max_power: m.max_power,
    }
}

#[cfg(test)]
mod temperature_tests {
    use super::*;
    use crate::circuit::devices::thermal_voltage;

    fn demo_model() -> DeviceModel {
        let text = std::fs::read_to_string("designs/rx-preamp-ce.yaml").unwrap();
        crate::design::load(&text).design.unwrap().models[0].device.clone()
    }

    /// V_BE of the model at collector current `ic` and temperature `t`.
    fn vbe(model: &DeviceModel, ic: f64, t: f64) -> f64 {
        let p = bjt_params(model, t);
        thermal_voltage(t) * (ic / p.is).ln()
    }

    #[test]
    fn base_emitter_voltage_falls_about_two_millivolts_per_kelvin_at_constant_current() {
        // Common practice (Gray, Hurst, Lewis & Meyer, ch. 1, from memory): dV_BE/dT at
        // constant I_C is −(V_g0 − V_BE + η·V_T)/T, about −2 mV/K for silicon near 300 K.
        // The rule's −1.5 … −2.5 mV/K band holds where V_BE is near its usual 0.6–0.7 V
        // (100 µA here); at the demo's 4.24 mA this small-area device runs at V_BE ≈ 0.77 V,
        // where the same law gives about −1.4 mV/K: the closed form is checked there.
        let model = demo_model();
        let slope = (vbe(&model, 100e-6, 301.15) - vbe(&model, 100e-6, 299.15)) / 2.0;
        assert!((-2.5e-3..=-1.5e-3).contains(&slope), "{slope} V/K");
        for ic in [100e-6, 4.24e-3] {
            let slope = (vbe(&model, ic, 301.15) - vbe(&model, ic, 299.15)) / 2.0;
            // The closed form, to 1 %.
            let t = 300.15;
            let v = vbe(&model, ic, t);
            let closed = -(1.11 - v + 3.0 * thermal_voltage(t)) / t;
            assert!((slope / closed - 1.0).abs() < 0.01, "{slope} vs {closed}");
        }
    }

    #[test]
    fn at_the_reference_temperature_the_model_is_as_written() {
        let model = demo_model();
        let DeviceModel::Bipolar(b) = &model else { unreachable!() };
        let p = bjt_params(&model, b.reference_temperature_k);
        assert_eq!(p.is, b.saturation_current.nominal);
        assert_eq!(p.beta_f, b.beta.nominal);
        // β grows as (T/T0)^1.5 by default: +0.5 %/K near 300 K (common practice).
        let warm = bjt_params(&model, b.reference_temperature_k + 1.0);
        assert!((warm.beta_f / p.beta_f - 1.0 - 1.5 / 300.15).abs() < 1e-4);
    }

    #[test]
    fn a_mosfet_threshold_magnitude_falls_and_its_mobility_drops_as_it_warms() {
        // Common practice: |V_th| falls by about 2 mV/K and mobility goes as T^−1.5.
        let text = std::fs::read_to_string("designs/post-amp-cs.yaml").unwrap();
        let design = crate::design::load(&text).design.unwrap();
        let model = &design.models[0].device;
        let DeviceModel::Mos(m) = model else { panic!("a MOS model") };
        let t0 = m.reference_temperature_k;
        let (cold, warm) = (mos_params(model, t0), mos_params(model, t0 + 10.0));
        assert!((cold.vth.abs() - warm.vth.abs() - 0.02).abs() < 1e-12);
        assert!((warm.k / cold.k - ((t0 + 10.0) / t0).powf(-1.5)).abs() < 1e-12);
    }
}
