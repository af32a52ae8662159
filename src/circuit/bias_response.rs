//! How the operating point moves when a value moves: the DC Jacobian at the solution,
//! factorised once — the direct method of DC sensitivity analysis (Director & Rohrer,
//! IEEE Trans. Circuit Theory 16(3), 1969, from memory): at a solution R(x, p) = 0,
//! dx/dp = −J⁻¹ ∂R/∂p with J = ∂R/∂x, the last Newton step's matrix.
//!
//! In: a netlist and its solved [`OperatingPoint`]. Out: for a change of a value, the change
//! of every DC unknown (one solve on the one factorisation) and of each transistor's
//! controlling voltages; ∂R/∂ln p of one resistor or controlled source, exactly; the
//! residual of a changed netlist at the unchanged solution, for values that act everywhere
//! (a model parameter, a supply, the temperature); the device biases of a changed netlist
//! at the unchanged solution. No small-signal network, no frequency.

use crate::analysis::linear::Factor;
use crate::analysis::matrix::Matrix;
use crate::circuit::devices;
use crate::circuit::netlist::{Element, Netlist};
use crate::circuit::operating_point::{
    Layout, OperatingPoint, at, controls, device_bias, device_currents, linear_system, stamp_device,
};

/// The factorised DC Jacobian of a solved operating point.
pub struct BiasResponse {
    layout: Layout,
    /// The solution.
    x: Vec<f64>,
    lu: Factor,
    /// Netlist indices of the transistors, in the operating point's device order.
    devices: Vec<usize>,
}

impl BiasResponse {
    /// The Jacobian of `net` at `op`, factorised; None when it is singular (the operating
    /// point then has no first-order response to speak of).
    pub fn new(net: &Netlist, op: &OperatingPoint) -> Option<BiasResponse> {
        let layout = Layout::new(net);
        let x = op.solution.clone();
        if x.len() != layout.size {
            return None;
        }
        let mut a = linear_system(net, &layout, 1.0, 0.0);
        let mut devices = Vec::new();
        for (i, el) in net.elements.iter().enumerate() {
            if let Some(v) = controls(el, &x) {
                stamp_device(&mut a, el, v, op.thermal_voltage_v);
                devices.push(i);
            }
        }
        let lu = Factor::new(&Matrix::from_stamps(layout.size, a.stamps)).ok()?;
        Some(BiasResponse { layout, x, lu, devices })
    }

    /// dx = −J⁻¹ r: the change of every unknown for a change r of the residual (per unit
    /// of whatever r was taken against).
    pub fn solve(&self, r: &[f64]) -> Vec<f64> {
        self.lu.solve(r).into_iter().map(|v| -v).collect()
    }

    /// ∂R/∂ln p at the solution when p is the value of netlist element `k` — a resistor, a
    /// transconductance or a voltage amplifier (None for any other element): the element's
    /// own current or branch equation scaled, all else fixed.
    pub fn part_residual(&self, net: &Netlist, k: usize) -> Option<Vec<f64>> {
        let v = |node: usize| at(node).map_or(0.0, |i| self.x[i]);
        let mut r = vec![0.0; self.layout.size];
        let mut put = |node: usize, value: f64| {
            if let Some(i) = at(node)
                && !self.layout.rail[i]
            {
                r[i] += value;
            }
        };
        match net.elements[k] {
            // i = (v_a − v_b)/R leaves a; ∂i/∂ln R = −i.
            Element::Resistor { a, b, r: ohms, .. } => {
                let i = (v(a) - v(b)) / ohms;
                put(a, -i);
                put(b, i);
            }
            // i = gm·(v_p − v_n) leaves a; ∂i/∂ln gm = i.
            Element::Transconductance { a, b, p, n, gm, .. } => {
                let i = gm * (v(p) - v(n));
                put(a, i);
                put(b, -i);
            }
            // v_a − v_b − A·(v_p − v_n) = 0; ∂/∂ln A = −A·(v_p − v_n).
            Element::VoltageAmplifier { p, n, gain, .. } => {
                let row = self.layout.branch[k]?;
                r[row] = -gain * (v(p) - v(n));
            }
            _ => return None,
        }
        Some(r)
    }

    /// R(x; net) at this solution x for a changed netlist `net` of the same make-up. The
    /// rails take `net`'s supply voltages (so a rail's change reaches every node through
    /// the parts on it), and each supply's branch row holds the solution's rail voltage less
    /// the new one (so the solve moves the rail itself by the change).
    pub fn residual(&self, net: &Netlist) -> Vec<f64> {
        let mut x = self.x.clone();
        for &(node, volts) in &net.supplies {
            if let Some(i) = at(node) {
                x[i] = volts;
            }
        }
        let vt = devices::thermal_voltage(net.temperature_k);
        let mut r = linear_system(net, &self.layout, 1.0, 0.0).residual(&x);
        for el in &net.elements {
            let Some(v) = controls(el, &x) else { continue };
            for (node, current) in device_currents(el, v, vt) {
                if let Some(i) = at(node) {
                    r[i] += current;
                }
            }
        }
        for (k, &(node, volts)) in net.supplies.iter().enumerate() {
            if let Some(i) = at(node) {
                r[i] = 0.0;
                r[self.layout.supply_branch[k]] = self.x[i] - volts;
            }
        }
        r
    }

    /// The transistors' biases of a changed netlist `net` (its models and temperature) at
    /// this solution, rails included — a rail's own move reaches the transistors through
    /// the solve instead — as an operating point the small-signal models can be built from.
    pub fn devices_at(&self, net: &Netlist) -> OperatingPoint {
        let x = self.x.clone();
        let vt = devices::thermal_voltage(net.temperature_k);
        let devices = self
            .devices
            .iter()
            .filter_map(|&k| device_bias(&net.elements[k], controls(&net.elements[k], &x)?, vt))
            .collect();
        let mut node_voltages = vec![0.0];
        node_voltages.extend_from_slice(&x[..self.layout.nodes]);
        OperatingPoint {
            converged: true,
            method: crate::circuit::operating_point::Method::Newton,
            iterations: 0,
            node_voltages,
            devices,
            kcl_residual_a: 0.0,
            thermal_voltage_v: vt,
            solution: x,
        }
    }

    /// Each transistor's normalised controls at the solution (netlist index, controls).
    pub fn device_controls(&self, net: &Netlist) -> Vec<(usize, [f64; 2])> {
        self.devices
            .iter()
            .map(|&k| (k, controls(&net.elements[k], &self.x).unwrap_or([0.0; 2])))
            .collect()
    }

    /// The change of each transistor's controls for a change `dx` of the unknowns (the
    /// controls are differences of node voltages, so linear in x).
    pub fn device_moves(&self, net: &Netlist, dx: &[f64]) -> Vec<[f64; 2]> {
        self.devices.iter().map(|&k| controls(&net.elements[k], dx).unwrap_or([0.0; 2])).collect()
    }
}
