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
        let index = |name: &str| design_nodes.iter().position(|n| n == name).unwrap_or(0);
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
                    let mut params = bjt_params(&design.models[*model].device);
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
                    params: mos_params(&design.models[*model].device),
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

fn bjt_params(device: &DeviceModel) -> BjtParams {
    let DeviceModel::Bipolar(m) = device else {
        unreachable!("validated: bjt part, bipolar model")
    };
    let junction = |j: &Option<design::Junction>| {
        j.map_or((0.0, 0.75, 0.33), |j| (j.capacitance.nominal, j.potential, j.grading))
    };
    BjtParams {
        sign: if m.polarity == BipolarType::Npn { 1.0 } else { -1.0 },
        is: m.saturation_current.nominal,
        beta_f: m.beta.nominal,
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

fn mos_params(device: &DeviceModel) -> MosParams {
    let DeviceModel::Mos(m) = device else { unreachable!("validated: mosfet part, MOS model") };
    let wl = m.width * m.length;
    MosParams {
        sign: if m.polarity == MosType::Nmos { 1.0 } else { -1.0 },
        k: m.process_transconductance.nominal * m.width / m.length,
        vth: m.threshold.nominal,
        lambda: m.channel_length_modulation.nominal,
        gate_oxide_f: m.oxide_capacitance.map_or(0.0, |c| c.nominal * wl),
        overlap_f: m.overlap_capacitance.map_or(0.0, |c| c.nominal * m.width),
        cgs_direct: m.gate_source_capacitance.map(|c| c.nominal),
        cgd_direct: m.gate_drain_capacitance.map(|c| c.nominal),
        cdb: m.drain_body_capacitance.map_or(0.0, |c| c.nominal),
        max_power: m.max_power,
    }
}
