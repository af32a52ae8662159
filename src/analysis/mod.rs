//! The analysis stage: from a validated design to every number the review reports.
//!
//! In: a [`Design`]. Out: [`Analysis`] — the operating point, small-signal parameters,
//! the capacitor classification, mid-band gain and port resistances, the exact response
//! and cut-offs, poles and zeros, and the open- and short-circuit time constants with the
//! estimates they give. Or an [`AnalysisError`] that says what failed and what to check.
//! Never formats numbers for people and never touches files.

pub mod levers;
pub mod linear;
pub mod mna;
pub mod poles;
pub mod requirements;
pub mod response;
pub mod time_constants;
pub mod tolerance;

use std::collections::BTreeMap;
use std::f64::consts::PI;

use serde::Serialize;

use crate::circuit::netlist::{CapReason, CapSet, Netlist};
use crate::circuit::operating_point::{self, DeviceBias, Method};
use crate::circuit::small_signal::{self, Linear, LinearNetwork, SmallSignal};
use crate::design::Design;
use linear::Factor;
use mna::{Assembly, CapState, Mna};
use poles::Root;
use response::SweepPoint;
use time_constants::{CapRef, OpenCircuitCap, ShortCircuitCap};

/// A failure of the analysis, with what to check.
#[derive(Clone, Debug, PartialEq)]
pub struct AnalysisError {
    /// What failed.
    pub message: String,
    /// What to check.
    pub help: String,
    /// The design key most likely at fault (`parts.Q1`, `models.RFN1.beta`), if known.
    pub place: Option<String>,
}

impl std::fmt::Display for AnalysisError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}\n  help: {}", self.message, self.help)
    }
}

/// A pole or zero, in Hz (s/2π).
#[derive(Clone, Copy, Debug, Serialize, PartialEq)]
pub struct RootHz {
    /// Real part of s/2π, Hz.
    pub re_hz: f64,
    /// Imaginary part of s/2π, Hz.
    pub im_hz: f64,
}

impl RootHz {
    fn from(s: &Root) -> RootHz {
        RootHz { re_hz: s.re / (2.0 * PI), im_hz: s.im / (2.0 * PI) }
    }

    /// |s|/2π, Hz.
    pub fn magnitude_hz(&self) -> f64 {
        self.re_hz.hypot(self.im_hz)
    }
}

/// The operating point as reported.
#[derive(Clone, Debug, Serialize)]
pub struct OperatingPointReport {
    /// True when the bias settled (always, for a report that exists).
    pub converged: bool,
    /// How it was reached.
    pub method: Option<Method>,
    /// Newton iterations.
    pub iterations: usize,
    /// Largest KCL imbalance, A.
    pub kcl_residual_a: f64,
    /// kT/q, V.
    pub thermal_voltage_v: f64,
    /// Node voltages, V.
    pub nodes: BTreeMap<String, f64>,
    /// Transistors.
    pub devices: Vec<DeviceReport>,
}

/// A transistor's bias and small-signal model.
#[derive(Clone, Debug, Serialize)]
pub struct DeviceReport {
    /// Bias.
    #[serde(flatten)]
    pub bias: DeviceBias,
    /// Small-signal parameters at that bias.
    pub small_signal: SmallSignal,
}

/// A capacitor and the set it joined.
#[derive(Clone, Debug, Serialize)]
pub struct CapacitorClass {
    /// Designator.
    pub part: String,
    /// F.
    pub c_f: f64,
    /// `low` or `high`.
    pub set: CapSet,
    /// Why.
    pub reason: CapReason,
}

/// Mid-band figures.
#[derive(Clone, Debug, Serialize)]
pub struct Midband {
    /// The frequency taken as mid-band: √(f_L,est · f_H,est), Hz.
    pub frequency_hz: f64,
    /// Signed voltage gain from the source EMF to the output.
    pub gain: f64,
    /// 20·log10|gain|.
    pub gain_db: Option<f64>,
    /// Looking into the input, source resistance excluded, Ω.
    pub input_resistance_ohm: Option<f64>,
    /// Looking into the output with the source at rest, load excluded, Ω.
    pub output_resistance_ohm: Option<f64>,
}

/// Relative errors of the estimates against the exact cut-off: (estimate − exact)/exact.
#[derive(Clone, Debug, Serialize)]
pub struct EstimateErrors {
    /// Of the time-constant estimate.
    pub time_constant: Option<f64>,
    /// Of the second-order estimate (high side only).
    pub second_order: Option<f64>,
    /// Of the root-sum-square of the poles and zeros.
    pub root_sum_square: Option<f64>,
}

/// Peaking above the mid-band gain.
#[derive(Clone, Debug, Serialize)]
pub struct Peaking {
    /// Highest |H| over |H_mid|, dB.
    pub peak_db: f64,
    /// Where, Hz.
    pub at_hz: f64,
    /// Crossings of the −3 dB level on the sweep (more than one: a ragged edge).
    pub crossings: usize,
}

/// Open-circuit time constants.
#[derive(Clone, Debug, Serialize)]
pub struct Octc {
    /// Per high-frequency capacitor.
    pub caps: Vec<OpenCircuitCap>,
    /// Σ τ, s.
    pub sum_tau_s: Option<f64>,
    /// 1/(2π Σ τ), Hz.
    pub f_estimate_hz: Option<f64>,
}

/// The high-frequency side.
#[derive(Clone, Debug, Serialize)]
pub struct High {
    /// Exact upper −3 dB frequency, Hz.
    pub f3db_hz: Option<f64>,
    /// b1 = Σ τ, s.
    pub b1_s: Option<f64>,
    /// b2, s².
    pub b2_s2: Option<f64>,
    /// |p2/p1| of the high-frequency network's two lowest poles.
    pub dominance_ratio: Option<f64>,
    /// Open-circuit time constants.
    pub octc: Octc,
    /// −3 dB of 1/(1 + b1 s + b2 s²), Hz.
    pub second_order_f_estimate_hz: Option<f64>,
    /// 1/√(Σ 1/f_p² − 2 Σ 1/f_z²), Hz.
    pub rss_f_estimate_hz: Option<f64>,
    /// Each estimate's error.
    pub estimate_errors: EstimateErrors,
    /// Peaking, when |H| rises above mid-band.
    pub peaking: Option<Peaking>,
    /// Poles of the high-frequency network (low capacitors shorted).
    pub poles_hz: Vec<RootHz>,
    /// Zeros of the high-frequency network.
    pub zeros_hz: Vec<RootHz>,
}

/// Short-circuit time constants.
#[derive(Clone, Debug, Serialize)]
pub struct Sctc {
    /// Per low-frequency capacitor.
    pub caps: Vec<ShortCircuitCap>,
    /// Σ 1/(2π τ), Hz.
    pub f_estimate_hz: Option<f64>,
}

/// The low-frequency side.
#[derive(Clone, Debug, Serialize)]
pub struct Low {
    /// Exact lower −3 dB frequency, Hz.
    pub f3db_hz: Option<f64>,
    /// Short-circuit time constants.
    pub sctc: Sctc,
    /// |p1/p2| of the low network's two highest poles.
    pub dominance_ratio: Option<f64>,
    /// √(Σ f_p² − 2 Σ f_z²), Hz.
    pub rss_f_estimate_hz: Option<f64>,
    /// Each estimate's error.
    pub estimate_errors: EstimateErrors,
    /// Poles of the low-frequency network (high capacitors open).
    pub poles_hz: Vec<RootHz>,
    /// Zeros of the low-frequency network.
    pub zeros_hz: Vec<RootHz>,
}

/// Everything the analysis computes.
#[derive(Clone, Debug, Serialize)]
pub struct Analysis {
    /// The bias (absent for a design without transistors).
    pub operating_point: Option<OperatingPointReport>,
    /// Every capacitor and its set.
    pub capacitors: Vec<CapacitorClass>,
    /// Mid-band figures.
    pub midband: Midband,
    /// High-frequency side.
    pub high: High,
    /// Low-frequency side.
    pub low: Low,
    /// Poles of the whole network.
    pub poles: Vec<RootHz>,
    /// Zeros from the source to the output.
    pub zeros: Vec<RootHz>,
    /// The frequency response over the design's sweep.
    #[serde(skip)]
    pub sweep: Vec<SweepPoint>,
    /// True when the network has inductors (the time constants treat them as wires).
    pub has_inductors: bool,
}

/// Runs the whole analysis of a design at its nominal values.
pub fn analyze(design: &Design) -> Result<Analysis, AnalysisError> {
    // One thread inside faer: the same bytes out on any machine, and no thread start-up
    // for matrices this small.
    faer::set_global_parallelism(faer::Par::Seq);
    let net = Netlist::from_design(design);
    let op = if net.has_devices() {
        Some(operating_point::solve(&net).map_err(|e| AnalysisError {
            help: format!(
                "check the bias network around `{}` (resistor values, supply voltages) and the \
                 model's saturation current and gain",
                e.device.as_deref().unwrap_or(&e.node)
            ),
            place: e.device.as_ref().map(|d| format!("parts.{d}")),
            message: e.message,
        })?)
    } else {
        None
    };
    let (lin, small) = small_signal::linearize(&net, op.as_ref());
    let mut result = analyze_network(&lin, design)?;
    result.operating_point = op.map(|op| OperatingPointReport {
        converged: op.converged,
        method: Some(op.method),
        iterations: op.iterations,
        kcl_residual_a: op.kcl_residual_a,
        thermal_voltage_v: op.thermal_voltage_v,
        nodes: net.nodes.iter().cloned().zip(op.node_voltages.iter().copied()).skip(1).collect(),
        devices: op
            .devices
            .into_iter()
            .zip(small)
            .map(|(bias, small_signal)| DeviceReport { bias, small_signal })
            .collect(),
    });
    Ok(result)
}

fn cap_set(lin: &LinearNetwork, i: usize) -> Option<CapSet> {
    match &lin.elements[i] {
        Linear::Capacitor { set, .. } => Some(*set),
        _ => None,
    }
}

fn singular(lin: &LinearNetwork, m: &Mna, unknown: usize, what: &str) -> AnalysisError {
    let node = if unknown < m.nodes { Some(lin.nodes[unknown + 1].clone()) } else { None };
    let floating = floating_nodes(lin, m);
    let named = if floating.is_empty() { node.into_iter().collect() } else { floating };
    if named.is_empty() {
        return AnalysisError {
            message: format!(
                "the {what} network is singular: voltage-defined elements (voltage amplifiers, \
                 supplies, shorted coupling capacitors) form a loop or drive one node pair twice"
            ),
            help: "check that no two voltage amplifiers or supplies set the same nodes, and that \
                   coupling and bypass capacitors do not close a loop with them"
                .into(),
            place: None,
        };
    }
    AnalysisError {
        message: format!(
            "the {what} network is singular: {} has no path to ground there",
            named.iter().map(|n| format!("`{n}`")).collect::<Vec<_>>().join(", ")
        ),
        help: "a node reached only through open capacitors or current sources floats; give it \
               a resistive path, or check the capacitor roles"
            .into(),
        place: None,
    }
}

/// Nodes whose row and column of G are empty.
fn floating_nodes(lin: &LinearNetwork, m: &Mna) -> Vec<String> {
    (0..m.nodes)
        .filter(|&r| (0..m.size()).all(|c| m.g[(r, c)] == 0.0 && m.g[(c, r)] == 0.0))
        .map(|r| lin.nodes[r + 1].clone())
        .collect()
}

fn hz(roots: &[Root]) -> Vec<RootHz> {
    roots.iter().map(RootHz::from).collect()
}

/// The analysis of a linear small-signal network.
pub fn analyze_network(lin: &LinearNetwork, design: &Design) -> Result<Analysis, AnalysisError> {
    let state_mid = |i| match cap_set(lin, i) {
        Some(CapSet::Low) => CapState::Short,
        Some(CapSet::High) => CapState::Open,
        None => CapState::Present,
    };
    let mid = mna::assemble(lin, state_mid, Assembly::default());
    let g = Factor::new(&mid.g).map_err(|s| singular(lin, &mid, s.unknown, "mid-band"))?;

    // Mid-band gain and port resistances.
    let x = g.solve(&mid.b);
    let gain: f64 = x.iter().zip(&mid.out).map(|(a, b)| a * b).sum();
    let (input_resistance, output_resistance) = port_resistances(lin, &x, state_mid);
    let capacitors: Vec<CapacitorClass> = lin
        .elements
        .iter()
        .filter_map(|el| match el {
            Linear::Capacitor { name, c, set, reason, .. } => {
                Some(CapacitorClass { part: name.clone(), c_f: *c, set: *set, reason: *reason })
            }
            _ => None,
        })
        .collect();
    let (high_caps, low_caps) = cap_refs(lin, &mid);
    let octc = time_constants::open_circuit(&mid, &g, &high_caps);
    let (sctc_caps, inverse_tau_sum) = time_constants::short_circuit(&mid, &g, &low_caps);
    let f_high_est = (octc.b1 > 0.0).then(|| 1.0 / (2.0 * PI * octc.b1));
    let f_low_est = (inverse_tau_sum > 0.0).then(|| inverse_tau_sum / (2.0 * PI));

    // Poles and zeros: whole network, high network (low shorted), low network (high open).
    let full = mna::assemble(lin, |_| CapState::Present, Assembly::default());
    let high_net = mna::assemble(
        lin,
        |i| if cap_set(lin, i) == Some(CapSet::Low) { CapState::Short } else { CapState::Present },
        Assembly { inductors_shorted: true, ..Assembly::default() },
    );
    let low_net = mna::assemble(
        lin,
        |i| if cap_set(lin, i) == Some(CapSet::High) { CapState::Open } else { CapState::Present },
        Assembly { inductors_shorted: true, ..Assembly::default() },
    );
    let qz_failed = || AnalysisError {
        message: "the QZ eigenvalue iteration did not converge".into(),
        help: "this is unusual; check for capacitances or resistances many decades apart".into(),
        place: None,
    };
    let poles = poles::poles(&full).ok_or_else(qz_failed)?;
    let zeros = poles::snap_origin(poles::zeros(&full).ok_or_else(qz_failed)?, &poles);
    let high_poles = poles::poles(&high_net).ok_or_else(qz_failed)?;
    let high_zeros =
        poles::snap_origin(poles::zeros(&high_net).ok_or_else(qz_failed)?, &high_poles);
    let low_poles = poles::poles(&low_net).ok_or_else(qz_failed)?;
    let low_zeros = poles::snap_origin(poles::zeros(&low_net).ok_or_else(qz_failed)?, &low_poles);

    // Mid-band frequency from the estimates.
    let settings = &design.analysis;
    let frequency_hz = midband_frequency(f_low_est, f_high_est, settings);

    // Exact response and cut-offs.
    let frequencies =
        response::grid(settings.sweep_start_hz, settings.sweep_stop_hz, settings.points_per_decade);
    let transfer = response::Transfer::new(&full);
    let sweep = response::sweep(&transfer, &frequencies);
    let has_inductors = lin.elements.iter().any(|e| matches!(e, Linear::Inductor { .. }));
    let (f_high, f_low) = exact_cutoffs(
        &transfer,
        gain,
        frequency_hz,
        settings,
        !high_caps.is_empty() || has_inductors,
        !low_caps.is_empty() || has_inductors,
        (f_low_est, f_high_est),
    );
    let peaking = peaking(&sweep, gain.abs());

    // Estimates.
    let second_order = time_constants::second_order_omega(octc.b1, octc.b2).map(|w| w / (2.0 * PI));
    let rss_high = {
        let s: f64 = high_poles.iter().map(|p| 1.0 / (p.norm() / (2.0 * PI)).powi(2)).sum::<f64>()
            - 2.0
                * high_zeros
                    .iter()
                    .filter(|z| z.norm() > 0.0)
                    .map(|z| 1.0 / (z.norm() / (2.0 * PI)).powi(2))
                    .sum::<f64>();
        (s > 0.0 && !high_poles.is_empty()).then(|| 1.0 / s.sqrt())
    };
    let rss_low = {
        let s: f64 = low_poles.iter().map(|p| (p.norm() / (2.0 * PI)).powi(2)).sum::<f64>()
            - 2.0 * low_zeros.iter().map(|z| (z.norm() / (2.0 * PI)).powi(2)).sum::<f64>();
        (s > 0.0 && !low_poles.is_empty()).then(|| s.sqrt())
    };
    let error = |est: Option<f64>, exact: Option<f64>| match (est, exact) {
        (Some(e), Some(x)) if x > 0.0 => Some((e - x) / x),
        _ => None,
    };
    let dominance_high =
        (high_poles.len() >= 2).then(|| high_poles[1].norm() / high_poles[0].norm());
    let dominance_low = (low_poles.len() >= 2).then(|| {
        let n = low_poles.len();
        low_poles[n - 1].norm() / low_poles[n - 2].norm()
    });

    Ok(Analysis {
        operating_point: None,
        capacitors,
        midband: Midband {
            frequency_hz,
            gain,
            gain_db: (gain != 0.0).then(|| 20.0 * gain.abs().log10()),
            input_resistance_ohm: input_resistance,
            output_resistance_ohm: output_resistance,
        },
        high: High {
            f3db_hz: f_high,
            b1_s: (!high_caps.is_empty()).then_some(octc.b1),
            b2_s2: (!high_caps.is_empty()).then_some(octc.b2),
            dominance_ratio: dominance_high,
            octc: Octc {
                caps: octc.caps,
                sum_tau_s: (!high_caps.is_empty()).then_some(octc.b1),
                f_estimate_hz: f_high_est,
            },
            second_order_f_estimate_hz: second_order,
            rss_f_estimate_hz: rss_high,
            estimate_errors: EstimateErrors {
                time_constant: error(f_high_est, f_high),
                second_order: error(second_order, f_high),
                root_sum_square: error(rss_high, f_high),
            },
            peaking,
            poles_hz: hz(&high_poles),
            zeros_hz: hz(&high_zeros),
        },
        low: Low {
            f3db_hz: f_low,
            sctc: Sctc { caps: sctc_caps, f_estimate_hz: f_low_est },
            dominance_ratio: dominance_low,
            rss_f_estimate_hz: rss_low,
            estimate_errors: EstimateErrors {
                time_constant: error(f_low_est, f_low),
                second_order: None,
                root_sum_square: error(rss_low, f_low),
            },
            poles_hz: hz(&low_poles),
            zeros_hz: hz(&low_zeros),
        },
        poles: hz(&poles),
        zeros: hz(&zeros),
        sweep,
        has_inductors,
    })
}

/// The exact −3 dB points: searched outward from mid-band (or, when |H| is already below
/// the level there, from the sweep's highest point) and refined by Brent's method.
fn exact_cutoffs(
    transfer: &response::Transfer,
    gain: f64,
    frequency_hz: f64,
    settings: &crate::design::AnalysisSettings,
    has_high: bool,
    has_low: bool,
    estimates: (Option<f64>, Option<f64>),
) -> (Option<f64>, Option<f64>) {
    let level = gain.abs() / std::f64::consts::SQRT_2;
    let start = match transfer.at(frequency_hz) {
        Some(h) if h.norm() >= level => frequency_hz,
        _ => response::grid(
            settings.sweep_start_hz,
            settings.sweep_stop_hz,
            settings.points_per_decade,
        )
        .into_iter()
        .filter_map(|f| transfer.at(f).map(|h| (f, h.norm())))
        .max_by(|a, b| a.1.total_cmp(&b.1))
        .map_or(frequency_hz, |p| p.0),
    };
    let per_decade = settings.points_per_decade.max(20);
    let f_high = has_high
        .then(|| {
            response::crossing(
                transfer,
                start,
                level,
                true,
                per_decade,
                settings.sweep_stop_hz * 1e3,
                estimates.1,
            )
        })
        .flatten();
    let f_low = has_low
        .then(|| {
            response::crossing(
                transfer,
                start,
                level,
                false,
                per_decade,
                settings.sweep_start_hz / 1e3,
                estimates.0,
            )
        })
        .flatten();
    (f_high, f_low)
}

/// The figures tolerance analysis follows, from one evaluation of a design.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Metrics {
    /// |mid-band gain|, V/V.
    pub gain: f64,
    /// Exact upper −3 dB frequency, Hz.
    pub f_high: Option<f64>,
    /// Exact lower −3 dB frequency, Hz.
    pub f_low: Option<f64>,
    /// Input resistance, Ω.
    pub r_in: Option<f64>,
    /// Output resistance, Ω.
    pub r_out: Option<f64>,
    /// |I_C| or |I_D| of each transistor, A.
    pub bias: Vec<f64>,
}

/// A lean evaluation for tolerance work: operating point, mid-band, time-constant
/// estimates and the exact cut-offs — the same numbers [`analyze`] gives, without the
/// sweep and the eigenvalues.
pub fn metrics(design: &Design) -> Result<Metrics, AnalysisError> {
    faer::set_global_parallelism(faer::Par::Seq);
    let net = Netlist::from_design(design);
    let op = if net.has_devices() {
        Some(operating_point::solve(&net).map_err(|e| AnalysisError {
            message: e.message,
            help: "the bias does not settle at these values".into(),
            place: None,
        })?)
    } else {
        None
    };
    let bias = op
        .as_ref()
        .map(|o| {
            o.devices
                .iter()
                .map(|d| match &d.state {
                    crate::circuit::operating_point::DeviceState::Bjt { ic_a, .. } => ic_a.abs(),
                    crate::circuit::operating_point::DeviceState::Mosfet { id_a, .. } => id_a.abs(),
                })
                .collect()
        })
        .unwrap_or_default();
    let (lin, _) = small_signal::linearize(&net, op.as_ref());
    let state_mid = |i| match cap_set(&lin, i) {
        Some(CapSet::Low) => CapState::Short,
        Some(CapSet::High) => CapState::Open,
        None => CapState::Present,
    };
    let mid = mna::assemble(&lin, state_mid, Assembly::default());
    let g = Factor::new(&mid.g).map_err(|s| singular(&lin, &mid, s.unknown, "mid-band"))?;
    let x = g.solve(&mid.b);
    let gain: f64 = x.iter().zip(&mid.out).map(|(a, b)| a * b).sum();
    let (r_in, r_out) = port_resistances(&lin, &x, state_mid);
    let (high_caps, low_caps) = cap_refs(&lin, &mid);
    let octc = time_constants::open_circuit(&mid, &g, &high_caps);
    let (_, inverse_tau_sum) = time_constants::short_circuit(&mid, &g, &low_caps);
    let f_high_est = (octc.b1 > 0.0).then(|| 1.0 / (2.0 * PI * octc.b1));
    let f_low_est = (inverse_tau_sum > 0.0).then(|| inverse_tau_sum / (2.0 * PI));
    let settings = &design.analysis;
    let frequency_hz = midband_frequency(f_low_est, f_high_est, settings);
    let full = mna::assemble(&lin, |_| CapState::Present, Assembly::default());
    let transfer = response::Transfer::new(&full);
    let has_inductors = lin.elements.iter().any(|e| matches!(e, Linear::Inductor { .. }));
    let (f_high, f_low) = exact_cutoffs(
        &transfer,
        gain,
        frequency_hz,
        settings,
        !high_caps.is_empty() || has_inductors,
        !low_caps.is_empty() || has_inductors,
        (f_low_est, f_high_est),
    );
    Ok(Metrics { gain: gain.abs(), f_high, f_low, r_in, r_out, bias })
}

/// R_in (source resistance excluded) and R_out (load excluded) of the mid-band network,
/// given its solution `x` for a unit source EMF.
fn port_resistances(
    lin: &LinearNetwork,
    x: &[f64],
    state_mid: impl Fn(usize) -> CapState,
) -> (Option<f64>, Option<f64>) {
    let v = |node: usize| Mna::row(node).map_or(0.0, |r| x[r]);
    let (sp, rs) = lin.source_terminal;
    let (emf, ret) = lin.source;
    let i_in = (v(emf) - v(sp)) / rs;
    let v_in = v(sp) - v(ret);
    let input = (i_in.abs() > 0.0).then(|| v_in / i_in).filter(|r| r.is_finite());
    let unloaded =
        mna::assemble(lin, state_mid, Assembly { without_load: true, ..Assembly::default() });
    let output = Factor::new(&unloaded.g).ok().and_then(|f| {
        let mut inject = vec![0.0; unloaded.size()];
        let (op, on) = lin.output;
        if let Some(r) = Mna::row(op) {
            inject[r] += 1.0;
        }
        if let Some(r) = Mna::row(on) {
            inject[r] -= 1.0;
        }
        let y = f.solve(&inject);
        let r: f64 = y.iter().zip(&unloaded.out).map(|(a, b)| a * b).sum();
        r.is_finite().then_some(r)
    });
    (input, output)
}

/// The high and low capacitors as time-constant references. Low capacitors in parallel
/// (supplies taken as ground) act as one; one across a supply does nothing and is left out.
fn cap_refs(lin: &LinearNetwork, mid: &Mna) -> (Vec<CapRef>, Vec<CapRef>) {
    let mut high_caps = Vec::new();
    let mut low_caps: Vec<CapRef> = Vec::new();
    let mut low_keys: Vec<(usize, usize)> = Vec::new();
    let mut rails = mna::Wires::new(lin.nodes.len());
    for el in &lin.elements {
        if let Linear::Grounded { node } = el {
            rails.join(*node, 0);
        }
    }
    for (i, el) in lin.elements.iter().enumerate() {
        if let Linear::Capacitor { name, a, b, c, set, .. } = el {
            let r = CapRef { name: name.clone(), c: *c, a: *a, b: *b, branch: mid.branch[i] };
            match set {
                CapSet::High => high_caps.push(r),
                CapSet::Low => {
                    let (ka, kb) = (rails.find(*a), rails.find(*b));
                    let key = (ka.min(kb), ka.max(kb));
                    if ka == kb {
                        continue;
                    }
                    if let Some(k) = low_keys.iter().position(|x| *x == key) {
                        let group = &mut low_caps[k];
                        group.name = format!("{} ∥ {}", group.name, r.name);
                        group.c += r.c;
                        group.branch = group.branch.or(r.branch);
                    } else {
                        low_keys.push(key);
                        low_caps.push(r);
                    }
                }
            }
        }
    }
    (high_caps, low_caps.into_iter().filter(|c| c.branch.is_some()).collect())
}

fn midband_frequency(
    low: Option<f64>,
    high: Option<f64>,
    settings: &crate::design::AnalysisSettings,
) -> f64 {
    match (low, high) {
        (Some(l), Some(h)) => (l * h).sqrt(),
        (None, Some(h)) => h / 100.0,
        (Some(l), None) => l * 100.0,
        (None, None) => (settings.sweep_start_hz * settings.sweep_stop_hz).sqrt(),
    }
}

/// Peaking: |H| above |H_mid| by more than 0.01 dB anywhere on the sweep.
fn peaking(sweep: &[SweepPoint], mid: f64) -> Option<Peaking> {
    if mid <= 0.0 {
        return None;
    }
    let mid_db = 20.0 * mid.log10();
    let top = sweep.iter().max_by(|a, b| a.magnitude_db.total_cmp(&b.magnitude_db))?;
    let level = mid_db - 20.0 * std::f64::consts::SQRT_2.log10();
    let crossings = sweep
        .windows(2)
        .filter(|w| (w[0].magnitude_db - level).signum() != (w[1].magnitude_db - level).signum())
        .count();
    (top.magnitude_db - mid_db > 0.01).then_some(Peaking {
        peak_db: top.magnitude_db - mid_db,
        at_hz: top.frequency_hz,
        crossings,
    })
}
