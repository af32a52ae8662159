//! The quasi-static large-signal circuit: the nonlinear equations at mid-band frequencies,
//! solved by Newton's method at any instantaneous value of the source EMF.
//!
//! In: a [`Netlist`] and its solved [`OperatingPoint`]. Out: the solution at a given EMF, the
//! output there, and where each transistor stands against the edges of its bias region. At
//! mid-band the coupling and bypass capacitors hold the voltage they charged to at the bias
//! (each becomes a fixed source of that voltage), the device and load capacitances are open
//! and inductors are wires — the mid-band network's view, so the slope of this transfer at
//! zero EMF is the small-signal mid-band gain. Valid for a signal slow against every
//! high-frequency time constant and fast against every coupling one.

use crate::analysis::linear::{Restamped, solve_in_place, sparse_pays};
use crate::circuit::devices::JUNCTION_ON_V;
use crate::circuit::netlist::{CapSet, Element, Netlist};
use crate::circuit::operating_point::{
    Layout, OperatingPoint, System, at, controls, limit, linear_system, stamp_device,
};
use crate::union_find::UnionFind;

/// Newton iterations allowed at one EMF.
const MAX_ITERATIONS: usize = 100;
/// Settling step, V (plus the same relative), as for the operating point.
const VOLTAGE_TOLERANCE: f64 = 1e-9;
/// Halvings of an EMF step that will not settle before the sweep gives up.
const MAX_SPLITS: u32 = 14;

/// An edge of a transistor's bias region.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Edge {
    /// The bipolar emitter junction, or the MOSFET's gate overdrive, reaches its threshold.
    CutOff,
    /// The bipolar collector junction turns on.
    Saturation,
    /// The MOSFET's V_DS falls to its overdrive: it leaves saturation for the triode region.
    Triode,
}

impl Edge {
    /// What the transistor does there: `cuts off`, `saturates`, `enters triode`.
    pub fn verb(self) -> &'static str {
        match self {
            Edge::CutOff => "cuts off",
            Edge::Saturation => "saturates",
            Edge::Triode => "enters triode",
        }
    }

    /// The edge's name on a plot: `cut-off`, `saturation`, `triode`.
    pub fn noun(self) -> &'static str {
        match self {
            Edge::CutOff => "cut-off",
            Edge::Saturation => "saturation",
            Edge::Triode => "triode",
        }
    }
}

/// Where one transistor stands at a solution: each edge's margin, positive on the bias side.
#[derive(Clone, Copy, Debug)]
pub struct Margins {
    /// Element index of the transistor.
    pub element: usize,
    /// [cut-off, saturation or triode] margins, V.
    pub margins: [f64; 2],
    /// The second margin's edge: bipolar saturation or the MOSFET's triode edge.
    pub second: Edge,
}

/// The circuit at mid-band with its coupling capacitors held, ready to solve at any EMF.
pub struct Held<'a> {
    net: &'a Netlist,
    layout: Layout,
    base: System,
    vt: f64,
    /// The transistors' element indices.
    devices: Vec<usize>,
    /// Whether each transistor is in its normal region at the bias (a bipolar transistor
    /// forward-active, a MOSFET in saturation): only those are watched for limits.
    watched: Vec<bool>,
    sparse: Option<Restamped>,
    /// The base system summed into a dense row-major matrix (small networks).
    base_dense: Vec<f64>,
    /// The source's Norton current per volt of EMF, by row.
    injection: Vec<(usize, f64)>,
    /// The devices' stamps of one Newton step (storage kept between steps).
    step: System,
    /// The dense matrix and right-hand side of one step.
    work: (Vec<f64>, Vec<f64>),
    /// The solution at zero EMF.
    bias: Vec<f64>,
    /// The output at zero EMF, V.
    bias_output: f64,
    /// Newton solves done (for benches and tests).
    pub solves: usize,
}

impl<'a> Held<'a> {
    /// The held circuit of `net` about its operating point `op`; None when the circuit has
    /// no transistor or its held form will not solve at zero EMF.
    pub fn new(net: &'a Netlist, op: &OperatingPoint) -> Option<Held<'a>> {
        let devices: Vec<usize> = (0..net.elements.len())
            .filter(|&i| matches!(net.elements[i], Element::Bjt { .. } | Element::Mosfet { .. }))
            .collect();
        if devices.is_empty() {
            return None;
        }
        let vt = op.thermal_voltage_v;
        // Fixed voltages (ground, rails) and wires (inductors) joined: a held capacitor whose
        // ends are joined already is fixed by the others and would close a loop of sources.
        let mut joined = UnionFind::new(net.nodes.len());
        for &(node, _) in &net.supplies {
            joined.join(0, node);
        }
        for el in &net.elements {
            if let Element::Inductor { a, b, .. } = *el {
                joined.join(a, b);
            }
        }
        let holds: Vec<(usize, usize, f64)> = net
            .elements
            .iter()
            .filter_map(|el| match *el {
                Element::Capacitor { a, b, set: CapSet::Low, .. } if joined.join(a, b) => {
                    Some((a, b, op.node_voltages[a] - op.node_voltages[b]))
                }
                _ => None,
            })
            .collect();
        let mut layout = Layout::new(net);
        let first = layout.size;
        layout.size += holds.len();
        layout.rail.resize(layout.size, false);
        let mut base = linear_system(net, &layout, 1.0, 0.0);
        for (k, &(a, b, volts)) in holds.iter().enumerate() {
            let br = Some(first + k);
            base.add(at(a), br, 1.0);
            base.add(at(b), br, -1.0);
            base.add(br, at(a), 1.0);
            base.add(br, at(b), -1.0);
            base.add_rhs(br, volts);
        }
        let mut start = op.solution.clone();
        start.resize(layout.size, 0.0);
        let watched = devices
            .iter()
            .map(|&i| raw_margins(&net.elements[i], &start).iter().all(|m| *m > 0.0))
            .collect();
        let n = layout.size;
        let mut unit = base.empty_like();
        let (p, m, rs) = net.signal;
        unit.add_rhs(at(p), 1.0 / rs);
        unit.add_rhs(at(m), -1.0 / rs);
        let injection =
            unit.rhs.iter().enumerate().filter(|(_, v)| **v != 0.0).map(|(r, v)| (r, *v)).collect();
        let step = base.empty_like();
        let mut held = Held {
            net,
            layout,
            base,
            vt,
            devices,
            watched,
            sparse: None,
            base_dense: Vec::new(),
            injection,
            step,
            work: (Vec::new(), vec![0.0; n]),
            bias: Vec::new(),
            bias_output: 0.0,
            solves: 0,
        };
        held.sparse = held.sparse_pattern(&start);
        if held.sparse.is_none() {
            held.base_dense = vec![0.0; n * n];
            for &(r, c, v) in &held.base.stamps {
                held.base_dense[r * n + c] += v;
            }
            held.work.0 = vec![0.0; n * n];
        }
        let bias = held.newton(0.0, &start)?;
        held.bias_output = held.output(&bias);
        held.bias = bias;
        Some(held)
    }

    /// The solution at zero EMF.
    pub fn bias(&self) -> &[f64] {
        &self.bias
    }

    /// The output voltage of solution `x` less the output at zero EMF, V.
    pub fn output_change(&self, x: &[f64]) -> f64 {
        self.output(x) - self.bias_output
    }

    fn output(&self, x: &[f64]) -> f64 {
        let (p, n) = self.net.output;
        let v = |node: usize| at(node).map_or(0.0, |i| x[i]);
        v(p) - v(n)
    }

    /// The transistors outside their normal region at the bias (a bipolar transistor not
    /// forward-active, a MOSFET not in saturation), by designator: they are not watched.
    pub fn unwatched(&self) -> Vec<String> {
        self.devices
            .iter()
            .zip(&self.watched)
            .filter(|(_, w)| !**w)
            .map(|(&i, _)| self.net.elements[i].name().to_string())
            .collect()
    }

    /// The margins at solution `x` of each transistor in its normal region at the bias,
    /// positive inside it.
    pub fn margins(&self, x: &[f64]) -> Vec<Margins> {
        self.devices
            .iter()
            .zip(&self.watched)
            .filter(|(_, w)| **w)
            .map(|(&i, _)| {
                let el = &self.net.elements[i];
                let raw = raw_margins(el, x);
                let second = if matches!(el, Element::Mosfet { .. }) {
                    Edge::Triode
                } else {
                    Edge::Saturation
                };
                Margins { element: i, margins: raw, second }
            })
            .collect()
    }

    /// Solves at EMF `to` starting from solution `from` (at EMF `from_v`), splitting the
    /// step where Newton will not settle in one; None when even small steps fail.
    pub fn track(&mut self, from_v: f64, from: &[f64], to: f64) -> Option<Vec<f64>> {
        self.track_depth(from_v, from, to, 0)
    }

    fn track_depth(&mut self, from_v: f64, from: &[f64], to: f64, depth: u32) -> Option<Vec<f64>> {
        if let Some(x) = self.newton(to, from) {
            return Some(x);
        }
        if depth >= MAX_SPLITS {
            return None;
        }
        let mid = 0.5 * (from_v + to);
        let half = self.track_depth(from_v, from, mid, depth + 1)?;
        self.track_depth(mid, &half, to, depth + 1)
    }

    /// The sparse pattern of the held system, when it is large enough to pay.
    fn sparse_pattern(&self, x: &[f64]) -> Option<Restamped> {
        let a = self.assembled(x);
        let places: Vec<(usize, usize)> = a.stamps.iter().map(|s| (s.0, s.1)).collect();
        let lu = Restamped::new(self.layout.size, &places)?;
        sparse_pays(self.layout.size, lu.nonzeros()).then_some(lu)
    }

    /// The system linearised at device controls read from `x` (the base's stamps first).
    fn assembled(&self, x: &[f64]) -> System {
        let mut a = self.base.clone();
        for &i in &self.devices {
            let el = &self.net.elements[i];
            if let Some(v) = controls(el, x) {
                stamp_device(&mut a, el, v, self.vt);
            }
        }
        a
    }

    /// Newton's method at EMF `emf` from `start`, with the operating point's junction-step
    /// limits; None when it does not settle.
    fn newton(&mut self, emf: f64, start: &[f64]) -> Option<Vec<f64>> {
        self.solves += 1;
        let n = self.layout.size;
        let mut x = start.to_vec();
        let mut state: Vec<[f64; 2]> = self
            .devices
            .iter()
            .map(|&i| controls(&self.net.elements[i], &x).unwrap_or([0.0; 2]))
            .collect();
        for it in 0..MAX_ITERATIONS {
            self.step.clear();
            let mut limited = false;
            for (k, &i) in self.devices.iter().enumerate() {
                let el = &self.net.elements[i];
                let raw = controls(el, &x).unwrap_or([0.0; 2]);
                let (v, l) =
                    if it == 0 { (state[k], false) } else { limit(el, raw, state[k], self.vt) };
                limited |= l;
                state[k] = v;
                stamp_device(&mut self.step, el, v, self.vt);
            }
            let (a, b) = &mut self.work;
            for (r, value) in b.iter_mut().enumerate() {
                *value = self.base.rhs[r] + self.step.rhs[r];
            }
            for &(r, per_volt) in &self.injection {
                b[r] += emf * per_volt;
            }
            let new = match &self.sparse {
                Some(lu) => {
                    let values = self.base.stamps.iter().chain(&self.step.stamps).map(|s| s.2);
                    lu.solve(values, b)?
                }
                None => {
                    a.copy_from_slice(&self.base_dense);
                    for &(r, c, v) in &self.step.stamps {
                        a[r * n + c] += v;
                    }
                    if !solve_in_place(a, b, n) {
                        return None;
                    }
                    b.clone()
                }
            };
            if new.iter().any(|v| !v.is_finite()) {
                return None;
            }
            let mut dx = 0.0f64;
            let mut scale = 0.0f64;
            for r in 0..self.layout.nodes {
                dx = dx.max((new[r] - x[r]).abs());
                scale = scale.max(new[r].abs());
            }
            x = new;
            if it > 0 && !limited && dx <= VOLTAGE_TOLERANCE * (1.0 + scale) {
                return Some(x);
            }
        }
        None
    }
}

/// A walk along the transfer from the bias: each new EMF starts Newton from the straight-line
/// extrapolation of the last two solutions (the continuation's predictor), which leaves it
/// one corrector step from the answer where the transfer is smooth.
pub struct Path {
    v: f64,
    x: Vec<f64>,
    prev: Option<(f64, Vec<f64>)>,
}

impl Path {
    /// A walk starting at the bias of `held`.
    pub fn new(held: &Held) -> Path {
        Path { v: 0.0, x: held.bias.clone(), prev: None }
    }

    /// The solution at EMF `to`; None when it cannot be reached.
    pub fn advance(&mut self, held: &mut Held, to: f64) -> Option<&[f64]> {
        let predicted = self.prev.as_ref().and_then(|(pv, px)| {
            let t = (to - self.v) / (self.v - pv);
            t.is_finite()
                .then(|| self.x.iter().zip(px).map(|(x, p)| x + t * (x - p)).collect::<Vec<_>>())
        });
        let next = match predicted.and_then(|guess| held.newton(to, &guess)) {
            Some(x) => x,
            None => held.track(self.v, &self.x, to)?,
        };
        let last = std::mem::replace(&mut self.x, next);
        self.prev = Some((self.v, last));
        self.v = to;
        Some(&self.x)
    }
}

/// The [cut-off, saturation] margins of transistor `el` at solution `x`, V: for a bipolar
/// transistor V_BE − 0.4 V and 0.4 V − V_BC (the region edges the operating point reports,
/// [`JUNCTION_ON_V`]); for a MOSFET the overdrive V_GS − V_th and |V_DS| − (V_GS − V_th).
fn raw_margins(el: &Element, x: &[f64]) -> [f64; 2] {
    let Some(v) = controls(el, x) else { return [1.0; 2] };
    match el {
        Element::Bjt { .. } => [v[0] - JUNCTION_ON_V, JUNCTION_ON_V - v[1]],
        Element::Mosfet { params, .. } => {
            let vov = v[0] - params.sign * params.vth;
            [vov, v[1].abs() - vov]
        }
        _ => [1.0; 2],
    }
}

/// The node a transistor's limit shows at: the bipolar collector or the MOSFET drain.
pub fn limit_node(el: &Element) -> usize {
    match *el {
        Element::Bjt { c, .. } => c,
        Element::Mosfet { d, .. } => d,
        _ => 0,
    }
}
