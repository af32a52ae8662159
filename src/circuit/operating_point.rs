//! The DC operating point by Newton–Raphson on the nonlinear nodal equations.
//!
//! In: a [`Netlist`]. Out: node voltages, each device's region, currents, voltages and
//! dissipation, or a [`BiasError`] naming the device and node that would not settle.
//! Junction steps are limited each iteration; when plain Newton fails, gmin stepping and
//! then source stepping take over (Pillage, Rohrer & Visweswariah, from memory).
//! Capacitors are open and inductors short at DC; the signal source is 0 V behind its
//! resistance.

use crate::analysis::linear::{Restamped, SPARSE_FROM, solve_in_place, sparse_pays};

use crate::circuit::devices::{self, BjtEval, BjtRegion, MosEval, MosRegion};
use crate::circuit::netlist::{Element, Netlist};

/// Newton iterations allowed per solve.
const MAX_ITERATIONS: usize = 200;
/// Voltage step below which an iteration counts as settled, V (plus the same relative).
const VOLTAGE_TOLERANCE: f64 = 1e-9;

/// How the operating point was reached.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Method {
    /// Plain Newton from the initial guess.
    Newton,
    /// Newton with a shunt conductance on every node, stepped down to zero.
    GminStepping,
    /// Newton with the supplies ramped up from zero.
    SourceStepping,
}

/// The bias of one transistor.
#[derive(Clone, Debug, serde::Serialize)]
pub struct DeviceBias {
    /// Designator.
    pub part: String,
    /// Region and currents.
    #[serde(flatten)]
    pub state: DeviceState,
    /// Dissipation, W.
    pub power_w: f64,
    /// The model's dissipation rating, W.
    pub max_power_w: Option<f64>,
}

/// Per-kind bias detail. Voltages and currents carry their real signs (a pnp has negative
/// V_CE and I_C).
#[derive(Clone, Debug, serde::Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum DeviceState {
    /// A bipolar transistor.
    Bjt {
        /// Region.
        region: BjtRegion,
        /// Collector current, A.
        ic_a: f64,
        /// Base current, A.
        ib_a: f64,
        /// V_BE, V.
        vbe_v: f64,
        /// V_CE, V.
        vce_v: f64,
        /// V_CB, V.
        vcb_v: f64,
        /// Currents and derivatives at the normalised (npn) voltages.
        #[serde(skip)]
        eval: BjtEval,
    },
    /// A MOSFET.
    Mosfet {
        /// Region.
        region: MosRegion,
        /// Drain current, A.
        id_a: f64,
        /// V_GS, V.
        vgs_v: f64,
        /// V_DS, V.
        vds_v: f64,
        /// Overdrive |V_GS| − |V_th|, V.
        overdrive_v: f64,
        /// Current and derivatives at the normalised (n-channel) voltages.
        #[serde(skip)]
        eval: MosEval,
    },
}

/// The solved operating point.
#[derive(Clone, Debug, serde::Serialize)]
pub struct OperatingPoint {
    /// True when Newton settled.
    pub converged: bool,
    /// How it was reached.
    pub method: Method,
    /// Newton iterations in all.
    pub iterations: usize,
    /// Node voltages by netlist index (ground is 0 V).
    pub node_voltages: Vec<f64>,
    /// Transistor biases, in netlist order.
    pub devices: Vec<DeviceBias>,
    /// Largest KCL imbalance at any node with the exact device equations, A.
    pub kcl_residual_a: f64,
    /// The thermal voltage used, V.
    pub thermal_voltage_v: f64,
    /// Every unknown of the DC system: node voltages (ground excluded), then the branch
    /// currents of supplies, voltage amplifiers and inductors.
    #[serde(skip)]
    pub solution: Vec<f64>,
}

/// Why the operating point could not be found.
#[derive(Clone, Debug, PartialEq)]
pub struct BiasError {
    /// The device that moved most in the last attempt, if any.
    pub device: Option<String>,
    /// The node that moved most.
    pub node: String,
    /// What happened.
    pub message: String,
}

impl std::fmt::Display for BiasError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

/// Unknown layout of the DC system: node voltages (ground excluded), then branch currents
/// of supplies, voltage amplifiers and inductors.
pub(super) struct Layout {
    pub(super) nodes: usize,
    pub(super) size: usize,
    /// Branch index of each element that has one (by element index).
    pub(super) branch: Vec<Option<usize>>,
    /// Branch index of each supply.
    pub(super) supply_branch: Vec<usize>,
    /// Whether each unknown is a supply rail's node voltage.
    pub(super) rail: Vec<bool>,
}

impl Layout {
    pub(super) fn new(net: &Netlist) -> Layout {
        let nodes = net.nodes.len() - 1;
        let mut next = nodes;
        let supply_branch: Vec<usize> = (0..net.supplies.len())
            .map(|_| {
                next += 1;
                next - 1
            })
            .collect();
        let branch = net
            .elements
            .iter()
            .map(|e| match e {
                Element::VoltageAmplifier { .. } | Element::Inductor { .. } => {
                    next += 1;
                    Some(next - 1)
                }
                _ => None,
            })
            .collect();
        let mut rail = vec![false; next];
        for &(node, _) in &net.supplies {
            if let Some(r) = at(node) {
                rail[r] = true;
            }
        }
        Layout { nodes, size: next, branch, supply_branch, rail }
    }
}

/// The DC system of one Newton step: stamps (row, column, value) and the right-hand side.
/// The stamps land at the same places, in the same order, every step (a zero is stamped as
/// a zero), so a large network's sparse LU reuses one symbolic analysis. A supply rail's
/// voltage is known: its KCL row is left out (the supply takes whatever current balances
/// it) and its column moves to the right-hand side, so a rail shared by every stage is no
/// dense row and column to defeat the sparse ordering. The rail keeps its unknown, held at
/// the supply's voltage by the supply's branch row.
#[derive(Clone)]
pub(super) struct System {
    pub(super) stamps: Vec<(usize, usize, f64)>,
    pub(super) rhs: Vec<f64>,
    /// The voltage of each rail unknown at this system's supply ramp.
    fixed: Vec<Option<f64>>,
}

impl System {
    pub(super) fn add(&mut self, r: Option<usize>, c: Option<usize>, v: f64) {
        let (Some(r), Some(c)) = (r, c) else { return };
        if self.fixed[r].is_some() {
            return;
        }
        match self.fixed[c] {
            Some(volts) => self.rhs[r] -= v * volts,
            None => self.stamps.push((r, c, v)),
        }
    }

    pub(super) fn add_rhs(&mut self, r: Option<usize>, v: f64) {
        if let Some(r) = r
            && self.fixed[r].is_none()
        {
            self.rhs[r] += v;
        }
    }

    fn conductance(&mut self, x: usize, y: usize, g: f64) {
        self.add(at(x), at(x), g);
        self.add(at(y), at(y), g);
        self.add(at(x), at(y), -g);
        self.add(at(y), at(x), -g);
    }

    /// An empty system over the same unknowns and fixed rails, for stamps to be added to a
    /// base kept elsewhere.
    pub(super) fn empty_like(&self) -> System {
        System { stamps: Vec::new(), rhs: vec![0.0; self.rhs.len()], fixed: self.fixed.clone() }
    }

    /// Drops every stamp and zeroes the right-hand side, keeping the storage.
    pub(super) fn clear(&mut self) {
        self.stamps.clear();
        self.rhs.iter_mut().for_each(|v| *v = 0.0);
    }

    /// Σ_c A[r][c]·x[c] − rhs[r] for every row.
    pub(super) fn residual(&self, x: &[f64]) -> Vec<f64> {
        let mut residual: Vec<f64> = self.rhs.iter().map(|b| -b).collect();
        for &(r, c, v) in &self.stamps {
            residual[r] += v * x[c];
        }
        residual
    }
}

/// The row/column of a node (None for ground).
pub(super) fn at(node: usize) -> Option<usize> {
    node.checked_sub(1)
}

/// Stamps the linear elements and supplies (scaled by `ramp`) and a shunt `gmin` per node
/// (stamped when zero too, to keep the places of the stamps).
pub(super) fn linear_system(net: &Netlist, layout: &Layout, ramp: f64, gmin: f64) -> System {
    let mut fixed = vec![None; layout.size];
    for &(node, volts) in &net.supplies {
        if let Some(r) = at(node) {
            fixed[r] = Some(volts * ramp);
        }
    }
    let mut a = System { stamps: Vec::new(), rhs: vec![0.0; layout.size], fixed };
    for i in 0..layout.nodes {
        a.add(Some(i), Some(i), gmin);
    }
    let (sp, sn, rs) = net.signal;
    a.conductance(sp, sn, 1.0 / rs);
    for (k, &(node, volts)) in net.supplies.iter().enumerate() {
        let br = layout.supply_branch[k];
        // The supply's own branch: kept whole, it holds the rail at its voltage.
        if let Some(r) = at(node) {
            a.stamps.push((r, br, 1.0));
            a.stamps.push((br, r, 1.0));
        }
        a.rhs[br] = volts * ramp;
    }
    for (i, el) in net.elements.iter().enumerate() {
        match *el {
            Element::Resistor { a: x, b: y, r, .. } => a.conductance(x, y, 1.0 / r),
            Element::Transconductance { a: x, b: y, p, n, gm, .. } => {
                a.add(at(x), at(p), gm);
                a.add(at(x), at(n), -gm);
                a.add(at(y), at(p), -gm);
                a.add(at(y), at(n), gm);
            }
            Element::VoltageAmplifier { a: x, b: y, p, n, gain, .. } => {
                let br = layout.branch[i];
                a.add(at(x), br, 1.0);
                a.add(at(y), br, -1.0);
                a.add(br, at(x), 1.0);
                a.add(br, at(y), -1.0);
                a.add(br, at(p), -gain);
                a.add(br, at(n), gain);
            }
            Element::Inductor { a: x, b: y, .. } => {
                let br = layout.branch[i];
                a.add(at(x), br, 1.0);
                a.add(at(y), br, -1.0);
                a.add(br, at(x), 1.0);
                a.add(br, at(y), -1.0);
            }
            Element::Capacitor { .. } | Element::Bjt { .. } | Element::Mosfet { .. } => {}
        }
    }
    a
}

fn voltage(x: &[f64], node: usize) -> f64 {
    at(node).map_or(0.0, |i| x[i])
}

/// Normalised controlling voltages of device `el` at node voltages `x`.
pub(crate) fn controls(el: &Element, x: &[f64]) -> Option<[f64; 2]> {
    match el {
        Element::Bjt { c, b, e, params, .. } => {
            let (vc, vb, ve) = (voltage(x, *c), voltage(x, *b), voltage(x, *e));
            Some([params.sign * (vb - ve), params.sign * (vb - vc)])
        }
        Element::Mosfet { d, g, s, params, .. } => {
            let (vd, vg, vs) = (voltage(x, *d), voltage(x, *g), voltage(x, *s));
            Some([params.sign * (vg - vs), params.sign * (vd - vs)])
        }
        _ => None,
    }
}

/// Adds device `el`, linearised at normalised controls `v`, to the system.
pub(super) fn stamp_device(a: &mut System, el: &Element, v: [f64; 2], vt: f64) {
    match el {
        Element::Bjt { c, b, e, params, .. } => {
            let s = params.sign;
            let ev = devices::bjt(params, v[0], v[1], vt);
            let (c, b, e) = (at(*c), at(*b), at(*e));
            // I_c ≈ gcbe (Vb − Ve) + gcbc (Vb − Vc) + s (ic0 − gcbe vbe0 − gcbc vbc0)
            let rows = [
                (c, ev.dic_dvbe, ev.dic_dvbc, ev.ic),
                (b, ev.dib_dvbe, ev.dib_dvbc, ev.ib),
                (e, -(ev.dic_dvbe + ev.dib_dvbe), -(ev.dic_dvbc + ev.dib_dvbc), -(ev.ic + ev.ib)),
            ];
            for (row, g_be, g_bc, i0) in rows {
                a.add(row, b, g_be + g_bc);
                a.add(row, e, -g_be);
                a.add(row, c, -g_bc);
                a.add_rhs(row, -s * (i0 - g_be * v[0] - g_bc * v[1]));
            }
        }
        Element::Mosfet { d, g, s: src, params, .. } => {
            let sign = params.sign;
            let ev = devices::mosfet(params, v[0], v[1]);
            let (d, g, src) = (at(*d), at(*g), at(*src));
            for (row, k) in [(d, 1.0), (src, -1.0)] {
                a.add(row, g, k * ev.gm);
                a.add(row, d, k * ev.gds);
                a.add(row, src, -k * (ev.gm + ev.gds));
                a.add_rhs(row, -k * sign * (ev.id - ev.gm * v[0] - ev.gds * v[1]));
            }
        }
        _ => {}
    }
}

/// Limits the step of device controls from `old` to `new`.
pub(super) fn limit(el: &Element, new: [f64; 2], old: [f64; 2], vt: f64) -> ([f64; 2], bool) {
    match el {
        Element::Bjt { params, .. } => {
            let vcrit = devices::critical_voltage(params.is, vt);
            let (be, l1) = devices::limit_junction(new[0], old[0], vt, vcrit);
            let (bc, l2) = devices::limit_junction(new[1], old[1], vt, vcrit);
            ([be, bc], l1 || l2)
        }
        Element::Mosfet { .. } => {
            let clamp = |n: f64, o: f64, step: f64| {
                let d = n - o;
                if d.abs() > step { (o + step * d.signum(), true) } else { (n, false) }
            };
            let (gs, l1) = clamp(new[0], old[0], 0.5);
            let (ds, l2) = clamp(new[1], old[1], 2.0);
            ([gs, ds], l1 || l2)
        }
        _ => (new, false),
    }
}

fn initial_controls(el: &Element) -> [f64; 2] {
    match el {
        Element::Bjt { .. } => [0.6, 0.0],
        Element::Mosfet { params, .. } => [params.sign * params.vth + 0.5, 1.0],
        _ => [0.0, 0.0],
    }
}

struct Attempt {
    x: Vec<f64>,
    controls: Vec<[f64; 2]>,
    iterations: usize,
}

struct Diverged {
    node: usize,
    device: Option<usize>,
    iterations: usize,
}

/// One Newton step's linear solve: dense LU for the small systems of a stage, the sparse LU
/// on the network's one symbolic analysis (`sparse`, see [`sparse_steps`]) for a large
/// mostly-zero one, where the dense one grows as n³. Non-finite entries in the answer mark
/// a singular step; the caller reports divergence.
fn solve_step(a: &System, sparse: Option<&Restamped>, dense: &mut Vec<f64>) -> Vec<f64> {
    let n = a.rhs.len();
    if let Some(lu) = sparse {
        return lu.solve(a.stamps.iter().map(|s| s.2), &a.rhs).unwrap_or_else(|| vec![f64::NAN; n]);
    }
    dense.clear();
    dense.resize(n * n, 0.0);
    for &(r, c, v) in &a.stamps {
        dense[r * n + c] += v;
    }
    let mut x = a.rhs.clone();
    if !solve_in_place(dense, &mut x, n) {
        x.fill(f64::NAN);
    }
    x
}

/// The symbolic sparse LU of a Newton step's system, when the network is large and mostly
/// zero enough for it to pay; None for the dense path.
fn sparse_steps(
    net: &Netlist,
    layout: &Layout,
    vt: f64,
    controls: &[[f64; 2]],
) -> Option<Restamped> {
    if layout.size <= SPARSE_FROM {
        return None;
    }
    let mut a = linear_system(net, layout, 1.0, 0.0);
    for (el, v) in net.elements.iter().zip(controls) {
        stamp_device(&mut a, el, *v, vt);
    }
    let places: Vec<(usize, usize)> = a.stamps.iter().map(|s| (s.0, s.1)).collect();
    let lu = Restamped::new(layout.size, &places)?;
    sparse_pays(layout.size, lu.nonzeros()).then_some(lu)
}

/// Newton iterations from `start` with supplies × `ramp` and shunt `gmin`.
struct Steps<'a> {
    net: &'a Netlist,
    layout: &'a Layout,
    vt: f64,
    sparse: Option<&'a Restamped>,
}

fn newton(steps: &Steps, ramp: f64, gmin: f64, start: &Attempt) -> Result<Attempt, Diverged> {
    let Steps { net, layout, vt, sparse } = *steps;
    let mut x = start.x.clone();
    let mut state = start.controls.clone();
    let base = linear_system(net, layout, ramp, gmin);
    let mut worst = (0usize, None);
    // One system reused by every iteration: the linear stamps copied in, the devices' added.
    let mut a = base.clone();
    a.stamps.reserve(base.stamps.len() + 16 * net.elements.len());
    let mut dense = Vec::new();
    for it in 0..MAX_ITERATIONS {
        a.stamps.clear();
        a.stamps.extend_from_slice(&base.stamps);
        a.rhs.copy_from_slice(&base.rhs);
        let mut limited = false;
        let mut biggest_device_step = 0.0;
        for (i, el) in net.elements.iter().enumerate() {
            let Some(raw) = controls(el, &x) else { continue };
            let (v, l) = if it == 0 { (state[i], false) } else { limit(el, raw, state[i], vt) };
            let step = (v[0] - state[i][0]).abs().max((v[1] - state[i][1]).abs());
            if step > biggest_device_step {
                biggest_device_step = step;
                worst.1 = Some(i);
            }
            limited |= l;
            state[i] = v;
            stamp_device(&mut a, el, v, vt);
        }
        let new = solve_step(&a, sparse, &mut dense);
        if new.iter().any(|v| !v.is_finite()) {
            return Err(Diverged { node: worst.0, device: worst.1, iterations: it + 1 });
        }
        let mut dx = 0.0;
        let mut scale = 0.0f64;
        for r in 0..layout.nodes {
            let d = (new[r] - x[r]).abs();
            if d > dx {
                dx = d;
                worst.0 = r + 1;
            }
            scale = scale.max(new[r].abs());
        }
        x = new;
        if it > 0 && !limited && dx <= VOLTAGE_TOLERANCE * (1.0 + scale) {
            return Ok(Attempt { x, controls: state, iterations: start.iterations + it + 1 });
        }
    }
    Err(Diverged { node: worst.0, device: worst.1, iterations: start.iterations + MAX_ITERATIONS })
}

/// Solves the operating point of `net` by Newton's method started from `near`, the solved
/// operating point of a netlist of the same make-up with slightly different values (a
/// tolerance corner of a solved design): a few iterations instead of a start from zero.
/// Falls back to [`solve`] when that start does not settle.
pub fn solve_near(net: &Netlist, near: &OperatingPoint) -> Result<OperatingPoint, BiasError> {
    let vt = devices::thermal_voltage(net.temperature_k);
    let layout = Layout::new(net);
    if near.solution.len() == layout.size {
        let x = near.solution.clone();
        let controls = net
            .elements
            .iter()
            .map(|el| controls(el, &x).unwrap_or_else(|| initial_controls(el)))
            .collect();
        let start = Attempt { x, controls, iterations: 0 };
        let sparse = sparse_steps(net, &layout, vt, &start.controls);
        let steps = Steps { net, layout: &layout, vt, sparse: sparse.as_ref() };
        if let Ok(a) = newton(&steps, 1.0, 0.0, &start) {
            return Ok(finish(&steps, a, Method::Newton));
        }
    }
    solve(net)
}

/// Solves the operating point of `net`.
pub fn solve(net: &Netlist) -> Result<OperatingPoint, BiasError> {
    let vt = devices::thermal_voltage(net.temperature_k);
    let layout = Layout::new(net);
    let fresh = Attempt {
        x: vec![0.0; layout.size],
        controls: net.elements.iter().map(initial_controls).collect(),
        iterations: 0,
    };
    let mut iterations = 0;
    let mut last_failure = None;
    // 1. Plain Newton.
    let sparse = sparse_steps(net, &layout, vt, &fresh.controls);
    let steps = Steps { net, layout: &layout, vt, sparse: sparse.as_ref() };
    let mut found = match newton(&steps, 1.0, 0.0, &fresh) {
        Ok(a) => Some((a, Method::Newton)),
        Err(d) => {
            iterations += d.iterations;
            last_failure = Some(d);
            None
        }
    };
    // 2. Gmin stepping: a shunt on every node, from 10 mS down to none.
    if found.is_none() {
        let mut state = Attempt { iterations, ..fresh_clone(&fresh) };
        let mut ok = true;
        let mut gmin = 1e-2;
        loop {
            match newton(&steps, 1.0, gmin, &state) {
                Ok(a) => state = a,
                Err(d) => {
                    iterations = d.iterations;
                    last_failure = Some(d);
                    ok = false;
                    break;
                }
            }
            if gmin == 0.0 {
                break;
            }
            gmin = if gmin > 1e-12 { gmin / 10.0 } else { 0.0 };
        }
        if ok {
            found = Some((state, Method::GminStepping));
        }
    }
    // 3. Source stepping: ramp the supplies, halving the step on trouble.
    if found.is_none() {
        let mut state = Attempt { iterations, ..fresh_clone(&fresh) };
        let (mut ramp, mut step) = (0.0f64, 0.1f64);
        let mut ok = true;
        while ramp < 1.0 {
            let next = (ramp + step).min(1.0);
            match newton(&steps, next, 0.0, &state) {
                Ok(a) => {
                    state = a;
                    ramp = next;
                    step = (step * 1.5).min(0.2);
                }
                Err(d) => {
                    state.iterations = d.iterations;
                    last_failure = Some(d);
                    step /= 4.0;
                    if step < 1e-4 {
                        ok = false;
                        break;
                    }
                }
            }
        }
        if ok {
            found = Some((state, Method::SourceStepping));
        }
    }
    let Some((attempt, method)) = found else {
        let d = last_failure.expect("a failed attempt is recorded");
        let node = net.nodes.get(d.node).cloned().unwrap_or_else(|| "gnd".into());
        let device = d.device.map(|i| net.elements[i].name().to_string());
        let about = device.as_ref().map_or(String::new(), |dv| format!(" around `{dv}`"));
        return Err(BiasError {
            message: format!(
                "the operating point did not converge{about}: node `{node}` kept moving \
                 after Newton, gmin stepping and source stepping"
            ),
            device,
            node,
        });
    };
    Ok(finish(&steps, attempt, method))
}

fn fresh_clone(a: &Attempt) -> Attempt {
    Attempt { x: a.x.clone(), controls: a.controls.clone(), iterations: a.iterations }
}

/// Polishes the solution with two unlimited Newton steps, then reports it.
fn finish(steps: &Steps, mut attempt: Attempt, method: Method) -> OperatingPoint {
    let Steps { net, layout, vt, sparse } = *steps;
    let base = linear_system(net, layout, 1.0, 0.0);
    let mut dense = Vec::new();
    for _ in 0..2 {
        let mut a = base.clone();
        for el in &net.elements {
            if let Some(v) = controls(el, &attempt.x) {
                stamp_device(&mut a, el, v, vt);
            }
        }
        let new = solve_step(&a, sparse, &mut dense);
        if new.iter().all(|v| v.is_finite()) {
            attempt.x = new;
        }
    }
    let x = attempt.x;
    // KCL with the exact device currents (a rail's row is the supply's to balance).
    let mut residual = base.residual(&x);
    let mut devices_out = Vec::new();
    for el in &net.elements {
        let Some(v) = controls(el, &x) else { continue };
        for (node, current) in device_currents(el, v, vt) {
            if let Some(r) = at(node) {
                residual[r] += current;
            }
        }
        devices_out.extend(device_bias(el, v, vt));
    }
    let kcl = (0..layout.nodes)
        .filter(|r| !layout.rail[*r])
        .fold(0.0f64, |m, r| m.max(residual[r].abs()));
    let mut node_voltages = vec![0.0];
    node_voltages.extend_from_slice(&x[..layout.nodes]);
    OperatingPoint {
        converged: true,
        method,
        iterations: attempt.iterations,
        node_voltages,
        devices: devices_out,
        kcl_residual_a: kcl,
        thermal_voltage_v: vt,
        solution: x,
    }
}

/// The current each supply delivers into the circuit at the solution `op` of `net`, A, in
/// the order of `net.supplies`: the sum over every element touching its rail of the current
/// leaving the rail into that element (Kirchhoff's current law at the rail, whose own row
/// the solve leaves out).
pub fn supply_currents(net: &Netlist, op: &OperatingPoint) -> Vec<f64> {
    let layout = Layout::new(net);
    let x = &op.solution;
    let v = |node: usize| voltage(x, node);
    let vt = op.thermal_voltage_v;
    net.supplies
        .iter()
        .map(|&(rail, _)| {
            // The current leaving `rail` through a branch from `p` to `q` carrying `i` (p → q).
            let out_of = |p: usize, q: usize, i: f64| {
                (if p == rail { i } else { 0.0 }) - (if q == rail { i } else { 0.0 })
            };
            let (sp, sn, rs) = net.signal;
            let mut total = out_of(sp, sn, (v(sp) - v(sn)) / rs);
            for (k, el) in net.elements.iter().enumerate() {
                total += match *el {
                    Element::Resistor { a, b, r, .. } => out_of(a, b, (v(a) - v(b)) / r),
                    Element::Transconductance { a, b, p, n, gm, .. } => {
                        out_of(a, b, gm * (v(p) - v(n)))
                    }
                    Element::VoltageAmplifier { a, b, .. } | Element::Inductor { a, b, .. } => {
                        layout.branch[k].map_or(0.0, |br| out_of(a, b, x[br]))
                    }
                    Element::Bjt { .. } | Element::Mosfet { .. } => controls(el, x)
                        .map(|c| {
                            device_currents(el, c, vt)
                                .into_iter()
                                .filter(|(node, _)| *node == rail)
                                .map(|(_, i)| i)
                                .sum()
                        })
                        .unwrap_or(0.0),
                    Element::Capacitor { .. } => 0.0,
                };
            }
            total
        })
        .collect()
}

/// The currents device `el` draws into each of its terminals (node, A, positive into the
/// device) at normalised controls `v`: what its KCL rows hold.
pub(crate) fn device_currents(el: &Element, v: [f64; 2], vt: f64) -> Vec<(usize, f64)> {
    match el {
        Element::Bjt { c, b, e, params, .. } => {
            let ev = devices::bjt(params, v[0], v[1], vt);
            let (ic, ib) = (params.sign * ev.ic, params.sign * ev.ib);
            vec![(*c, ic), (*b, ib), (*e, -(ic + ib))]
        }
        Element::Mosfet { d, s: src, params, .. } => {
            let id = params.sign * devices::mosfet(params, v[0], v[1]).id;
            vec![(*d, id), (*src, -id)]
        }
        _ => Vec::new(),
    }
}

/// The bias of device `el` at normalised controls `v` (None for a part that is no
/// transistor). Terminal voltages follow from the controls: V_BE = s·v₀, V_CB = −s·v₁ for
/// the bipolar transistor, V_GS = s·v₀, V_DS = s·v₁ for the MOSFET (s the polarity sign).
pub fn device_bias(el: &Element, v: [f64; 2], vt: f64) -> Option<DeviceBias> {
    match el {
        Element::Bjt { name, params, .. } => {
            let ev = devices::bjt(params, v[0], v[1], vt);
            let s = params.sign;
            let (ic, ib) = (s * ev.ic, s * ev.ib);
            let (vbe, vcb) = (s * v[0], -s * v[1]);
            let vce = vcb + vbe;
            Some(DeviceBias {
                part: name.clone(),
                power_w: ic * vce + ib * vbe,
                max_power_w: params.max_power,
                state: DeviceState::Bjt {
                    region: devices::bjt_region(v[0], v[1]),
                    ic_a: ic,
                    ib_a: ib,
                    vbe_v: vbe,
                    vce_v: vce,
                    vcb_v: vcb,
                    eval: ev,
                },
            })
        }
        Element::Mosfet { name, params, .. } => {
            let ev = devices::mosfet(params, v[0], v[1]);
            let id = params.sign * ev.id;
            let (vgs, vds) = (params.sign * v[0], params.sign * v[1]);
            Some(DeviceBias {
                part: name.clone(),
                power_w: id * vds,
                max_power_w: params.max_power,
                state: DeviceState::Mosfet {
                    region: devices::mos_region(params, v[0], v[1]),
                    id_a: id,
                    vgs_v: vgs,
                    vds_v: vds,
                    overdrive_v: v[0] - params.sign * params.vth,
                    eval: ev,
                },
            })
        }
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Boltzmann constant and elementary charge, exact in the SI since 2019 (BIPM SI
    /// Brochure, 9th ed.): V_T = kT/q (common practice).
    fn thermal(kelvin: f64) -> f64 {
        1.380649e-23 * kelvin / 1.602176634e-19
    }

    /// 27 °C in kelvin (0 °C = 273.15 K, SI Brochure, 9th ed.).
    const ROOM_K: f64 = 300.15;

    /// A design with `parts` and `models` around a signal source behind a coupling
    /// capacitor (an open circuit at DC), through the crate's own loader, and its bias.
    fn bias(supplies: &str, parts: &str, models: &str) -> (Netlist, OperatingPoint) {
        let text = format!(
            "tauweave: 1\n\
             design: {{id: bias, title: operating point case, revision: A, date: 2026-12-01}}\n\
             environment: {{temperature: 27 °C}}\n\
             supplies: {{{supplies}}}\n\
             signal: {{at: in, resistance: 50}}\n\
             output: {{at: out}}\n\
             parts:\n\
             \x20 CIN: {{kind: capacitor, value: 1 µF, between: [in, out], role: coupling}}\n\
             {parts}\
             models:\n{models}"
        );
        let loaded = crate::design::load(&text);
        let design = loaded.design.unwrap_or_else(|| panic!("{:?}\n{text}", loaded.diagnostics));
        let net = Netlist::from_design(&design);
        let op = solve(&net).unwrap_or_else(|e| panic!("{e}\n{text}"));
        (net, op)
    }

    fn node(net: &Netlist, op: &OperatingPoint, name: &str) -> f64 {
        let i = net.nodes.iter().position(|n| n == name).unwrap_or_else(|| panic!("{name}"));
        op.node_voltages[i]
    }

    /// The root of `f` in [lo, hi] by bisection, to the last bit (f changes sign there).
    fn bisect(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64) -> f64 {
        let low_sign = f(lo) > 0.0;
        assert_ne!(low_sign, f(hi) > 0.0, "no sign change in [{lo}, {hi}]");
        for _ in 0..2000 {
            let mid = 0.5 * (lo + hi);
            if mid <= lo || mid >= hi {
                break;
            }
            if (f(mid) > 0.0) == low_sign {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    }

    fn close(got: f64, want: f64, abs: f64, what: &str) {
        assert!((got - want).abs() <= abs, "{what}: {got} vs hand solution {want}");
    }

    /// What the supply delivers returns to ground (Kirchhoff's current law, common practice):
    /// the supply current summed at the rail equals the current summed at ground, which the
    /// code never adds up; and two supplies feeding one divider share it by Ohm's law.
    #[test]
    fn supply_currents_return_through_ground() {
        let (net, op) = bias(
            "vcc: 12 V, vee: 5 V",
            "  R1: {kind: resistor, value: 47k, between: [vcc, out]}\n\
             \x20 R2: {kind: resistor, value: 10k, between: [out, gnd]}\n\
             \x20 RC: {kind: resistor, value: 3k3, between: [vcc, coll]}\n\
             \x20 RE: {kind: resistor, value: 1k, between: [emit, gnd]}\n\
             \x20 RX: {kind: resistor, value: 2k, between: [vee, coll]}\n\
             \x20 Q1: {kind: bjt, model: N, c: coll, b: out, e: emit}\n",
            "  N: {type: npn, beta: 150, saturation_current: 10 fA}\n",
        );
        let i = supply_currents(&net, &op);
        let v = |n: &str| node(&net, &op, n);
        let to_ground = v("out") / 10e3 + v("emit") / 1e3;
        close(i[0] + i[1], to_ground, 1e-15, "supplies in, ground out");
        // vee only feeds RX, so its current is Ohm's law across RX (negative: it sinks).
        close(i[1], (5.0 - v("coll")) / 2e3, 1e-18, "vee through RX");
        assert!(i[1] < 0.0 && i[0] > 0.0);
    }

    #[test]
    fn divider_biased_npn_with_emitter_resistor_matches_the_hand_solution() {
        let (vcc, r1, r2, rc, re, beta, is) = (12.0, 47e3, 10e3, 3.3e3, 1e3, 150.0, 1e-14);
        let (net, op) = bias(
            "vcc: 12 V",
            "  R1: {kind: resistor, value: 47k, between: [vcc, out]}\n\
             \x20 R2: {kind: resistor, value: 10k, between: [out, gnd]}\n\
             \x20 RC: {kind: resistor, value: 3k3, between: [vcc, coll]}\n\
             \x20 RE: {kind: resistor, value: 1k, between: [emit, gnd]}\n\
             \x20 Q1: {kind: bjt, model: N, c: coll, b: out, e: emit}\n",
            "  N: {type: npn, beta: 150, saturation_current: 1e-14 A}\n",
        );
        // By hand, in the forward-active region with the Shockley law I_C = I_S·e^(V_BE/V_T)
        // and I_B = I_C/β (common practice): the divider's Thévenin source V_TH = V_cc·R2/(R1 + R2)
        // behind R_TH = R1 ∥ R2 drives the base loop
        //   V_TH = I_B·R_TH + V_BE + (I_C + I_B)·R_E,
        // one equation in V_BE, solved by bisection.
        let vt = thermal(ROOM_K);
        let (vth, rth) = (vcc * r2 / (r1 + r2), r1 * r2 / (r1 + r2));
        let ic_of = |vbe: f64| is * (vbe / vt).exp();
        let vbe =
            bisect(|vbe| vth - vbe - ic_of(vbe) * (rth / beta + re * (1.0 + 1.0 / beta)), 0.0, vth);
        let (ic, ib) = (ic_of(vbe), ic_of(vbe) / beta);
        // The hand solution leaves out the reverse terms (of order I_S = 10 fA) and the 1 pS
        // shunts across the junctions (devices::GMIN, a few pA at these voltages): a few pA
        // in I_B, tens of nV at the base through R_TH.
        close(node(&net, &op, "out"), vth - ib * rth, 1e-6, "V_B");
        close(node(&net, &op, "emit"), (ic + ib) * re, 1e-6, "V_E");
        close(node(&net, &op, "coll"), vcc - ic * rc, 1e-6, "V_C");
        close(node(&net, &op, "vcc"), vcc, 1e-12, "the supply");
        let DeviceState::Bjt { region, ic_a, ib_a, vbe_v, .. } = op.devices[0].state else {
            panic!("not a bipolar transistor")
        };
        assert_eq!(region, BjtRegion::Active);
        close(ic_a, ic, 1e-6 * ic, "I_C");
        close(ib_a, ib, 1e-6 * ib, "I_B");
        close(vbe_v, vbe, 1e-6, "V_BE");
        assert!(op.converged);
        assert!(op.kcl_residual_a < 1e-12, "KCL residual {} A", op.kcl_residual_a);
        close(op.thermal_voltage_v, vt, 1e-15, "V_T");
        // Its dissipation: I_C·V_CE + I_B·V_BE.
        let vce = vcc - ic * rc - (ic + ib) * re;
        close(op.devices[0].power_w, ic * vce + ib * vbe, 1e-6 * ic * vce, "P");
    }

    #[test]
    fn diode_connected_transistor_fed_through_a_resistor_follows_the_shockley_law() {
        let (vcc, r, beta, is) = (5.0, 4.3e3, 100.0, 2e-15);
        let (net, op) = bias(
            "vcc: 5 V",
            "  R1: {kind: resistor, value: 4k3, between: [vcc, out]}\n\
             \x20 Q1: {kind: bjt, model: N, c: out, b: out, e: gnd}\n",
            "  N: {type: npn, beta: 100, saturation_current: 2 fA}\n",
        );
        // With V_BC = 0 the transistor is a diode, I = I_S(1 + 1/β)(e^(V/V_T) − 1) (Shockley,
        // common practice), fed from V_cc through R: (V_cc − V)/R = I, solved by bisection.
        // The 1 pS junction shunt adds under 1e-11 relative to I and is left out.
        let vt = thermal(ROOM_K);
        let diode = |v: f64| is * (1.0 + 1.0 / beta) * ((v / vt).exp() - 1.0);
        let v = bisect(|v| (vcc - v) / r - diode(v), 0.0, vcc);
        close(node(&net, &op, "out"), v, 1e-9, "V");
        let DeviceState::Bjt { ic_a, ib_a, vcb_v, .. } = op.devices[0].state else {
            panic!("not a bipolar transistor")
        };
        assert_eq!(vcb_v, 0.0);
        close(ic_a + ib_a, (vcc - v) / r, 1e-9 * (vcc - v) / r, "the resistor's current");
        close(ic_a / ib_a, beta, 1e-6 * beta, "I_C/I_B");
        assert!(op.kcl_residual_a < 1e-12, "KCL residual {} A", op.kcl_residual_a);
    }

    /// I_D of a square-law MOSFET in saturation, ½·k′(W/L)·V_ov²·(1 + λ V_DS) (common
    /// practice; `process_transconductance` is k′ = µC_ox, docs/design-format.md), with its
    /// source resistor R_S, drain resistor R_D and gate at V_G (all magnitudes, so the same
    /// for either polarity): solved by bisection for I on [0, (V_G − V_t)/R_S].
    fn square_law_bias(k: f64, vt: f64, lambda: f64, vdd: f64, vg: f64, rs: f64, rd: f64) -> f64 {
        let id = |i: f64| {
            let vov = vg - i * rs - vt;
            0.5 * k * vov * vov * (1.0 + lambda * (vdd - i * (rs + rd)))
        };
        bisect(|i| id(i) - i, 0.0, (vg - vt) / rs)
    }

    #[test]
    fn nmos_in_saturation_follows_the_square_law() {
        let (vdd, r1, r2, rd, rs) = (10.0, 1e6, 500e3, 3.3e3, 1e3);
        let (net, op) = bias(
            "vdd: 10 V",
            "  R1: {kind: resistor, value: 1M, between: [vdd, out]}\n\
             \x20 R2: {kind: resistor, value: 500k, between: [out, gnd]}\n\
             \x20 RD: {kind: resistor, value: 3k3, between: [vdd, drain]}\n\
             \x20 RS: {kind: resistor, value: 1k, between: [src, gnd]}\n\
             \x20 M1: {kind: mosfet, model: N, d: drain, g: out, s: src}\n",
            "  N: {type: nmos, process_transconductance: 100 µA/V², width: 20 µm, \
             length: 2 µm, threshold: 1 V, channel_length_modulation: 0.02 1/V}\n",
        );
        // k = k′·W/L = 1 mA/V²; no gate current, so V_G is the divider's.
        let vg = vdd * r2 / (r1 + r2);
        let id = square_law_bias(1e-3, 1.0, 0.02, vdd, vg, rs, rd);
        // The 1 pS channel shunt (devices::GMIN) adds 6 pA, 6e-9 of I_D.
        close(node(&net, &op, "out"), vg, 1e-9, "V_G");
        close(node(&net, &op, "src"), id * rs, 1e-7, "V_S");
        close(node(&net, &op, "drain"), vdd - id * rd, 1e-7, "V_D");
        let DeviceState::Mosfet { region, id_a, vgs_v, vds_v, overdrive_v, .. } =
            op.devices[0].state
        else {
            panic!("not a MOSFET")
        };
        assert_eq!(region, MosRegion::Saturation);
        close(id_a, id, 1e-8 * id, "I_D");
        close(vgs_v, vg - id * rs, 1e-7, "V_GS");
        close(overdrive_v, vg - id * rs - 1.0, 1e-7, "V_ov");
        assert!(vds_v > overdrive_v, "V_DS {vds_v} V at V_ov {overdrive_v} V");
        assert!(op.kcl_residual_a < 1e-12, "KCL residual {} A", op.kcl_residual_a);
    }

    #[test]
    fn pmos_in_saturation_has_the_signs_of_the_real_device() {
        // The nmos case mirrored: source to V_DD through R_S, drain to ground through R_D,
        // threshold written negative (docs/design-format.md). Magnitudes follow the same
        // square law; the reported V_GS, V_DS and I_D carry the real (negative) signs.
        let (vdd, r1, r2, rd, rs) = (10.0, 500e3, 1e6, 3.3e3, 1e3);
        let (net, op) = bias(
            "vdd: 10 V",
            "  R1: {kind: resistor, value: 500k, between: [vdd, out]}\n\
             \x20 R2: {kind: resistor, value: 1M, between: [out, gnd]}\n\
             \x20 RS: {kind: resistor, value: 1k, between: [vdd, src]}\n\
             \x20 RD: {kind: resistor, value: 3k3, between: [drain, gnd]}\n\
             \x20 M1: {kind: mosfet, model: P, d: drain, g: out, s: src}\n",
            "  P: {type: pmos, process_transconductance: 100 µA/V², width: 20 µm, \
             length: 2 µm, threshold: -1 V, channel_length_modulation: 0.02 1/V}\n",
        );
        // |V_G| measured from V_DD: V_DD·R1/(R1 + R2).
        let vsg_open = vdd * r1 / (r1 + r2);
        let id = square_law_bias(1e-3, 1.0, 0.02, vdd, vsg_open, rs, rd);
        close(node(&net, &op, "src"), vdd - id * rs, 1e-7, "V_S");
        close(node(&net, &op, "drain"), id * rd, 1e-7, "V_D");
        let DeviceState::Mosfet { region, id_a, vgs_v, vds_v, .. } = op.devices[0].state else {
            panic!("not a MOSFET")
        };
        assert_eq!(region, MosRegion::Saturation);
        close(id_a, -id, 1e-8 * id, "I_D (into the drain)");
        close(vgs_v, -(vsg_open - id * rs), 1e-7, "V_GS");
        close(vds_v, -(vdd - id * (rs + rd)), 1e-7, "V_DS");
        assert!(op.kcl_residual_a < 1e-12, "KCL residual {} A", op.kcl_residual_a);
    }
}
