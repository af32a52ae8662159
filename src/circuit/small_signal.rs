//! Small-signal models at the operating point, and the linear network they form.
//!
//! In: a [`Netlist`] and its [`OperatingPoint`]. Out: per-device small-signal parameters
//! (hybrid-π for the bipolar transistor, gm/ro/C for the MOSFET) and a [`LinearNetwork`]:
//! conductances, capacitors (each in its time-constant set), inductors, controlled sources,
//! the zeroed supplies, the signal source and the output. The analysis stage works on that
//! network alone.

use serde::Serialize;

use crate::circuit::devices::{self, MosRegion};
use crate::circuit::netlist::{CapReason, CapSet, Element, Netlist};
use crate::circuit::operating_point::{DeviceState, OperatingPoint};

/// One element of the linear small-signal network. Node 0 is ground.
#[derive(Clone, Debug)]
pub enum Linear {
    /// A conductance, S.
    Conductance {
        /// Where it came from (`R1`, `Q1.rpi`).
        name: String,
        /// Terminal.
        a: usize,
        /// Terminal.
        b: usize,
        /// S.
        g: f64,
    },
    /// A capacitor, F.
    Capacitor {
        /// `C3`, `Q1.cpi`, `load.c`.
        name: String,
        /// Terminal.
        a: usize,
        /// Terminal.
        b: usize,
        /// F.
        c: f64,
        /// Its set.
        set: CapSet,
        /// Why.
        reason: CapReason,
    },
    /// An inductor, H.
    Inductor {
        /// Designator.
        name: String,
        /// Terminal.
        a: usize,
        /// Terminal.
        b: usize,
        /// H.
        l: f64,
    },
    /// Current gm·v(p, n) from a to b through the element.
    Vccs {
        /// Where it came from.
        name: String,
        /// Output terminal.
        a: usize,
        /// Output terminal.
        b: usize,
        /// Control terminal.
        p: usize,
        /// Control terminal.
        n: usize,
        /// S.
        gm: f64,
    },
    /// v(a) − v(b) = gain·v(p, n).
    Vcvs {
        /// Designator.
        name: String,
        /// Output terminal.
        a: usize,
        /// Output terminal.
        b: usize,
        /// Control terminal.
        p: usize,
        /// Control terminal.
        n: usize,
        /// V/V.
        gain: f64,
    },
    /// A supply: 0 V at small signal, node to ground.
    Grounded {
        /// The node.
        node: usize,
    },
}

impl Linear {
    /// The value θ that tolerance work moves: conductance, capacitance, inductance,
    /// transconductance or voltage gain; `None` for a supply.
    pub fn value(&self) -> Option<f64> {
        match *self {
            Linear::Conductance { g, .. } => Some(g),
            Linear::Capacitor { c, .. } => Some(c),
            Linear::Inductor { l, .. } => Some(l),
            Linear::Vccs { gm, .. } => Some(gm),
            Linear::Vcvs { gain, .. } => Some(gain),
            Linear::Grounded { .. } => None,
        }
    }
}

/// The small-signal network of a design at its operating point.
#[derive(Clone, Debug)]
pub struct LinearNetwork {
    /// Node names; 0 is ground. Internal nodes follow the design's (`Q1.b'`, `source`).
    pub nodes: Vec<String>,
    /// Elements.
    pub elements: Vec<Linear>,
    /// The source's internal node (the EMF side) and its return node; the EMF is the input.
    pub source: (usize, usize),
    /// The node the source drives through its resistance, and the resistance.
    pub source_terminal: (usize, f64),
    /// The output port.
    pub output: (usize, usize),
    /// Index of the load resistance element, if any (excluded for the output resistance).
    pub load_resistance: Option<usize>,
    /// The elements each transistor became, in the operating point's device order.
    pub devices: Vec<std::ops::Range<usize>>,
}

/// Small-signal parameters of one transistor, with its capacitances.
#[derive(Clone, Debug, Serialize)]
pub struct SmallSignal {
    /// Designator.
    pub part: String,
    /// Transconductance, S.
    pub gm_s: f64,
    /// Output resistance, Ω (absent when infinite).
    pub ro_ohm: Option<f64>,
    /// Bipolar: base–emitter resistance rπ, Ω.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rpi_ohm: Option<f64>,
    /// Bipolar: base resistance r_x, Ω.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rx_ohm: Option<f64>,
    /// Bipolar: small-signal current gain gm·rπ.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub beta_ac: Option<f64>,
    /// Bipolar: Cπ, F.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cpi_f: Option<f64>,
    /// Bipolar: Cμ, F.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cmu_f: Option<f64>,
    /// Bipolar: the transit time used, s.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub transit_time_s: Option<f64>,
    /// Bipolar: f_T = gm / (2π(Cπ + Cμ)) at this bias, Hz.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ft_hz: Option<f64>,
    /// MOSFET: C_gs, F.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cgs_f: Option<f64>,
    /// MOSFET: C_gd, F.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cgd_f: Option<f64>,
    /// MOSFET: C_db, F.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cdb_f: Option<f64>,
}

/// Builds the small-signal network and the per-device parameters.
pub fn linearize(net: &Netlist, op: Option<&OperatingPoint>) -> (LinearNetwork, Vec<SmallSignal>) {
    let mut nodes = net.nodes.clone();
    let mut elements = Vec::new();
    let mut params = Vec::new();
    let mut load_resistance = None;
    let vt = devices::thermal_voltage(net.temperature_k);
    let mut device_index = 0;
    let mut devices = Vec::new();
    let new_node = |nodes: &mut Vec<String>, name: String| {
        nodes.push(name);
        nodes.len() - 1
    };
    for &(node, _) in &net.supplies {
        elements.push(Linear::Grounded { node });
    }
    for el in &net.elements {
        match el {
            Element::Resistor { name, a, b, r } => {
                if name == "load.r" {
                    load_resistance = Some(elements.len());
                }
                elements.push(Linear::Conductance { name: name.clone(), a: *a, b: *b, g: 1.0 / r });
            }
            Element::Capacitor { name, a, b, c, set, reason } => elements.push(Linear::Capacitor {
                name: name.clone(),
                a: *a,
                b: *b,
                c: *c,
                set: *set,
                reason: *reason,
            }),
            Element::Inductor { name, a, b, l } => {
                elements.push(Linear::Inductor { name: name.clone(), a: *a, b: *b, l: *l })
            }
            Element::Transconductance { name, a, b, p, n, gm } => elements.push(Linear::Vccs {
                name: name.clone(),
                a: *a,
                b: *b,
                p: *p,
                n: *n,
                gm: *gm,
            }),
            Element::VoltageAmplifier { name, a, b, p, n, gain } => elements.push(Linear::Vcvs {
                name: name.clone(),
                a: *a,
                b: *b,
                p: *p,
                n: *n,
                gain: *gain,
            }),
            Element::Bjt { .. } | Element::Mosfet { .. } => {
                let Some(bias) = op.map(|o| &o.devices[device_index]) else { continue };
                device_index += 1;
                let from = elements.len();
                if let Some((els, small)) = device_elements(el, &bias.state, vt) {
                    elements.extend(els);
                    params.push(small);
                }
                devices.push(from..elements.len());
            }
        }
    }
    // The signal source: EMF node behind the series resistance.
    let (sp, sn, rs) = net.signal;
    let emf = new_node(&mut nodes, "source".to_string());
    elements.push(Linear::Conductance { name: "source.r".into(), a: emf, b: sp, g: 1.0 / rs });
    let network = LinearNetwork {
        nodes,
        elements,
        source: (emf, sn),
        source_terminal: (sp, rs),
        output: net.output,
        load_resistance,
        devices,
    };
    (network, params)
}

/// The small-signal elements of transistor `el` at bias `state` (hybrid-π for the bipolar
/// transistor, gm/ro/C for the MOSFET), with its parameters; None for any other element or
/// a state of the other kind. The base resistance r_x is a netlist resistor already.
pub fn device_elements(
    el: &Element,
    state: &DeviceState,
    vt: f64,
) -> Option<(Vec<Linear>, SmallSignal)> {
    let mut elements = Vec::new();
    match (el, state) {
        (
            Element::Bjt { name, c, b, e, params: p },
            DeviceState::Bjt { eval, vbe_v, vcb_v, .. },
        ) => {
            // Two-port in (v_be, v_ce), normalised polarity; signs cancel at small signal.
            let gm = eval.dic_dvbe + eval.dic_dvbc;
            let go = -eval.dic_dvbc;
            let gpi = eval.dib_dvbe + eval.dib_dvbc;
            let gmu = -eval.dib_dvbc; // ∂ib/∂vce, tiny and negative in the active region
            let bi = *b;
            elements.push(Linear::Conductance {
                name: format!("{name}.rpi"),
                a: bi,
                b: *e,
                g: gpi,
            });
            elements.push(Linear::Vccs {
                name: format!("{name}.gm"),
                a: *c,
                b: *e,
                p: bi,
                n: *e,
                gm,
            });
            elements.push(Linear::Conductance { name: format!("{name}.ro"), a: *c, b: *e, g: go });
            // Base current's dependence on v_ce (reverse transfer), kept for exactness.
            elements.push(Linear::Vccs {
                name: format!("{name}.gmu"),
                a: bi,
                b: *e,
                p: *c,
                n: *e,
                gm: gmu,
            });
            let vbe_n = p.sign * vbe_v;
            let vbc_n = -p.sign * vcb_v;
            let cje = devices::depletion_capacitance(p.cje, vbe_n);
            let cmu = devices::depletion_capacitance(p.cjc, vbc_n);
            let tf = devices::transit_time(p, cje, cmu, vt);
            let cpi = tf * gm + cje;
            device_capacitors(&mut elements, name, [("cpi", bi, *e, cpi), ("cmu", bi, *c, cmu)]);
            let small = SmallSignal {
                part: name.clone(),
                gm_s: gm,
                ro_ohm: (go > 0.0).then(|| 1.0 / go),
                rpi_ohm: Some(1.0 / gpi),
                rx_ohm: Some(p.rb + p.rb_external),
                beta_ac: Some(gm / gpi),
                cpi_f: Some(cpi),
                cmu_f: Some(cmu),
                transit_time_s: Some(tf),
                ft_hz: (cpi + cmu > 0.0).then(|| gm / (2.0 * std::f64::consts::PI * (cpi + cmu))),
                cgs_f: None,
                cgd_f: None,
                cdb_f: None,
            };
            Some((elements, small))
        }
        (
            Element::Mosfet { name, d, g, s, params: p },
            DeviceState::Mosfet { eval, region, .. },
        ) => {
            elements.push(Linear::Vccs {
                name: format!("{name}.gm"),
                a: *d,
                b: *s,
                p: *g,
                n: *s,
                gm: eval.gm,
            });
            elements.push(Linear::Conductance {
                name: format!("{name}.ro"),
                a: *d,
                b: *s,
                g: eval.gds,
            });
            // Meyer-style partition of the channel charge (Razavi, ch. 2).
            let (cgs_channel, cgd_channel) = match region {
                MosRegion::Saturation => (2.0 / 3.0 * p.gate_oxide_f, 0.0),
                MosRegion::Triode => (0.5 * p.gate_oxide_f, 0.5 * p.gate_oxide_f),
                MosRegion::CutOff => (0.0, 0.0),
            };
            let cgs = p.cgs_direct.unwrap_or(cgs_channel + p.overlap_f);
            let cgd = p.cgd_direct.unwrap_or(cgd_channel + p.overlap_f);
            let caps = [("cgs", *g, *s, cgs), ("cgd", *g, *d, cgd), ("cdb", *d, *s, p.cdb)];
            device_capacitors(&mut elements, name, caps);
            let small = SmallSignal {
                part: name.clone(),
                gm_s: eval.gm,
                ro_ohm: (eval.gds > 0.0).then(|| 1.0 / eval.gds),
                rpi_ohm: None,
                rx_ohm: None,
                beta_ac: None,
                cpi_f: None,
                cmu_f: None,
                transit_time_s: None,
                ft_hz: None,
                cgs_f: Some(cgs),
                cgd_f: Some(cgd),
                cdb_f: Some(p.cdb),
            };
            Some((elements, small))
        }
        _ => None,
    }
}

/// Appends a transistor's capacitances that are not zero, each named `{device}.{suffix}`,
/// to the high-frequency set.
fn device_capacitors<const N: usize>(
    elements: &mut Vec<Linear>,
    device: &str,
    caps: [(&str, usize, usize, f64); N],
) {
    for (suffix, a, b, c) in caps {
        if c > 0.0 {
            elements.push(Linear::Capacitor {
                name: format!("{device}.{suffix}"),
                a,
                b,
                c,
                set: CapSet::High,
                reason: CapReason::Device,
            });
        }
    }
}
