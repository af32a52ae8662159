//! The evaluation core: one design in, its figures out, computed one way for every caller —
//! the nominal review, each sensitivity step, each worst-case corner and each Monte Carlo run.
//!
//! In: a validated [`Design`]. Out: [`Metrics`] (the lean figures tolerance work follows) or
//! the whole [`Analysis`], both from the same [`Core`], so the two can never disagree; or one
//! [`AnalysisError`] per failure, with one message. Computes only what is asked for: the
//! figures stop after the exact cut-offs, the full analysis goes on to the poles and zeros of
//! three networks, the sweep and the remaining estimates. No I/O, no formatting, no global
//! settings: faer is built without its thread pool (Cargo.toml), so every factorisation runs
//! on the calling thread and the same design gives the same bits on any machine.

use std::f64::consts::PI;

use crate::analysis::adjoint::{self, Gradients};
use crate::analysis::large_signal;
use crate::analysis::linear::Factor;
use crate::analysis::mna::{self, Assembly, CapState, Mna};
use crate::analysis::noise;
use crate::analysis::poles::{self, Root, Window};
use crate::analysis::response::{self, BandResponse, SweepPoint, Transfer};
use crate::analysis::time_constants::{self, CapRef, ShortCircuitCap};
use crate::analysis::{
    Analysis, AnalysisError, BandReport, CapacitorClass, DeviceReport, EstimateErrors, High, Low,
    Metrics, Midband, Octc, OperatingPointReport, Peaking, RootHz, RootWindow, Sctc, SupplyReport,
};
use crate::circuit::netlist::{CapSet, Netlist};
use crate::circuit::operating_point::{self, DeviceState, OperatingPoint};
use crate::circuit::small_signal::{self, Linear, LinearNetwork, SmallSignal};
use crate::design::{AnalysisSettings, Band, Design};
use crate::union_find::UnionFind;

/// Everything both depths of evaluation share: the bias, the mid-band network and its
/// solution, both time-constant sums and the exact cut-offs.
struct Core {
    net: Netlist,
    op: Option<OperatingPoint>,
    small: Vec<SmallSignal>,
    lin: LinearNetwork,
    gain: f64,
    input_resistance: Option<f64>,
    output_resistance: Option<f64>,
    /// The mid-band network and its factorisation, kept for the full analysis's time
    /// constants.
    mid: Mna,
    g: Factor,
    high_caps: Vec<CapRef>,
    /// Σ R_i0 C_i of the high capacitors, s.
    b1: f64,
    sctc_caps: Vec<ShortCircuitCap>,
    f_high_est: Option<f64>,
    f_low_est: Option<f64>,
    frequency_hz: f64,
    full: Mna,
    transfer: Transfer,
    has_inductors: bool,
    f_high: Option<f64>,
    f_low: Option<f64>,
    /// |H| across the design's operating band, when it states one.
    band: Option<(Band, BandResponse)>,
    /// The noise figures a requirement may limit, computed where one does.
    noise: noise::Figures,
    /// Whether the noise figure, the input density, the output noise and the
    /// signal-to-noise ratio are limited.
    noise_limits: [bool; 4],
    /// The signal's peak amplitude at the source EMF, V, when the design states one.
    amplitude_v: Option<f64>,
    /// Each transistor's flicker corner, Hz (0: none), in the operating point's order.
    corners: Vec<f64>,
    /// The largest supply current, when a requirement limits it.
    supply_current: Option<f64>,
    /// Each rated part against its rating.
    stress: Vec<crate::analysis::stress::StressReport>,
    /// The signal-handling figures a requirement limits, computed where one does.
    large: large_signal::Figures,
    /// The design's frequency of interest, Hz.
    signal_frequency: Option<f64>,
    /// The band the ports' match and the group delay are judged over.
    review_band: Option<(f64, f64)>,
    /// The return losses and μ a requirement limits, computed where one does.
    ports: crate::analysis::ports::Figures,
    /// The step response and group delay, computed here only where a requirement limits
    /// them (the full analysis computes them from its own roots).
    time: TimeDomain,
}

/// The stage in time, from exact roots.
#[derive(Default)]
struct TimeDomain {
    step: Option<crate::analysis::step::StepReport>,
    group_delay: Option<crate::analysis::step::GroupDelayReport>,
}

impl TimeDomain {
    /// The step from the whole network's roots when nothing couples the signal through a
    /// capacitor (a low-pass stage: H(0) is the mid-band gain), else from the high-frequency
    /// network's (coupling capacitors shorted), whose rise is the stage's and whose final
    /// value is the mid-band gain; the group delay from the whole network's across `band`.
    fn of(
        whole: (&[Root], &[Root]),
        high: Option<(&[Root], &[Root])>,
        gain: f64,
        f_high: Option<f64>,
        band: Option<(f64, f64)>,
        settling_band: f64,
    ) -> TimeDomain {
        let (poles, zeros) = high.unwrap_or(whole);
        TimeDomain {
            step: (gain != 0.0)
                .then(|| crate::analysis::step::step(poles, zeros, settling_band, f_high))
                .flatten(),
            group_delay: band.and_then(|(lo, hi)| {
                crate::analysis::step::group_delay_over(whole.0, whole.1, lo, hi)
            }),
        }
    }
}

/// The band a stage's match and group delay are judged over: the stated operating band,
/// else between the exact cut-offs (from the sweep's start for a stage coupled down to DC).
fn review_band(
    band: Option<Band>,
    f_low: Option<f64>,
    f_high: Option<f64>,
    settings: &AnalysisSettings,
) -> Option<(f64, f64)> {
    band.map(|b| (b.from_hz, b.to_hz))
        .or(f_high.map(|hi| (f_low.unwrap_or(settings.sweep_start_hz), hi)))
        .filter(|(lo, hi)| hi > lo)
}

/// Each transistor's flicker-noise corner frequency from its model, Hz (0 where the model
/// states none), in the order of the operating point's devices.
fn flicker_corners(design: &Design, op: Option<&OperatingPoint>) -> Vec<f64> {
    use crate::design::{DeviceModel, PartKind};
    let Some(op) = op else { return Vec::new() };
    op.devices
        .iter()
        .map(|d| {
            let model = design.parts.iter().find(|p| p.name == d.part).and_then(|p| match p.kind {
                PartKind::Bjt { model, .. } | PartKind::Mosfet { model, .. } => {
                    design.models.get(model)
                }
                _ => None,
            });
            let corner = model.and_then(|m| match &m.device {
                DeviceModel::Bipolar(b) => b.flicker_corner_hz,
                DeviceModel::Mos(m) => m.flicker_corner_hz,
            });
            corner.unwrap_or(0.0)
        })
        .collect()
}

/// The lean evaluation tolerance work repeats: operating point, mid-band, the time-constant
/// estimates and the exact cut-offs — the same numbers [`analyze`] gives, without the sweep
/// and the eigenvalues.
pub fn metrics(design: &Design) -> Result<Metrics, AnalysisError> {
    Ok(core(design, None)?.metrics())
}

/// [`metrics`] of a design close to one whose operating point `near` is solved (a tolerance
/// sample of it): Newton starts there, and falls back to a start from zero. The same root
/// to the Newton tolerance, in fewer iterations.
pub fn metrics_near(
    design: &Design,
    near: Option<&OperatingPoint>,
) -> Result<Metrics, AnalysisError> {
    Ok(core(design, near)?.metrics())
}

/// The operating point of a design, None without transistors or when it does not converge.
pub(crate) fn operating_point(design: &Design) -> Option<OperatingPoint> {
    let net = Netlist::from_design(design);
    net.has_devices().then(|| operating_point::solve(&net).ok()).flatten()
}

/// Each transistor's bias current (A, its magnitude), from the operating point alone —
/// Newton started from `near`, the nominal design's — what a bias current's worst-case
/// corner needs, without the frequency analysis. None when the bias does not converge.
pub(crate) fn bias_currents(design: &Design, near: Option<&OperatingPoint>) -> Option<Vec<f64>> {
    let net = Netlist::from_design(design);
    if !net.has_devices() {
        return Some(Vec::new());
    }
    let op = match near {
        Some(near) => operating_point::solve_near(&net, near),
        None => operating_point::solve(&net),
    }
    .ok()?;
    Some(op.devices.iter().map(|d| bias_current(&d.state)).collect())
}

/// The whole analysis of a design at its nominal values.
pub fn analyze(design: &Design) -> Result<Analysis, AnalysisError> {
    core(design, None)?.complete(&design.analysis)
}

/// A nominal evaluation with what the sensitivities are built from.
pub(crate) struct Differentiated {
    /// The figures.
    pub metrics: Metrics,
    /// The netlist and its operating point (None without transistors).
    pub net: Netlist,
    pub op: Option<OperatingPoint>,
    /// The small-signal network.
    pub lin: LinearNetwork,
    /// Each figure's gradient over the network's elements.
    pub gradients: Gradients,
}

/// The figures with their gradients over every element of the linear network (by the
/// adjoint method, `adjoint.rs`), that network, and the netlist and operating point it
/// came from: what the sensitivities are built from.
pub(crate) fn metrics_with_gradients(design: &Design) -> Result<Differentiated, AnalysisError> {
    let core = core(design, None)?;
    let states: Vec<CapState> =
        (0..core.lin.elements.len()).map(|i| mid_state(&core.lin, i)).collect();
    let gradients = adjoint::gradients(&adjoint::Inputs {
        lin: &core.lin,
        mid_states: &states,
        band: core.band,
        f_high: core.f_high,
        f_low: core.f_low,
        has_r_in: core.input_resistance.is_some(),
        has_r_out: core.output_resistance.is_some(),
    });
    let metrics = core.metrics();
    Ok(Differentiated { metrics, net: core.net, op: core.op, lin: core.lin, gradients })
}

/// The netlist, its operating point, and the small-signal network at that point.
fn bias_and_network(
    design: &Design,
    near: Option<&OperatingPoint>,
) -> Result<(Netlist, Option<OperatingPoint>, LinearNetwork, Vec<SmallSignal>), AnalysisError> {
    let net = Netlist::from_design(design);
    let op = if net.has_devices() {
        let solved = match near {
            Some(near) => operating_point::solve_near(&net, near),
            None => operating_point::solve(&net),
        };
        Some(solved.map_err(|e| AnalysisError {
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
    Ok((net, op, lin, small))
}

/// What capacitor `i` is in the mid-band network: low ones shorted, high ones open.
fn mid_state(lin: &LinearNetwork, i: usize) -> CapState {
    match cap_set(lin, i) {
        Some(CapSet::Low) => CapState::Short,
        Some(CapSet::High) => CapState::Open,
        None => CapState::Present,
    }
}

/// The shared part of every evaluation.
fn core(design: &Design, near: Option<&OperatingPoint>) -> Result<Core, AnalysisError> {
    let (net, op, lin, small) = bias_and_network(design, near)?;
    let state_mid = |i| mid_state(&lin, i);
    let mid = mna::assemble(&lin, state_mid, Assembly::default());
    let g = Factor::new(&mid.g).map_err(|s| singular(&lin, &mid, s.unknown, "mid-band"))?;
    let x = g.solve(&mid.b);
    let gain: f64 = x.iter().zip(&mid.out).map(|(a, b)| a * b).sum();
    let (input_resistance, output_resistance) = port_resistances(&lin, &x, state_mid);
    let (high_caps, low_caps) = cap_refs(&lin, &mid);
    let b1 = time_constants::open_circuit_sum(&mid, &g, &high_caps);
    let (sctc_caps, inverse_tau_sum) = time_constants::short_circuit(&mid, &g, &low_caps);
    let f_high_est = (b1 > 0.0).then(|| 1.0 / (2.0 * PI * b1));
    let f_low_est = (inverse_tau_sum > 0.0).then(|| inverse_tau_sum / (2.0 * PI));
    let settings = &design.analysis;
    let frequency_hz = midband_frequency(f_low_est, f_high_est, settings);
    let full = mna::assemble(&lin, |_| CapState::Present, Assembly::default());
    let transfer = Transfer::new(&full);
    let has_inductors = lin.elements.iter().any(|e| matches!(e, Linear::Inductor { .. }));
    let sides = (!high_caps.is_empty() || has_inductors, !low_caps.is_empty() || has_inductors);
    let (f_high, f_low) =
        exact_cutoffs(&transfer, gain, frequency_hz, settings, sides, (f_low_est, f_high_est));
    let band =
        design.signal.band.and_then(|b| response::band_response(&transfer, b).map(|r| (b, r)));
    let req = &design.requirements;
    let wanted = noise::Wanted {
        spot: req.noise_figure.is_some() || req.input_noise_density.is_some(),
        band: req.output_noise.is_some(),
        snr: req.snr.is_some(),
    };
    let (spot_hz, noise_band) = noise_where(band.map(|(b, _)| b), frequency_hz, f_low, f_high);
    let corners = flicker_corners(design, op.as_ref());
    let stress = op
        .as_ref()
        .map(|op| {
            crate::analysis::stress::of(design, |name| {
                net.nodes.iter().position(|n| n == name).map(|i| op.node_voltages[i])
            })
        })
        .unwrap_or_default();
    // Supply currents come from the operating point alone; a design without transistors has
    // its node voltages from the mid-band solve's DC twin only through the bias, so it reports
    // none (its supplies feed resistors at fixed voltages).
    let supply_current = req
        .supply_current
        .and(op.as_ref())
        .map(|op| operating_point::supply_currents(&net, op))
        .and_then(|c| crate::analysis::largest_supply_current(c.into_iter()));
    let large = match op.as_ref() {
        Some(op) => large_signal::figures(
            &large_signal::Request {
                net: &net,
                op,
                gain,
                amplitude_v: design.signal.amplitude_v,
                frequency_hz,
                cutoffs: (f_low, f_high),
                input_noise_rms_v: None,
            },
            large_signal::Wanted {
                swing: req.output_swing.is_some(),
                distortion: req.thd.is_some(),
                compression: req.input_compression.is_some(),
            },
        ),
        None => large_signal::Figures::default(),
    };
    let noise = noise::figures(
        &noise::Request {
            lin: &lin,
            op: op.as_ref(),
            mna: &full,
            kelvin: net.temperature_k,
            corners: &corners,
            amplitude_v: design.signal.amplitude_v,
            spot_hz,
            band: noise_band,
            frequencies: &[],
        },
        wanted,
    );
    let settings = &design.analysis;
    let review_band = review_band(band.map(|(b, _)| b), f_low, f_high, settings);
    let ports = crate::analysis::ports::figures(
        &lin,
        settings.reference_impedance_ohm,
        &if req.stability.is_some() {
            response::grid(
                settings.sweep_start_hz,
                settings.sweep_stop_hz,
                settings.points_per_decade,
            )
        } else {
            Vec::new()
        },
        review_band,
        crate::analysis::ports::Wanted {
            return_loss: req.input_return_loss.is_some() || req.output_return_loss.is_some(),
            stability: req.stability.is_some(),
        },
    );
    let wants_time =
        req.rise_time.is_some() || req.overshoot.is_some() || req.group_delay_variation.is_some();
    let time = if wants_time && poles::finds_all(&full.c) {
        let window = root_window(f_low, f_high, settings);
        let whole = poles_and_zeros(&full, window)?;
        let high = if sctc_caps.is_empty() {
            None
        } else {
            Some(poles_and_zeros(&high_network(&lin), window)?)
        };
        TimeDomain::of(
            (&whole.0, &whole.1),
            high.as_ref().map(|(p, z)| (p.as_slice(), z.as_slice())),
            gain,
            f_high,
            review_band,
            settings.settling_band,
        )
    } else {
        TimeDomain::default()
    };
    Ok(Core {
        net,
        op,
        small,
        lin,
        gain,
        input_resistance,
        output_resistance,
        mid,
        g,
        high_caps,
        b1,
        sctc_caps,
        f_high_est,
        f_low_est,
        frequency_hz,
        full,
        transfer,
        has_inductors,
        f_high,
        f_low,
        band,
        noise,
        noise_limits: [
            req.noise_figure.is_some(),
            req.input_noise_density.is_some(),
            req.output_noise.is_some(),
            req.snr.is_some(),
        ],
        corners,
        amplitude_v: design.signal.amplitude_v,
        supply_current,
        stress,
        large,
        signal_frequency: design.signal.frequency_hz,
        review_band,
        ports,
        time,
    })
}

/// Where noise is reviewed: the spot frequency (the stated band's centre, else mid-band)
/// and the band it is integrated over (the stated band, else between the exact cut-offs).
fn noise_where(
    band: Option<Band>,
    midband_hz: f64,
    f_low: Option<f64>,
    f_high: Option<f64>,
) -> (f64, Option<(f64, f64, noise::BandBasis)>) {
    let spot = band.map_or(midband_hz, |b| b.centre_hz());
    let integrated = match (band, f_low, f_high) {
        (Some(b), _, _) => Some((b.from_hz, b.to_hz, noise::BandBasis::Stated)),
        (None, Some(lo), Some(hi)) if hi > lo => Some((lo, hi, noise::BandBasis::Cutoffs)),
        _ => None,
    };
    (spot, integrated)
}

impl Core {
    fn metrics(&self) -> Metrics {
        let bias = self
            .op
            .as_ref()
            .map(|o| o.devices.iter().map(|d| bias_current(&d.state)).collect())
            .unwrap_or_default();
        Metrics {
            gain: self.band.map_or(self.gain.abs(), |(_, r)| r.centre),
            flatness_db: self.band.map(|(_, r)| r.flatness_db()),
            f_high: self.f_high,
            f_low: self.f_low,
            r_in: self.input_resistance,
            r_out: self.output_resistance,
            bias,
            noise_figure_db: self.noise.noise_figure_db.filter(|_| self.noise_limits[0]),
            input_noise: self.noise.input_density.filter(|_| self.noise_limits[1]),
            output_noise: self.noise.output_rms.filter(|_| self.noise_limits[2]),
            snr_db: self.noise.snr_db.filter(|_| self.noise_limits[3]),
            supply_current: self.supply_current,
            output_swing: self.large.output_swing_v,
            thd_percent: self.large.thd_percent,
            input_compression: self.large.compression_v,
            input_return_loss_db: self.ports.input_return_loss_db,
            output_return_loss_db: self.ports.output_return_loss_db,
            mu_min: self.ports.mu_min,
            rise_time_s: self.time.step.as_ref().map(|s| s.rise_time_s),
            overshoot_percent: self.time.step.as_ref().map(|s| 100.0 * s.overshoot),
            group_delay_variation_s: self.time.group_delay.as_ref().map(|g| g.variation_s()),
        }
    }

    /// The full analysis: the core's figures with the poles and zeros of the whole, the
    /// high-frequency and the low-frequency networks, the sweep, the second-order and
    /// root-sum-square estimates, their errors and any peaking.
    fn complete(self, settings: &AnalysisSettings) -> Result<Analysis, AnalysisError> {
        let window = root_window(self.f_low, self.f_high, settings);
        let roots = Roots::of(&self.lin, &self.full, window)?;
        let root_window = (!poles::finds_all(&self.full.c)).then(|| RootWindow {
            from_hz: window.from_hz,
            to_hz: window.to_hz,
            dynamic_unknowns: crate::analysis::schur::dynamic_unknowns(&self.full.c).len(),
            qz_up_to: poles::QZ_UP_TO,
        });
        let frequencies = response::grid(
            settings.sweep_start_hz,
            settings.sweep_stop_hz,
            settings.points_per_decade,
        );
        let has_high = !self.high_caps.is_empty();
        let octc = time_constants::open_circuit(&self.mid, &self.g, &self.high_caps);
        let b1 = octc.b1;
        debug_assert_eq!(b1.to_bits(), self.b1.to_bits(), "the lean and the full b1 agree");
        let second_order = time_constants::second_order_omega(b1, octc.b2).map(|w| w / (2.0 * PI));
        let (rss_high, rss_low) = (roots.rss_high(), roots.rss_low());
        let (f_high, f_low) = (self.f_high, self.f_low);
        let capacitors = capacitor_classes(&self.lin);
        let operating_point = self.operating_point_report();
        // With a stated band, mid-band is its centre; otherwise between the estimates.
        let (frequency_hz, noise_band) =
            noise_where(self.band.map(|(b, _)| b), self.frequency_hz, f_low, f_high);
        let noise = noise::review(&noise::Request {
            lin: &self.lin,
            op: self.op.as_ref(),
            mna: &self.full,
            kelvin: self.net.temperature_k,
            corners: &self.corners,
            amplitude_v: self.amplitude_v,
            spot_hz: frequency_hz,
            band: noise_band,
            frequencies: &frequencies,
        });
        // A large network's response comes from the noise sweep's own solves (one
        // factorisation per frequency gives H and every source's transfer); a small one's
        // from its reduced form, which is cheaper than the noise solve.
        let sweep = match &noise {
            Some(n) if self.transfer.is_sparse() && n.responses.len() == frequencies.len() => {
                response::points(n.responses.iter().copied())
            }
            _ => response::sweep(&self.transfer, &frequencies),
        };
        let peaking = peaking(&sweep, self.gain.abs());
        let large_signal = self.op.as_ref().and_then(|op| {
            large_signal::review(&large_signal::Request {
                net: &self.net,
                op,
                gain: self.gain,
                amplitude_v: self.amplitude_v,
                frequency_hz: self.signal_frequency.unwrap_or(frequency_hz),
                cutoffs: (f_low, f_high),
                input_noise_rms_v: noise
                    .as_ref()
                    .and_then(|n| n.band.as_ref())
                    .map(|b| b.input_rms_v),
            })
        });
        // The step and the group delay, only with every root found.
        let time = if root_window.is_none() {
            TimeDomain::of(
                (&roots.poles, &roots.zeros),
                (!self.sctc_caps.is_empty())
                    .then_some((roots.high_poles.as_slice(), roots.high_zeros.as_slice())),
                self.gain,
                f_high,
                self.review_band,
                settings.settling_band,
            )
        } else {
            TimeDomain::default()
        };
        let ports = crate::analysis::ports::review(
            &self.lin,
            settings.reference_impedance_ohm,
            &frequencies,
            frequency_hz,
            self.review_band,
        );
        Ok(Analysis {
            operating_point,
            capacitors,
            midband: Midband {
                frequency_hz,
                gain: self.gain,
                gain_db: (self.gain != 0.0).then(|| 20.0 * self.gain.abs().log10()),
                band: self.band.map(|(b, r)| band_report(b, &r)),
                exact_gain_db: self
                    .transfer
                    .at(frequency_hz)
                    .map(|h| h.norm())
                    .filter(|m| *m > 0.0)
                    .map(|m| 20.0 * m.log10()),
                input_resistance_ohm: self.input_resistance,
                output_resistance_ohm: self.output_resistance,
            },
            high: High {
                f3db_hz: f_high,
                b1_s: has_high.then_some(b1),
                b2_s2: has_high.then_some(octc.b2),
                dominance_ratio: (roots.high_poles.len() >= 2)
                    .then(|| roots.high_poles[1].norm() / roots.high_poles[0].norm()),
                octc: Octc {
                    caps: octc.caps,
                    sum_tau_s: has_high.then_some(b1),
                    f_estimate_hz: self.f_high_est,
                },
                second_order_f_estimate_hz: second_order,
                rss_f_estimate_hz: rss_high,
                estimate_errors: EstimateErrors {
                    time_constant: relative_error(self.f_high_est, f_high),
                    second_order: relative_error(second_order, f_high),
                    root_sum_square: relative_error(rss_high, f_high),
                },
                peaking,
                poles_hz: hz(&roots.high_poles),
                zeros_hz: hz(&roots.high_zeros),
            },
            low: Low {
                f3db_hz: f_low,
                sctc: Sctc { caps: self.sctc_caps, f_estimate_hz: self.f_low_est },
                dominance_ratio: roots.low_dominance(),
                rss_f_estimate_hz: rss_low,
                estimate_errors: EstimateErrors {
                    time_constant: relative_error(self.f_low_est, f_low),
                    second_order: None,
                    root_sum_square: relative_error(rss_low, f_low),
                },
                poles_hz: hz(&roots.low_poles),
                zeros_hz: hz(&roots.low_zeros),
            },
            poles: hz(&roots.poles),
            zeros: hz(&roots.zeros),
            root_window,
            sweep,
            has_inductors: self.has_inductors,
            noise,
            large_signal,
            ports,
            step: time.step,
            group_delay: time.group_delay,
        })
    }

    /// The bias as reported, node voltages by name (ground left out).
    fn operating_point_report(&self) -> Option<OperatingPointReport> {
        let op = self.op.as_ref()?;
        Some(OperatingPointReport {
            converged: op.converged,
            method: Some(op.method),
            iterations: op.iterations,
            kcl_residual_a: op.kcl_residual_a,
            thermal_voltage_v: op.thermal_voltage_v,
            nodes: self
                .net
                .nodes
                .iter()
                .cloned()
                .zip(op.node_voltages.iter().copied())
                .skip(1)
                .collect(),
            devices: op
                .devices
                .iter()
                .cloned()
                .zip(self.small.iter().cloned())
                .map(|(bias, small_signal)| DeviceReport { bias, small_signal })
                .collect(),
            supplies: operating_point::supply_currents(&self.net, op)
                .into_iter()
                .zip(&self.net.supplies)
                .map(|(current_a, &(node, voltage_v))| SupplyReport {
                    node: self.net.nodes[node].clone(),
                    voltage_v,
                    current_a,
                    power_w: voltage_v * current_a,
                })
                .collect(),
            stress: self.stress.clone(),
        })
    }
}

/// The band as reported: edges, centre and the extremes in dB.
fn band_report(band: Band, r: &BandResponse) -> BandReport {
    let db = |v: f64| 20.0 * v.log10();
    BandReport {
        from_hz: band.from_hz,
        to_hz: band.to_hz,
        centre_hz: band.centre_hz(),
        centre_gain: r.centre,
        centre_gain_db: db(r.centre),
        lowest_gain_db: db(r.lowest.1),
        lowest_at_hz: r.lowest.0,
        highest_gain_db: db(r.highest.1),
        highest_at_hz: r.highest.0,
        flatness_db: r.flatness_db(),
    }
}

/// |I_C| or |I_D|, A.
pub(crate) fn bias_current(state: &DeviceState) -> f64 {
    match state {
        DeviceState::Bjt { ic_a, .. } => ic_a.abs(),
        DeviceState::Mosfet { id_a, .. } => id_a.abs(),
    }
}

/// (estimate − exact)/exact, when both exist.
fn relative_error(estimate: Option<f64>, exact: Option<f64>) -> Option<f64> {
    match (estimate, exact) {
        (Some(e), Some(x)) if x > 0.0 => Some((e - x) / x),
        _ => None,
    }
}

/// Poles and zeros of the whole network, of the high-frequency network (low capacitors
/// shorted) and of the low-frequency network (high capacitors open); inductors are wires in
/// the two partial networks, as in the time constants.
struct Roots {
    poles: Vec<Root>,
    zeros: Vec<Root>,
    high_poles: Vec<Root>,
    high_zeros: Vec<Root>,
    low_poles: Vec<Root>,
    low_zeros: Vec<Root>,
}

impl Roots {
    fn of(lin: &LinearNetwork, full: &Mna, window: Window) -> Result<Roots, AnalysisError> {
        let partial = Assembly { inductors_shorted: true, ..Assembly::default() };
        let high_net = high_network(lin);
        let low_net = mna::assemble(
            lin,
            |i| {
                if cap_set(lin, i) == Some(CapSet::High) {
                    CapState::Open
                } else {
                    CapState::Present
                }
            },
            partial,
        );
        let (poles, zeros) = poles_and_zeros(full, window)?;
        let (high_poles, high_zeros) = poles_and_zeros(&high_net, window)?;
        let (low_poles, low_zeros) = poles_and_zeros(&low_net, window)?;
        Ok(Roots { poles, zeros, high_poles, high_zeros, low_poles, low_zeros })
    }

    /// 1/√(Σ 1/f_p² − 2 Σ 1/f_z²) of the high network, Hz.
    fn rss_high(&self) -> Option<f64> {
        let inverse_square = |r: &Root| 1.0 / (r.norm() / (2.0 * PI)).powi(2);
        let s: f64 = self.high_poles.iter().map(inverse_square).sum::<f64>()
            - 2.0
                * self
                    .high_zeros
                    .iter()
                    .filter(|z| z.norm() > 0.0)
                    .map(inverse_square)
                    .sum::<f64>();
        (s > 0.0 && !self.high_poles.is_empty()).then(|| 1.0 / s.sqrt())
    }

    /// √(Σ f_p² − 2 Σ f_z²) of the low network, Hz.
    fn rss_low(&self) -> Option<f64> {
        let square = |r: &Root| (r.norm() / (2.0 * PI)).powi(2);
        let s: f64 = self.low_poles.iter().map(square).sum::<f64>()
            - 2.0 * self.low_zeros.iter().map(square).sum::<f64>();
        (s > 0.0 && !self.low_poles.is_empty()).then(|| s.sqrt())
    }

    /// |p1/p2| of the low network's two highest poles.
    fn low_dominance(&self) -> Option<f64> {
        let n = self.low_poles.len();
        (n >= 2).then(|| self.low_poles[n - 1].norm() / self.low_poles[n - 2].norm())
    }
}

/// Where the poles and zeros of a network too large for QZ are looked for: two decades
/// beyond each cut-off (three below the upper one when there is no lower one, as a direct
/// coupled network's poles lie at and above it), the sweep's ends where a cut-off is missing.
fn root_window(f_low: Option<f64>, f_high: Option<f64>, settings: &AnalysisSettings) -> Window {
    let from_hz = match (f_low, f_high) {
        (Some(l), _) => l / 100.0,
        (None, Some(h)) => h / 1e3,
        (None, None) => settings.sweep_start_hz,
    };
    let to_hz = match (f_high, f_low) {
        (Some(h), _) => h * 100.0,
        (None, Some(l)) => (l * 1e3).max(settings.sweep_stop_hz),
        (None, None) => settings.sweep_stop_hz,
    };
    Window { from_hz, to_hz }
}

/// The high-frequency network: the low-set capacitors shorted, the inductors shorted.
fn high_network(lin: &LinearNetwork) -> Mna {
    mna::assemble(
        lin,
        |i| {
            if cap_set(lin, i) == Some(CapSet::Low) { CapState::Short } else { CapState::Present }
        },
        Assembly { inductors_shorted: true, ..Assembly::default() },
    )
}

/// The poles of `m` and its zeros from the source to the output (zeros within rounding of
/// the origin snapped onto it).
fn poles_and_zeros(m: &Mna, window: Window) -> Result<(Vec<Root>, Vec<Root>), AnalysisError> {
    let qz_failed = || AnalysisError {
        message: "the QZ eigenvalue iteration did not converge".into(),
        help: "this is unusual; check for capacitances or resistances many decades apart".into(),
        place: None,
    };
    let poles = poles::poles(m, window).ok_or_else(qz_failed)?;
    let zeros = poles::snap_origin(poles::zeros(m, window).ok_or_else(qz_failed)?, &poles);
    Ok((poles, zeros))
}

fn hz(roots: &[Root]) -> Vec<RootHz> {
    roots.iter().map(RootHz::from).collect()
}

fn cap_set(lin: &LinearNetwork, i: usize) -> Option<CapSet> {
    match &lin.elements[i] {
        Linear::Capacitor { set, .. } => Some(*set),
        _ => None,
    }
}

/// Every capacitor of the network with the set it joined and why.
fn capacitor_classes(lin: &LinearNetwork) -> Vec<CapacitorClass> {
    lin.elements
        .iter()
        .filter_map(|el| match el {
            Linear::Capacitor { name, c, set, reason, .. } => {
                Some(CapacitorClass { part: name.clone(), c_f: *c, set: *set, reason: *reason })
            }
            _ => None,
        })
        .collect()
}

fn singular(lin: &LinearNetwork, m: &Mna, unknown: Option<usize>, what: &str) -> AnalysisError {
    let node = unknown.filter(|u| *u < m.nodes).map(|u| lin.nodes[u + 1].clone());
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
    let touched = m.g.touches();
    (0..m.nodes).filter(|&r| !touched[r]).map(|r| lin.nodes[r + 1].clone()).collect()
}

/// The exact −3 dB points: searched outward from mid-band (or, when |H| is already below
/// the level there, from the sweep's highest point) and refined by Brent's method.
fn exact_cutoffs(
    transfer: &Transfer,
    gain: f64,
    frequency_hz: f64,
    settings: &AnalysisSettings,
    (has_high, has_low): (bool, bool),
    (low_estimate, high_estimate): (Option<f64>, Option<f64>),
) -> (Option<f64>, Option<f64>) {
    let level = gain.abs() / std::f64::consts::SQRT_2;
    let (start_hz, stop_hz) = (settings.sweep_start_hz, settings.sweep_stop_hz);
    let start = match transfer.at(frequency_hz) {
        Some(h) if h.norm() >= level => frequency_hz,
        _ => response::grid(start_hz, stop_hz, settings.points_per_decade)
            .into_iter()
            .filter_map(|f| transfer.at(f).map(|h| (f, h.norm())))
            .max_by(|a, b| a.1.total_cmp(&b.1))
            .map_or(frequency_hz, |p| p.0),
    };
    let per_decade = settings.points_per_decade.max(20);
    let search = |upward: bool, limit: f64, estimate: Option<f64>| {
        response::crossing(transfer, start, level, upward, per_decade, limit, estimate)
    };
    let f_high = has_high.then(|| search(true, stop_hz * 1e3, high_estimate)).flatten();
    let f_low = has_low.then(|| search(false, start_hz / 1e3, low_estimate)).flatten();
    (f_high, f_low)
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
        let y = f.solve(&unloaded.incidence(lin.output.0, lin.output.1));
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
    let mut rails = UnionFind::new(lin.nodes.len());
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

fn midband_frequency(low: Option<f64>, high: Option<f64>, settings: &AnalysisSettings) -> f64 {
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design;

    fn load(parts: &str, signal: &str, output: &str) -> Design {
        let text = format!(
            "tauweave: 1\ndesign: {{id: t, title: core test, revision: A, date: 2026-12-01}}\n\
             signal: {signal}\noutput: {output}\nparts:\n{parts}"
        );
        let loaded = design::load(&text);
        loaded.design.unwrap_or_else(|| panic!("{:?}", loaded.diagnostics))
    }

    fn close(a: f64, b: f64, tolerance: f64, what: &str) {
        assert!((a - b).abs() <= tolerance * b.abs(), "{what}: {a} vs {b}");
    }

    /// Source resistance R_s, a coupling capacitor C_c into a load R_L, and C_L across the
    /// load: two poles three decades apart and a divider in the band.
    fn band_pass() -> Design {
        load(
            "  CC: {kind: capacitor, value: 1 uF, between: [in, out], role: coupling}\n\
             \x20 RL: {kind: resistor, value: 9k, between: [out, gnd]}\n\
             \x20 CL: {kind: capacitor, value: 10 pF, between: [out, gnd], role: load}\n",
            "{at: in, resistance: 1k}",
            "{at: out}",
        )
    }

    #[test]
    fn a_divider_with_one_pole_each_side_matches_its_closed_forms() {
        // Common practice (first-order RC sections): mid-band gain R_L/(R_s + R_L); the
        // coupling capacitor sees R_s + R_L, so f_L,SC = 1/(2π(R_s + R_L)C_c); the load
        // capacitor sees R_s ∥ R_L, so f_H,OC = 1/(2π(R_s ∥ R_L)C_L).
        let a = analyze(&band_pass()).unwrap();
        let (rs, rl, cc, cl) = (1e3, 9e3, 1e-6, 10e-12);
        let pi2 = 2.0 * PI;
        close(a.midband.gain, rl / (rs + rl), 1e-6, "gain");
        close(a.low.sctc.f_estimate_hz.unwrap(), 1.0 / (pi2 * (rs + rl) * cc), 1e-12, "f_L est");
        let parallel = rs * rl / (rs + rl);
        close(a.high.octc.f_estimate_hz.unwrap(), 1.0 / (pi2 * parallel * cl), 1e-12, "f_H est");
        // With the poles 10⁶ apart the exact −3 dB points sit on the single-pole values to
        // about the square of their ratio (common practice: separated real poles).
        close(a.low.f3db_hz.unwrap(), 1.0 / (pi2 * (rs + rl) * cc), 1e-5, "f_L exact");
        close(a.high.f3db_hz.unwrap(), 1.0 / (pi2 * parallel * cl), 1e-5, "f_H exact");
        assert_eq!(a.poles.len(), 2);
        assert!(a.operating_point.is_none() && !a.has_inductors);
        // At the geometric mean of two poles 10⁶ apart the exact response sits on the
        // idealised gain to about 1/10⁶ of the level (|H| = A/√(1 + (f/f_H)²)/√(1 + (f_L/f)²)).
        let ideal_db = 20.0 * (rl / (rs + rl)).log10();
        assert!((a.midband.exact_gain_db.unwrap() - ideal_db).abs() < 1e-4, "{a:?}");
    }

    #[test]
    fn the_lean_figures_are_the_full_analysis_figures() {
        let d = band_pass();
        assert_eq!(metrics(&d).unwrap(), analyze(&d).unwrap().metrics(&d.requirements));
    }

    #[test]
    fn the_lean_port_and_time_figures_are_the_full_analysis_figures() {
        // The example with every port and time-domain requirement: the tolerance study's
        // lean evaluation must give the review's own numbers.
        let text = std::fs::read_to_string("designs/rx-preamp-ce.yaml").unwrap().replace(
            "requirements:\n",
            "requirements:\n  input_return_loss: {min: 1 dB}\n  output_return_loss: {min: 1 dB}\n  \
             stability: {min: 1}\n  rise_time: {max: 1 µs}\n  overshoot: {max: 5 %}\n  \
             group_delay_variation: {max: 1 µs}\n",
        );
        let d = crate::design::load(&text).design.expect("the example reads");
        let lean = metrics(&d).unwrap();
        assert_eq!(lean, analyze(&d).unwrap().metrics(&d.requirements));
        for v in [
            lean.input_return_loss_db,
            lean.output_return_loss_db,
            lean.mu_min,
            lean.rise_time_s,
            lean.overshoot_percent,
            lean.group_delay_variation_s,
        ] {
            assert!(v.is_some_and(f64::is_finite), "{lean:?}");
        }
    }

    #[test]
    fn a_singular_network_fails_with_one_message_at_either_depth() {
        // An ideal voltage amplifier sets `out` and a coupling capacitor, shorted at mid-band,
        // ties `out` to ground: the mid-band nodal matrix is singular. (Two amplifiers on one
        // node pair are refused before any analysis, as a loop of voltage-fixing parts.)
        let d = load(
            "  RL: {kind: resistor, value: 1k, between: [out, gnd]}\n\
             \x20 RI: {kind: resistor, value: 1k, between: [in, gnd]}\n\
             \x20 E1: {kind: voltage_amplifier, value: 2, between: [out, gnd], control: [in, gnd]}\n\
             \x20 CC: {kind: capacitor, value: 1 uF, between: [out, gnd], role: coupling}\n",
            "{at: in, resistance: 50}",
            "{at: out}",
        );
        let e = metrics(&d).unwrap_err();
        assert!(e.message.contains("singular") && e.message.contains("mid-band"), "{e}");
        assert_eq!(analyze(&d).unwrap_err(), e);
    }

    #[test]
    fn relative_errors_need_both_values_and_a_positive_exact() {
        assert_eq!(relative_error(Some(1.1), Some(1.0)), Some(0.10000000000000009));
        assert_eq!(relative_error(None, Some(1.0)), None);
        assert_eq!(relative_error(Some(1.0), None), None);
        assert_eq!(relative_error(Some(1.0), Some(0.0)), None);
    }

    #[test]
    fn the_midband_frequency_is_the_geometric_mean_of_the_estimates() {
        let d = band_pass();
        let s = &d.analysis;
        assert_eq!(midband_frequency(Some(100.0), Some(1e6), s), 1e4);
        assert_eq!(midband_frequency(None, Some(1e6), s), 1e4);
        assert_eq!(midband_frequency(Some(100.0), None, s), 1e4);
        close(
            midband_frequency(None, None, s),
            (s.sweep_start_hz * s.sweep_stop_hz).sqrt(),
            1e-15,
            "sweep centre",
        );
    }
}
