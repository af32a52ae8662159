//! The analysis stage: from a validated design to every number the review reports.
//!
//! In: a [`Design`]. Out: [`Analysis`] — the operating point, small-signal parameters,
//! the capacitor classification, mid-band gain and port resistances, the exact response
//! and cut-offs, poles and zeros, and the open- and short-circuit time constants with the
//! estimates they give. Or an [`AnalysisError`] that says what failed and what to check.
//! Never formats numbers for people and never touches files.

pub mod adjoint;
pub mod evaluate;
pub mod large_signal;
pub mod levers;
pub mod linear;
pub mod matrix;
pub mod mna;
pub mod noise;
pub mod part_changes;
pub mod pencil;
pub mod poles;
pub mod ports;
pub mod requirements;
pub mod response;
pub mod schur;
pub mod step;
pub mod stress;
pub mod time_constants;
pub mod tolerance;
pub mod what_if;

use std::collections::BTreeMap;
use std::f64::consts::PI;

use serde::Serialize;

use crate::circuit::netlist::{CapReason, CapSet};
use crate::circuit::operating_point::{DeviceBias, Method};
use crate::circuit::small_signal::SmallSignal;
use poles::Root;
use response::SweepPoint;
use time_constants::{OpenCircuitCap, ShortCircuitCap};

pub use evaluate::{analyze, metrics};

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

/// Where a long review is, for a progress display: the stage, and how far through it when
/// it counts (`total` 0 when it does not).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Progress {
    /// The stage.
    pub stage: Stage,
    /// Steps done.
    pub done: u64,
    /// Steps in all (0: not counted).
    pub total: u64,
}

/// A stage of a review.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Stage {
    /// The nominal analysis (bias, responses, poles and zeros).
    Analysis,
    /// One sensitivity per lever.
    Sensitivities,
    /// The tolerance corners.
    WorstCase,
    /// The Monte Carlo runs.
    MonteCarlo,
}

impl Stage {
    /// What a progress display calls it.
    pub fn name(self) -> &'static str {
        match self {
            Stage::Analysis => "analysis",
            Stage::Sensitivities => "sensitivities",
            Stage::WorstCase => "worst case",
            Stage::MonteCarlo => "Monte Carlo",
        }
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
    pub(crate) fn from(s: &Root) -> RootHz {
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
    /// What each supply delivers.
    pub supplies: Vec<SupplyReport>,
    /// Each rated resistor's dissipation and rated capacitor's DC voltage.
    pub stress: Vec<stress::StressReport>,
}

/// One supply at the operating point.
#[derive(Clone, Debug, Serialize)]
pub struct SupplyReport {
    /// Its rail's node.
    pub node: String,
    /// V.
    pub voltage_v: f64,
    /// The current it delivers into the circuit, A (negative where it sinks current).
    pub current_a: f64,
    /// V·I, W (negative where it absorbs power).
    pub power_w: f64,
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
    /// The frequency taken as mid-band: the centre of the design's operating band when it
    /// states one, else √(f_L,est · f_H,est), Hz.
    pub frequency_hz: f64,
    /// Signed voltage gain from the source EMF to the output, idealised: coupling and bypass
    /// capacitors shorted, device and other high-frequency capacitors open.
    pub gain: f64,
    /// 20·log10|gain|.
    pub gain_db: Option<f64>,
    /// The exact gain across the operating band, when the design states one.
    pub band: Option<BandReport>,
    /// 20·log10|H(j2πf)| of the exact response at `frequency_hz`, every capacitor present:
    /// what the stage really gives there, beside the idealised `gain`.
    pub exact_gain_db: Option<f64>,
    /// Looking into the input, source resistance excluded, Ω.
    pub input_resistance_ohm: Option<f64>,
    /// Looking into the output with the source at rest, load excluded, Ω.
    pub output_resistance_ohm: Option<f64>,
}

/// The exact gain across the design's operating band.
#[derive(Clone, Debug, Serialize)]
pub struct BandReport {
    /// Lower band edge, Hz.
    pub from_hz: f64,
    /// Upper band edge, Hz.
    pub to_hz: f64,
    /// Geometric centre, Hz.
    pub centre_hz: f64,
    /// |H| at the centre, V/V: the mid-band gain when a band is stated.
    pub centre_gain: f64,
    /// The same in dB.
    pub centre_gain_db: f64,
    /// The lowest gain in the band, dB.
    pub lowest_gain_db: f64,
    /// Where, Hz.
    pub lowest_at_hz: f64,
    /// The highest gain in the band, dB.
    pub highest_gain_db: f64,
    /// Where, Hz.
    pub highest_at_hz: f64,
    /// Highest − lowest, dB.
    pub flatness_db: f64,
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
    /// For a network too large for QZ, where its poles and zeros were looked for (all the
    /// lists above, and those of the high and low networks, hold only what lies there);
    /// None when every root was found.
    pub root_window: Option<RootWindow>,
    /// The frequency response over the design's sweep.
    #[serde(skip)]
    pub sweep: Vec<SweepPoint>,
    /// True when the network has inductors (the time constants treat them as wires).
    pub has_inductors: bool,
    /// Noise: densities, noise figure, equivalent input generators, contributors; None when
    /// the network cannot be solved at the spot frequency.
    pub noise: Option<noise::NoiseReport>,
    /// Signal handling from the quasi-static transfer: swing, distortion, compression;
    /// None without transistors.
    pub large_signal: Option<large_signal::LargeSignalReport>,
    /// The stage at its ports: S-parameters in the reference impedance, stability, the
    /// impedances with the design's terminations.
    #[serde(skip)]
    pub ports: Option<ports::PortsReport>,
    /// The step response (None without every root, or for a repeated or unstable pole).
    #[serde(skip)]
    pub step: Option<step::StepReport>,
    /// The group delay across the band (the stated one, else between the cut-offs).
    #[serde(skip)]
    pub group_delay: Option<step::GroupDelayReport>,
}

/// Where the roots of a large network were looked for, and why.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct RootWindow {
    /// |s|/2π from, Hz.
    pub from_hz: f64,
    /// |s|/2π to, Hz.
    pub to_hz: f64,
    /// Unknowns a capacitor or inductor touches.
    pub dynamic_unknowns: usize,
    /// The most of those for which QZ finds every root.
    pub qz_up_to: usize,
}

/// The figures tolerance analysis follows, from one evaluation of a design.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct Metrics {
    /// |mid-band gain|, V/V: the exact gain at the operating band's centre when the design
    /// states a band, else the idealised gain.
    pub gain: f64,
    /// Gain flatness over the operating band, dB, when the design states one.
    pub flatness_db: Option<f64>,
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
    /// Spot noise figure, dB — only when a requirement limits it: noise figures are
    /// followed through the tolerance study when the design asks about them.
    pub noise_figure_db: Option<f64>,
    /// Spot input-referred noise density, V/√Hz, when a requirement limits it.
    pub input_noise: Option<f64>,
    /// rms output noise over the band, V, when a requirement limits it.
    pub output_noise: Option<f64>,
    /// Signal-to-noise ratio over the band, dB, when a requirement limits it.
    pub snr_db: Option<f64>,
    /// The largest |current| any supply delivers, A, when a requirement limits it.
    pub supply_current: Option<f64>,
    /// The symmetric output swing, peak V, when a requirement limits it.
    pub output_swing: Option<f64>,
    /// THD at the stated amplitude, %, when a requirement limits it.
    pub thd_percent: Option<f64>,
    /// The 1 dB compression EMF, peak V, when a requirement limits it.
    pub input_compression: Option<f64>,
    /// The smallest input return loss across the band, dB, when a requirement limits it.
    pub input_return_loss_db: Option<f64>,
    /// The smallest output return loss across the band, dB, when a requirement limits it.
    pub output_return_loss_db: Option<f64>,
    /// The smallest μ over the sweep, when a requirement limits it.
    pub mu_min: Option<f64>,
    /// The step's 10–90 % rise time, s, when a requirement limits it.
    pub rise_time_s: Option<f64>,
    /// The step's overshoot, %, when a requirement limits it.
    pub overshoot_percent: Option<f64>,
    /// The group delay's spread across the band, s, when a requirement limits it.
    pub group_delay_variation_s: Option<f64>,
}

/// The largest magnitude among supply currents, None without supplies.
pub fn largest_supply_current(currents: impl Iterator<Item = f64>) -> Option<f64> {
    currents.map(f64::abs).reduce(f64::max)
}

impl Analysis {
    /// The figures tolerance work follows, read off this analysis: the same values
    /// [`metrics`] computes for the same design (a unit test holds the two together), the
    /// noise figures only where `req` limits them.
    pub fn metrics(&self, req: &crate::design::Requirements) -> Metrics {
        let band = self.midband.band.as_ref();
        let noise = self.noise.as_ref();
        let large = self.large_signal.as_ref();
        let port_band = self.ports.as_ref().and_then(|p| p.band.as_ref());
        Metrics {
            gain: band.map_or(self.midband.gain.abs(), |b| b.centre_gain),
            flatness_db: band.map(|b| b.flatness_db),
            f_high: self.high.f3db_hz,
            f_low: self.low.f3db_hz,
            r_in: self.midband.input_resistance_ohm,
            r_out: self.midband.output_resistance_ohm,
            bias: self
                .operating_point
                .as_ref()
                .map(|op| {
                    op.devices.iter().map(|d| evaluate::bias_current(&d.bias.state)).collect()
                })
                .unwrap_or_default(),
            noise_figure_db: noise
                .and_then(|n| n.noise_figure_db)
                .filter(|_| req.noise_figure.is_some()),
            input_noise: noise
                .and_then(|n| n.input_density_v_per_rthz)
                .filter(|_| req.input_noise_density.is_some()),
            output_noise: noise
                .and_then(|n| n.band.as_ref())
                .map(|b| b.output_rms_v)
                .filter(|_| req.output_noise.is_some()),
            snr_db: noise.and_then(|n| n.snr_db).filter(|_| req.snr.is_some()),
            supply_current: self
                .operating_point
                .as_ref()
                .and_then(|op| largest_supply_current(op.supplies.iter().map(|s| s.current_a)))
                .filter(|_| req.supply_current.is_some()),
            output_swing: large
                .and_then(|l| l.output_swing.symmetric_peak_v())
                .filter(|_| req.output_swing.is_some()),
            thd_percent: large
                .and_then(|l| l.distortion.as_ref())
                .map(|d| d.thd_percent)
                .filter(|_| req.thd.is_some()),
            input_compression: large
                .and_then(|l| l.compression_1db_input_v)
                .filter(|_| req.input_compression.is_some()),
            input_return_loss_db: port_band
                .and_then(|b| b.input_return_loss_db)
                .map(|(v, _)| v)
                .filter(|_| req.input_return_loss.is_some()),
            output_return_loss_db: port_band
                .and_then(|b| b.output_return_loss_db)
                .map(|(v, _)| v)
                .filter(|_| req.output_return_loss.is_some()),
            mu_min: self
                .ports
                .as_ref()
                .and_then(|p| p.mu_min())
                .filter(|_| req.stability.is_some()),
            rise_time_s: self
                .step
                .as_ref()
                .map(|s| s.rise_time_s)
                .filter(|_| req.rise_time.is_some()),
            overshoot_percent: self
                .step
                .as_ref()
                .map(|s| 100.0 * s.overshoot)
                .filter(|_| req.overshoot.is_some()),
            group_delay_variation_s: self
                .group_delay
                .as_ref()
                .map(|g| g.variation_s())
                .filter(|_| req.group_delay_variation.is_some()),
        }
    }

    /// The designators of the transistors, in the order of [`Metrics::bias`].
    pub fn device_names(&self) -> Vec<String> {
        self.operating_point
            .as_ref()
            .map(|op| op.devices.iter().map(|d| d.bias.part.clone()).collect())
            .unwrap_or_default()
    }
}
