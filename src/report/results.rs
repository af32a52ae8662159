//! results.json: the machine-readable results contract.
//!
//! Every key is written out here, in its own documented struct, so the contract changes only
//! when this file does (and CHANGELOG.md says so): keys in snake_case with the SI unit in the
//! name, a value that does not exist is null (or, for the few device keys that belong to one
//! kind of transistor, absent), never NaN. The structs read back too: `tauweave diff` parses an
//! earlier results.json into the same [`ResultsDocument`] it builds from a fresh review.
//!
//! In: a design and its [`Review`]. Out: a [`ResultsDocument`] and its JSON text. Enumerated
//! values (regions, sets, distributions) are carried as the names the analysis gives them.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::analysis::requirements::RequirementCheck;
use crate::analysis::tolerance::{MonteCarlo, Study};
use crate::analysis::{Analysis, DeviceReport, OperatingPointReport, RootHz};
use crate::circuit::operating_point::DeviceState;
use crate::design::{Design, Tolerance};
use crate::review::Review;

/// The tool that wrote the results.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Tool {
    /// `tauweave`.
    pub name: String,
    /// Its version.
    pub version: String,
}

/// Which design the results are for.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DesignId {
    /// Design id.
    pub id: String,
    /// Title.
    pub title: String,
    /// Revision.
    pub revision: String,
    /// The design's date.
    pub date: String,
}

/// Where the results came from.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Provenance {
    /// SHA-256 of the design file's bytes, hex.
    pub design_sha256: String,
    /// SHA-256 of the template, hex.
    pub template_sha256: Option<String>,
    /// The Monte Carlo seed.
    pub seed: u64,
    /// The command that rebuilds these results.
    pub rebuild_command: String,
}

/// SHA-256 of the inputs, hex.
#[derive(Clone, Debug)]
pub struct Hashes {
    /// Of the design file's bytes.
    pub design: String,
    /// Of the template's bytes.
    pub template: Option<String>,
    /// The user's template file, when not the built-in one.
    pub template_name: Option<String>,
}

/// `operating_point`: the bias.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct OperatingPointResults {
    /// True when the bias settled.
    pub converged: bool,
    /// `newton`, `gmin_stepping` or `source_stepping`.
    pub method: Option<String>,
    /// Newton iterations.
    pub iterations: usize,
    /// Largest KCL imbalance, A.
    pub kcl_residual_a: f64,
    /// kT/q, V.
    pub thermal_voltage_v: f64,
    /// Node voltages by name, V (internal nodes such as `Q1.b'` included).
    pub nodes: BTreeMap<String, f64>,
    /// Each transistor.
    pub devices: Vec<DeviceResults>,
    /// What each supply delivers (absent from results.json files written before it).
    #[serde(default)]
    pub supplies: Vec<SupplyResults>,
    /// Each rated resistor's dissipation and rated capacitor's DC voltage against its
    /// rating (absent from results.json files written before it).
    #[serde(default)]
    pub stress: Vec<StressResults>,
}

/// One rated part at the operating point.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct StressResults {
    /// Designator.
    pub part: String,
    /// `power` (a resistor, W) or `voltage` (a capacitor, V).
    pub quantity: String,
    /// The dissipation (W) or the DC voltage's magnitude (V).
    pub value: f64,
    /// The part's rating, same unit.
    pub rating: f64,
    /// The rating times the derating (0.5 for a resistor's power, 0.8 for a capacitor's
    /// voltage; common practice).
    pub derated_limit: f64,
    /// value ÷ rating.
    pub fraction: f64,
}

/// One supply at the operating point.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SupplyResults {
    /// Its rail's node.
    pub node: String,
    /// V.
    pub voltage_v: f64,
    /// The current it delivers into the circuit, A (negative where it sinks current).
    pub current_a: f64,
    /// V·I, W.
    pub power_w: f64,
}

/// One transistor at its operating point.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DeviceResults {
    /// Designator.
    pub part: String,
    /// `kind` (`bjt` or `mosfet`), region, currents and voltages.
    #[serde(flatten)]
    pub bias: DeviceBiasResults,
    /// Dissipation, W.
    pub power_w: f64,
    /// The model's dissipation rating, W.
    pub max_power_w: Option<f64>,
    /// Small-signal parameters at this bias.
    pub small_signal: SmallSignalResults,
}

/// A transistor's region, currents and voltages, by kind. Signs are real: a pnp has
/// negative V_CE and I_C.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum DeviceBiasResults {
    /// A bipolar transistor.
    Bjt {
        /// `active`, `saturation`, `cutoff` or `reverse`.
        region: String,
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
    },
    /// A MOSFET.
    Mosfet {
        /// `saturation`, `triode` or `cutoff`.
        region: String,
        /// Drain current, A.
        id_a: f64,
        /// V_GS, V.
        vgs_v: f64,
        /// V_DS, V.
        vds_v: f64,
        /// Overdrive |V_GS| − |V_th|, V.
        overdrive_v: f64,
    },
}

/// Small-signal parameters of one transistor; keys of the other kind are absent.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SmallSignalResults {
    /// Designator.
    pub part: String,
    /// Transconductance, S.
    pub gm_s: f64,
    /// Output resistance, Ω (null when infinite).
    pub ro_ohm: Option<f64>,
    /// Bipolar: rπ, Ω.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rpi_ohm: Option<f64>,
    /// Bipolar: base resistance r_x, Ω.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rx_ohm: Option<f64>,
    /// Bipolar: small-signal current gain gm·rπ.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub beta_ac: Option<f64>,
    /// Bipolar: Cπ, F.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cpi_f: Option<f64>,
    /// Bipolar: Cμ, F.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cmu_f: Option<f64>,
    /// Bipolar: the transit time used, s.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub transit_time_s: Option<f64>,
    /// Bipolar: f_T at this bias, Hz.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ft_hz: Option<f64>,
    /// MOSFET: C_gs, F.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cgs_f: Option<f64>,
    /// MOSFET: C_gd, F.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cgd_f: Option<f64>,
    /// MOSFET: C_db, F.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cdb_f: Option<f64>,
}

/// One capacitor and the set it joined.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CapacitorResults {
    /// Designator (`C1`, `Q1.cmu`, `load.c`).
    pub part: String,
    /// Capacitance, F.
    pub c_f: f64,
    /// `low` (shorted at mid-band) or `high` (open at mid-band).
    pub set: String,
    /// Why: `role`, `value_rule` or `device`.
    pub reason: String,
}

/// `midband`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct MidbandResults {
    /// The frequency taken as mid-band: the operating band's centre when the design states
    /// a band, else √(f_L,est · f_H,est), Hz.
    pub frequency_hz: f64,
    /// Signed voltage gain from the source EMF to the output, idealised (coupling and bypass
    /// capacitors shorted, high-frequency capacitors open).
    pub gain: f64,
    /// 20·log10|gain|.
    pub gain_db: Option<f64>,
    /// The exact gain across the operating band, when the design states one.
    #[serde(default)]
    pub band: Option<BandResults>,
    /// The exact response at `frequency_hz`, every capacitor present, dB.
    pub exact_gain_db: Option<f64>,
    /// Looking into the input, source resistance excluded, Ω.
    pub input_resistance_ohm: Option<f64>,
    /// Looking into the output, load excluded, Ω.
    pub output_resistance_ohm: Option<f64>,
}

/// `midband.band`: the exact gain across the design's operating band.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct BandResults {
    /// Lower band edge, Hz.
    pub from_hz: f64,
    /// Upper band edge, Hz.
    pub to_hz: f64,
    /// Geometric centre √(from·to), Hz.
    pub centre_hz: f64,
    /// The exact gain at the centre, dB: what `midband_gain` is judged on.
    pub centre_gain_db: f64,
    /// The lowest gain in the band, dB.
    pub lowest_gain_db: f64,
    /// Where, Hz.
    pub lowest_at_hz: f64,
    /// The highest gain in the band, dB.
    pub highest_gain_db: f64,
    /// Where, Hz.
    pub highest_at_hz: f64,
    /// Highest − lowest, dB: what `gain_flatness` is judged on.
    pub flatness_db: f64,
}

/// One high-frequency capacitor's open-circuit time constant.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct OpenCircuitResults {
    /// Designator.
    pub part: String,
    /// Capacitance, F.
    pub c_f: f64,
    /// Resistance it sees with the other high capacitors open, Ω.
    pub r_ohm: f64,
    /// R·C, s.
    pub tau_s: f64,
    /// Share of Σ τ.
    pub share: f64,
    /// R over the sum of the resistances from each terminal to ground (null when both
    /// terminals are grounded at small signal).
    pub miller_factor: Option<f64>,
    /// Resistance from the first terminal to ground, Ω.
    pub r_a_ohm: f64,
    /// Resistance from the second terminal to ground, Ω.
    pub r_b_ohm: f64,
}

/// `high.octc`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct OctcResults {
    /// Each high-frequency capacitor.
    pub caps: Vec<OpenCircuitResults>,
    /// Σ τ, s.
    pub sum_tau_s: Option<f64>,
    /// 1/(2π Σ τ), Hz.
    pub f_estimate_hz: Option<f64>,
}

/// Relative errors of the estimates: (estimate − exact)/exact.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct EstimateErrorResults {
    /// Of the time-constant estimate.
    pub time_constant: Option<f64>,
    /// Of the second-order estimate (high side only).
    pub second_order: Option<f64>,
    /// Of the root-sum-square of the poles and zeros.
    pub root_sum_square: Option<f64>,
}

/// `high.peaking`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PeakingResults {
    /// Highest |H| over |H_mid|, dB.
    pub peak_db: f64,
    /// Where, Hz.
    pub at_hz: f64,
    /// Crossings of the −3 dB level on the sweep.
    pub crossings: usize,
}

/// A pole or zero, s/2π in Hz.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct RootResults {
    /// Real part, Hz.
    pub re_hz: f64,
    /// Imaginary part, Hz.
    pub im_hz: f64,
}

/// `root_window`: where the roots of a large network were looked for.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct RootWindowResults {
    /// Lowest |s|/2π searched, Hz.
    pub from_hz: f64,
    /// Highest |s|/2π searched, Hz.
    pub to_hz: f64,
    /// Unknowns a capacitor or inductor touches.
    pub dynamic_unknowns: usize,
    /// The most of those for which every root is found (by QZ).
    pub qz_up_to: usize,
}

/// `high`: the upper cut-off and its estimates.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct HighResults {
    /// Exact upper −3 dB frequency, Hz.
    pub f3db_hz: Option<f64>,
    /// b1 = Σ τ, s.
    pub b1_s: Option<f64>,
    /// b2, s².
    pub b2_s2: Option<f64>,
    /// |p2/p1| of the high-frequency network's two lowest poles.
    pub dominance_ratio: Option<f64>,
    /// Open-circuit time constants.
    pub octc: OctcResults,
    /// −3 dB of 1/(1 + b1 s + b2 s²), Hz.
    pub second_order_f_estimate_hz: Option<f64>,
    /// 1/√(Σ 1/f_p² − 2 Σ 1/f_z²), Hz.
    pub rss_f_estimate_hz: Option<f64>,
    /// Each estimate's error.
    pub estimate_errors: EstimateErrorResults,
    /// Peaking above the mid-band gain, when there is any.
    pub peaking: Option<PeakingResults>,
    /// Poles of the high-frequency network (low capacitors shorted).
    pub poles_hz: Vec<RootResults>,
    /// Its zeros.
    pub zeros_hz: Vec<RootResults>,
}

/// One low-frequency capacitor's short-circuit time constant.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ShortCircuitResults {
    /// Designator (`C1`, or `C4 ∥ C5` for capacitors in parallel).
    pub part: String,
    /// Capacitance, F.
    pub c_f: f64,
    /// Resistance it sees with the other low capacitors shorted, Ω.
    pub r_ohm: f64,
    /// R·C, s.
    pub tau_s: f64,
    /// Share of Σ 1/τ.
    pub share: f64,
}

/// `low.sctc`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SctcResults {
    /// Each low-frequency capacitor.
    pub caps: Vec<ShortCircuitResults>,
    /// Σ 1/(2π τ), Hz.
    pub f_estimate_hz: Option<f64>,
}

/// `low`: the lower cut-off and its estimates.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LowResults {
    /// Exact lower −3 dB frequency, Hz.
    pub f3db_hz: Option<f64>,
    /// Short-circuit time constants.
    pub sctc: SctcResults,
    /// |p1/p2| of the low network's two highest poles.
    pub dominance_ratio: Option<f64>,
    /// √(Σ f_p² − 2 Σ f_z²), Hz.
    pub rss_f_estimate_hz: Option<f64>,
    /// Each estimate's error.
    pub estimate_errors: EstimateErrorResults,
    /// Poles of the low-frequency network (high capacitors open).
    pub poles_hz: Vec<RootResults>,
    /// Its zeros.
    pub zeros_hz: Vec<RootResults>,
}

/// One requirement checked.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RequirementResults {
    /// `midband_gain`, `gain_flatness`, `upper_cutoff`, `lower_cutoff`, `input_resistance`,
    /// `output_resistance`.
    pub name: String,
    /// SI unit of the value (`""` for a gain in V/V, `dB` for the flatness).
    pub unit: String,
    /// Lowest allowed.
    pub min: Option<f64>,
    /// Highest allowed.
    pub max: Option<f64>,
    /// The computed value (|gain| for the gain: the exact gain at the band centre when the
    /// design states a band, else the idealised gain).
    pub value: Option<f64>,
    /// True when within the limits at nominal values.
    pub pass: bool,
    /// Relative distance to the nearer limit, positive inside.
    pub margin: Option<f64>,
    /// For `midband_gain` and `gain_flatness`, the distance to the nearer limit in dB,
    /// positive inside.
    pub margin_db: Option<f64>,
    /// The nearer limit: `min` or `max`.
    pub nearest_limit: Option<String>,
    /// The value at the tolerance corner toward the limit.
    pub corner: Option<f64>,
    /// True when every corner that matters is within the limits.
    pub corner_pass: Option<bool>,
    /// False when a corner lies on the wrong side of the nominal value, so the corners do
    /// not bound the figure (it is not monotonic over the tolerance box) and the Monte Carlo
    /// yield is the guide; null without a corner.
    #[serde(default)]
    pub corner_monotonic: Option<bool>,
    /// The value at the corner toward the minimum (null without a minimum).
    pub low_corner: Option<f64>,
    /// The value at the corner toward the maximum (null without a maximum).
    pub high_corner: Option<f64>,
    /// Monte Carlo yield of this requirement.
    pub yield_fraction: Option<f64>,
}

/// A lever's tolerance.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ToleranceResults {
    /// Half-width as a fraction of |nominal|.
    pub fraction: f64,
    /// `uniform` or `gaussian` (the tolerance is then 3σ).
    pub distribution: String,
    /// True when written as an absolute amount.
    pub absolute: bool,
}

/// One lever and its sensitivities.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LeverResults {
    /// `R1`, `signal.resistance`, `vcc`, `temperature`, `RFN1.beta`.
    pub name: String,
    /// Nominal value, SI units.
    pub nominal: f64,
    /// Its tolerance, when it has one.
    pub tolerance: Option<ToleranceResults>,
    /// `resistance`, `capacitance`, `inverse_capacitance`, `inductance`,
    /// `transconductance` or `other`.
    pub class: String,
    /// S = ∂ln y/∂ln x of each figure, in the order of `sensitivity.figures`.
    pub s: Vec<Option<f64>>,
}

/// `sensitivity`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SensitivityResults {
    /// Relative step of the differences taken through the operating point (the linear
    /// network's part is exact, by the adjoint method).
    pub step: f64,
    /// Figure names, the order of each lever's `s`.
    pub figures: Vec<String>,
    /// Every lever.
    pub levers: Vec<LeverResults>,
}

/// The worst case of one figure.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct WorstCaseResults {
    /// The figure (`upper_cutoff`, `Q1.bias_current`, …).
    pub figure: String,
    /// Nominal value.
    pub nominal: f64,
    /// Linearised bound Σ|S_i|·t_i, relative.
    pub linear_bound: f64,
    /// Value at the corner that raises it, evaluated in full.
    pub high_corner: Option<f64>,
    /// Value at the corner that lowers it.
    pub low_corner: Option<f64>,
}

/// The spread of one figure over the Monte Carlo runs.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SpreadResults {
    /// The figure.
    pub figure: String,
    /// Mean.
    pub mean: f64,
    /// Standard deviation (n − 1).
    pub std_dev: f64,
    /// 1st, 5th, 50th, 95th and 99th percentiles.
    pub percentiles: [f64; 5],
    /// Runs in which the figure existed.
    pub count: usize,
}

/// `tolerance.monte_carlo`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct MonteCarloResults {
    /// Runs.
    pub runs: u32,
    /// The seed.
    pub seed: u64,
    /// Indices of the runs whose evaluation failed.
    pub failed_runs: Vec<u64>,
    /// Spread of each figure.
    pub spreads: Vec<SpreadResults>,
    /// `[requirement name, fraction of all runs that pass]`.
    pub yields: Vec<(String, f64)>,
    /// Fraction of all runs that pass every requirement.
    pub yield_all: Option<f64>,
}

/// `tolerance`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ToleranceSummary {
    /// Linearised bound and evaluated corners of each figure.
    pub worst_case: Vec<WorstCaseResults>,
    /// Monte Carlo, when it ran.
    pub monte_carlo: Option<MonteCarloResults>,
}

/// One caution.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CautionResults {
    /// Stable key (`close_poles`, `hazardous_voltage`, …).
    pub key: String,
    /// `computed` or `standard`.
    pub kind: String,
    /// The caution.
    pub text: String,
}

/// `noise`: what the stage adds to its source's noise.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct NoiseResults {
    /// The design temperature every part but the source is at, K.
    pub temperature_k: f64,
    /// The source resistance, Ω, whose noise is taken at T0 = 290 K.
    pub source_resistance_ohm: f64,
    /// Where the spot values are taken: the band's centre, else the mid-band frequency, Hz.
    pub spot_frequency_hz: f64,
    /// Output noise density, V/√Hz.
    pub output_density_v_per_rthz: f64,
    /// Noise density referred to the source EMF, V/√Hz.
    pub input_density_v_per_rthz: Option<f64>,
    /// Noise factor F (source at T0).
    pub noise_factor: Option<f64>,
    /// Noise figure 10·log10 F, dB.
    pub noise_figure_db: Option<f64>,
    /// Equivalent input noise voltage of the stage (source shorted), V/√Hz.
    pub e_n_v_per_rthz: Option<f64>,
    /// Equivalent input noise current of the stage (source open), A/√Hz.
    pub i_n_a_per_rthz: Option<f64>,
    /// Optimum source resistance e_n/i_n, Ω.
    pub r_opt_ohm: Option<f64>,
    /// Noise figure at the optimum source resistance, dB (e_n, i_n taken as uncorrelated).
    pub nf_min_db: Option<f64>,
    /// Integrated over the stated band, else between the exact cut-offs; null without either.
    pub band: Option<NoiseBandResults>,
    /// The stated signal's rms at the source EMF, V (null when the design states no
    /// amplitude).
    #[serde(default)]
    pub signal_rms_v: Option<f64>,
    /// Signal-to-noise ratio at the output over the band, dB: the signal's rms through the
    /// gain at the spot frequency over `band.output_rms_v` (null without an amplitude or a
    /// band).
    #[serde(default)]
    pub snr_db: Option<f64>,
    /// Each part and mechanism, largest share at the spot frequency first.
    pub contributors: Vec<ContributorResults>,
}

/// `noise.band`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct NoiseBandResults {
    /// Hz.
    pub start_hz: f64,
    /// Hz.
    pub stop_hz: f64,
    /// `stated` (the design's operating band) or `cutoffs` (between f_L and f_H).
    pub basis: String,
    /// rms output noise over the band, V.
    pub output_rms_v: f64,
    /// rms noise referred to the source EMF over the band, V.
    pub input_rms_v: f64,
}

/// `noise.contributors[]`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ContributorResults {
    /// `R1`, `Q1`, `source` (the signal source's resistance), `load`.
    pub part: String,
    /// `thermal`, `base_resistance`, `collector_shot`, `base_shot`, `channel` or `flicker`.
    pub mechanism: String,
    /// Output density at the spot frequency, V²/Hz.
    pub density_v2_per_hz: f64,
    /// Share of the output density at the spot frequency.
    pub share: f64,
    /// Share of the output noise integrated over the band.
    pub band_share: Option<f64>,
}

/// `suggestions[]`: part changes that make every requirement pass.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SuggestionResults {
    /// Each part's change.
    pub changes: Vec<ChangeResults>,
    /// Every figure with the changes made.
    pub figures: std::collections::BTreeMap<String, Option<f64>>,
    /// The smallest relative margin of any limited requirement with the changes made.
    pub worst_margin: f64,
}

/// One part's suggested value.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ChangeResults {
    /// Designator.
    pub part: String,
    /// Present value, SI.
    pub from: f64,
    /// Suggested value, SI.
    pub to: f64,
    /// The IEC 60063 series it comes from.
    pub series: String,
}

/// `corners[]`: one operating corner.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CornerResults {
    /// `nominal`, or each ranged quantity at its `low` or `high` end.
    pub label: String,
    /// Junction temperature, K.
    pub temperature_k: f64,
    /// Each supply's voltage here, V, by node.
    pub supplies: std::collections::BTreeMap<String, f64>,
    /// Each figure here (requirement names, then `PART.bias_current`); null where not
    /// computed.
    pub figures: std::collections::BTreeMap<String, Option<f64>>,
    /// True when every limited requirement passes here (null: not evaluated).
    pub pass: Option<bool>,
    /// The limited requirements failing here.
    pub failing: Vec<String>,
    /// With `tolerance_corners`: each limited requirement at its worst tolerance corner here.
    #[serde(default)]
    pub tolerance: std::collections::BTreeMap<String, Option<f64>>,
    /// The limited requirements failing at their worst tolerance corner here.
    #[serde(default)]
    pub tolerance_failing: Vec<String>,
}

/// `sweeps[]`: one what-if sweep.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SweepResults {
    /// The swept quantity, as the design names it.
    pub quantity: String,
    /// Its SI unit (empty for a pure number).
    pub unit: String,
    /// True for log-spaced values.
    pub log: bool,
    /// The values, SI.
    pub values: Vec<f64>,
    /// Each figure (results.json's requirement names) at each value; null where it could not
    /// be computed.
    pub figures: std::collections::BTreeMap<String, Vec<Option<f64>>>,
    /// The limited requirements failing at each value (null: not evaluated there).
    pub failing: Vec<Option<Vec<String>>>,
}

/// `limits[]`: how far a quantity can go before a requirement fails.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LimitResults {
    /// The varied quantity.
    pub quantity: String,
    /// Its SI unit.
    pub unit: String,
    /// The requirement kept passing.
    pub requirement: String,
    /// The last passing value, SI (null unless `outcome` is `reached`).
    pub value: Option<f64>,
    /// The nominal value, SI.
    pub nominal: f64,
    /// (value − nominal)/|nominal|.
    pub margin: Option<f64>,
    /// The end of the search, SI.
    pub bound: f64,
    /// Relative precision of `value`.
    pub precision: f64,
    /// `reached`, `not_reached` (still passing at `bound`) or `fails_at_nominal`.
    pub outcome: String,
}

/// `step`: the step response from the exact poles and zeros.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct StepResults {
    /// 10–90 % rise time, s.
    pub rise_time_s: f64,
    /// Peak over the final value, a fraction.
    pub overshoot: f64,
    /// When the response last leaves the settling band, s (null if it never settles in
    /// view).
    pub settling_time_s: Option<f64>,
    /// The settling band, a fraction of the final value.
    pub settling_band: f64,
    /// 0.35/f_H, s: the one-pole rule of thumb beside the rise time.
    pub rule_of_thumb_s: Option<f64>,
}

/// `group_delay`: across the stated band, else between the cut-offs.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct GroupDelayResults {
    /// Hz.
    pub from_hz: f64,
    /// Hz.
    pub to_hz: f64,
    /// At the band's geometric centre, s.
    pub centre_s: f64,
    /// Smallest, s.
    pub min_s: f64,
    /// Largest, s.
    pub max_s: f64,
    /// max − min, s.
    pub variation_s: f64,
}

/// `ports`: the stage as a two-port in the reference impedance.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PortsResults {
    /// Z₀, Ω.
    pub reference_ohm: f64,
    /// False when the design states none and 50 Ω is used.
    pub reference_stated: bool,
    /// At the spot frequency (the band's centre, else mid-band).
    pub spot: Option<PortSpotResults>,
    /// The input impedance with the design's load, at ten sweep points a decade (sweep.csv
    /// has every point).
    pub input_impedance: Vec<ImpedanceResults>,
    /// The output impedance with the design's source resistance.
    pub output_impedance: Vec<ImpedanceResults>,
    /// S₁₁, S₂₁, S₁₂, S₂₂ (real, imaginary) at the same frequencies.
    pub s_parameters: Vec<SParameterResults>,
    /// Rollett's K and Edwards–Sinsky μ over the whole sweep.
    pub stability: StabilityResults,
    /// The worst match across the review band (the stated band, else between the
    /// cut-offs); null without one.
    pub band: Option<PortBandResults>,
}

/// `ports.band`: the smallest return loss at each port across the band, where the return-loss
/// requirements are judged.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PortBandResults {
    /// Hz.
    pub from_hz: f64,
    /// Hz.
    pub to_hz: f64,
    /// The smallest return loss at port 1, dB (null if no point solves).
    pub input_return_loss_min_db: Option<f64>,
    /// Where, Hz.
    pub input_worst_hz: Option<f64>,
    /// The smallest return loss at port 2, dB.
    pub output_return_loss_min_db: Option<f64>,
    /// Where, Hz.
    pub output_worst_hz: Option<f64>,
}

/// The ports at one frequency, in the terms a reviewer reads.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PortSpotResults {
    /// Hz.
    pub frequency_hz: f64,
    /// Input impedance with the design's load, Ω.
    pub input_impedance: ImpedanceResults,
    /// Output impedance with the design's source resistance, Ω.
    pub output_impedance: ImpedanceResults,
    /// |S₂₁|, dB.
    pub s21_db: Option<f64>,
    /// Return loss at port 1, dB (null for a perfect match).
    pub input_return_loss_db: Option<f64>,
    /// Return loss at port 2, dB.
    pub output_return_loss_db: Option<f64>,
    /// VSWR at port 1 (null at total reflection).
    pub input_vswr: Option<f64>,
    /// VSWR at port 2.
    pub output_vswr: Option<f64>,
    /// −20·log10|S₁₂|, dB (null for a unilateral stage).
    pub reverse_isolation_db: Option<f64>,
    /// Rollett's K (null for a unilateral stage).
    pub k: Option<f64>,
    /// |Δ|.
    pub delta: f64,
    /// μ.
    pub mu: Option<f64>,
}

/// An impedance.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ImpedanceResults {
    /// Hz.
    pub frequency_hz: f64,
    /// Resistance, Ω.
    pub re_ohm: f64,
    /// Reactance, Ω.
    pub im_ohm: f64,
}

/// The four scattering parameters at one frequency, each `[re, im]`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SParameterResults {
    /// Hz.
    pub frequency_hz: f64,
    /// S₁₁.
    pub s11: [f64; 2],
    /// S₂₁.
    pub s21: [f64; 2],
    /// S₁₂.
    pub s12: [f64; 2],
    /// S₂₂.
    pub s22: [f64; 2],
}

/// `ports.stability`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct StabilityResults {
    /// The smallest K over the sweep (null for a unilateral stage).
    pub k_min: Option<f64>,
    /// The smallest μ over the sweep; above 1 everywhere means unconditionally stable.
    pub mu_min: Option<f64>,
    /// `[from, to]` frequency ranges (sweep points) where μ < 1.
    pub conditionally_stable_hz: Vec<[f64; 2]>,
}

fn ports(p: &crate::analysis::ports::PortsReport, per_decade: u32) -> PortsResults {
    use crate::analysis::ports::vswr;
    let step = (per_decade / 10).max(1) as usize;
    let shown: Vec<_> = p.points.iter().step_by(step).collect();
    let impedance =
        |f: f64, z: faer::c64| ImpedanceResults { frequency_hz: f, re_ohm: z.re, im_ohm: z.im };
    let db = |v: f64| (v > 0.0).then(|| 20.0 * v.log10());
    PortsResults {
        reference_ohm: p.reference_ohm,
        reference_stated: p.reference_stated,
        spot: p.spot.map(|q| PortSpotResults {
            frequency_hz: q.frequency_hz,
            input_impedance: impedance(q.frequency_hz, q.z_in),
            output_impedance: impedance(q.frequency_hz, q.z_out),
            s21_db: db(q.s[1].norm()),
            input_return_loss_db: q.input_return_loss_db(),
            output_return_loss_db: q.output_return_loss_db(),
            input_vswr: vswr(q.s[0]),
            output_vswr: vswr(q.s[3]),
            reverse_isolation_db: q.reverse_isolation_db(),
            k: q.k(),
            delta: q.delta().norm(),
            mu: q.mu(),
        }),
        input_impedance: shown.iter().map(|q| impedance(q.frequency_hz, q.z_in)).collect(),
        output_impedance: shown.iter().map(|q| impedance(q.frequency_hz, q.z_out)).collect(),
        s_parameters: shown
            .iter()
            .map(|q| {
                let pair = |z: faer::c64| [z.re, z.im];
                SParameterResults {
                    frequency_hz: q.frequency_hz,
                    s11: pair(q.s[0]),
                    s21: pair(q.s[1]),
                    s12: pair(q.s[2]),
                    s22: pair(q.s[3]),
                }
            })
            .collect(),
        stability: StabilityResults {
            k_min: p.k_min(),
            mu_min: p.mu_min(),
            conditionally_stable_hz: p
                .conditionally_stable()
                .into_iter()
                .map(|(a, b)| [a, b])
                .collect(),
        },
        band: p.band.map(|b| PortBandResults {
            from_hz: b.from_hz,
            to_hz: b.to_hz,
            input_return_loss_min_db: b.input_return_loss_db.map(|(v, _)| v),
            input_worst_hz: b.input_return_loss_db.map(|(_, f)| f),
            output_return_loss_min_db: b.output_return_loss_db.map(|(v, _)| v),
            output_worst_hz: b.output_return_loss_db.map(|(_, f)| f),
        }),
    }
}

/// `large_signal`: the quasi-static transfer at mid-band and what it says about signal
/// handling.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LargeSignalResults {
    /// How it was computed: `quasi_static` (the nonlinear circuit at each instantaneous EMF,
    /// coupling capacitors holding their bias voltages, device capacitances open).
    pub basis: String,
    /// The frequency it stands for, Hz.
    pub frequency_hz: f64,
    /// True when that frequency is a decade inside both cut-offs.
    pub well_inside_band: bool,
    /// The stated peak EMF, V.
    pub input_amplitude_v: Option<f64>,
    /// How far the output moves each way before a transistor reaches an edge of its bias
    /// region, and which.
    pub output_swing: SwingResults,
    /// The smaller EMF at which either side reaches its limit, peak V.
    pub clipping_input_v: Option<f64>,
    /// Second harmonic at the stated amplitude over the fundamental, dB.
    pub hd2_db: Option<f64>,
    /// Third harmonic, dB.
    pub hd3_db: Option<f64>,
    /// Total harmonic distortion at the stated amplitude, %.
    pub thd_percent: Option<f64>,
    /// The fundamental at the output at the stated amplitude, peak V.
    pub fundamental_v: Option<f64>,
    /// HD2 from the power series at the bias (the small-signal estimate), dB.
    pub hd2_series_db: Option<f64>,
    /// HD3 from the power series, dB.
    pub hd3_series_db: Option<f64>,
    /// The EMF at which the fundamental's gain is 1 dB down, peak V.
    pub compression_1db_input_v: Option<f64>,
    /// The input third-order intercept extrapolated from the power series, peak V per tone.
    pub iip3_v: Option<f64>,
    /// Input-referred band noise (rms) to the compression point (rms), dB.
    pub dynamic_range_db: Option<f64>,
    /// Power-series coefficients of the output change in the EMF at the bias: a1 (V/V),
    /// a2 (1/V), a3 (1/V²).
    pub series: Option<[f64; 3]>,
    /// Transistors outside their normal region at the bias (a bipolar transistor not
    /// forward-active, a MOSFET not in saturation): not watched for the swing limits.
    #[serde(default)]
    pub unwatched: Vec<String>,
}

/// `large_signal.output_swing`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SwingResults {
    /// Rise from the bias value, V.
    pub positive_v: Option<f64>,
    /// Fall from the bias value, V (a magnitude).
    pub negative_v: Option<f64>,
    /// What ends the rise.
    pub positive_limit: Option<SwingLimitResults>,
    /// What ends the fall.
    pub negative_limit: Option<SwingLimitResults>,
}

/// One side's limit.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SwingLimitResults {
    /// The transistor.
    pub part: String,
    /// `cut_off`, `saturation` (bipolar) or `triode` (a MOSFET leaving saturation).
    pub edge: String,
    /// Its collector or drain node.
    pub node: String,
    /// The EMF there, V (signed).
    pub input_v: f64,
    /// The output change there, V (signed).
    pub output_v: f64,
}

fn large_signal(l: &crate::analysis::large_signal::LargeSignalReport) -> LargeSignalResults {
    let limit = |l: &Option<crate::analysis::large_signal::SwingLimit>| {
        l.as_ref().map(|l| SwingLimitResults {
            part: l.part.clone(),
            edge: name_of(&l.edge),
            node: l.node.clone(),
            input_v: l.input_v,
            output_v: l.output_v,
        })
    };
    let d = l.distortion.as_ref();
    let db = |r: f64| (r > 1e-12).then(|| 20.0 * r.log10());
    let amplitude = l.input_amplitude_v;
    LargeSignalResults {
        basis: "quasi_static".into(),
        frequency_hz: l.frequency_hz,
        well_inside_band: l.well_inside_band,
        input_amplitude_v: amplitude,
        output_swing: SwingResults {
            positive_v: l.output_swing.positive_v,
            negative_v: l.output_swing.negative_v,
            positive_limit: limit(&l.output_swing.positive_limit),
            negative_limit: limit(&l.output_swing.negative_limit),
        },
        clipping_input_v: l.clipping_input_v,
        hd2_db: d.and_then(|d| d.hd2_db),
        hd3_db: d.and_then(|d| d.hd3_db),
        thd_percent: d.map(|d| d.thd_percent),
        fundamental_v: d.map(|d| d.fundamental_v),
        hd2_series_db: l.series.zip(amplitude).and_then(|(s, a)| db(s.hd2(a))),
        hd3_series_db: l.series.zip(amplitude).and_then(|(s, a)| db(s.hd3(a))),
        compression_1db_input_v: l.compression_1db_input_v,
        iip3_v: l.iip3_v,
        dynamic_range_db: l.dynamic_range_db,
        series: l.series.map(|s| [s.a1, s.a2, s.a3]),
        unwatched: l.unwatched.clone(),
    }
}

/// The whole results document: results.json.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ResultsDocument {
    /// The tool.
    pub tool: Tool,
    /// The design.
    pub design: DesignId,
    /// Provenance.
    pub provenance: Provenance,
    /// The bias (null for a design without transistors).
    pub operating_point: Option<OperatingPointResults>,
    /// Every capacitor and its set.
    pub capacitors: Vec<CapacitorResults>,
    /// Mid-band gain and port resistances.
    pub midband: MidbandResults,
    /// The upper cut-off.
    pub high: HighResults,
    /// The lower cut-off.
    pub low: LowResults,
    /// Poles of the whole network.
    pub poles: Vec<RootResults>,
    /// Zeros from the source to the output.
    pub zeros: Vec<RootResults>,
    /// For a network too large for QZ: where its roots were looked for (every pole and zero
    /// list holds only those there). Null when every root was found.
    #[serde(default)]
    pub root_window: Option<RootWindowResults>,
    /// True when the network has inductors (the time constants treat them as wires).
    pub has_inductors: bool,
    /// Noise (null when the network cannot be solved at the spot frequency).
    #[serde(default)]
    pub noise: Option<NoiseResults>,
    /// Signal handling (null without transistors).
    #[serde(default)]
    pub large_signal: Option<LargeSignalResults>,
    /// The stage at its ports (null when the terminated stage cannot be solved).
    #[serde(default)]
    pub ports: Option<PortsResults>,
    /// The step response (null without every root, or for a repeated or unstable pole).
    #[serde(default)]
    pub step: Option<StepResults>,
    /// The group delay across the band.
    #[serde(default)]
    pub group_delay: Option<GroupDelayResults>,
    /// Part changes to series values that make every requirement pass, when one fails at
    /// nominal values; best first.
    #[serde(default)]
    pub suggestions: Vec<SuggestionResults>,
    /// What-if operating corners: every figure at the nominal point and at each
    /// combination of the temperature's and the supplies' range ends.
    #[serde(default)]
    pub corners: Vec<CornerResults>,
    /// What-if sweeps: every figure at each value of a swept quantity (empty when the
    /// design asks none).
    #[serde(default)]
    pub sweeps: Vec<SweepResults>,
    /// What-if limits: how far a quantity can go before a requirement fails.
    #[serde(default)]
    pub limits: Vec<LimitResults>,
    /// Each requirement at nominal values, at its tolerance corner and its yield.
    pub requirements: Vec<RequirementResults>,
    /// Normalised sensitivities of every figure to every lever.
    pub sensitivity: Option<SensitivityResults>,
    /// Worst case and Monte Carlo.
    pub tolerance: Option<ToleranceSummary>,
    /// The cautions that apply.
    pub cautions: Vec<CautionResults>,
    /// The template's worked calculations, each step with its value and, where it estimates
    /// a result, the exact value, the error and whether it lies within the stated tolerance
    /// (empty when the template works none).
    #[serde(default)]
    pub worked: Vec<crate::report::worked::WorkedStep>,
}

fn noise(n: &crate::analysis::noise::NoiseReport) -> NoiseResults {
    NoiseResults {
        temperature_k: n.temperature_k,
        source_resistance_ohm: n.source_resistance_ohm,
        spot_frequency_hz: n.spot_frequency_hz,
        output_density_v_per_rthz: n.output_density_v_per_rthz,
        input_density_v_per_rthz: n.input_density_v_per_rthz,
        noise_factor: n.noise_factor,
        noise_figure_db: n.noise_figure_db,
        e_n_v_per_rthz: n.e_n_v_per_rthz,
        i_n_a_per_rthz: n.i_n_a_per_rthz,
        r_opt_ohm: n.r_opt_ohm,
        nf_min_db: n.nf_min_db,
        band: n.band.as_ref().map(|b| NoiseBandResults {
            start_hz: b.start_hz,
            stop_hz: b.stop_hz,
            basis: name_of(&b.basis),
            output_rms_v: b.output_rms_v,
            input_rms_v: b.input_rms_v,
        }),
        signal_rms_v: n.signal_rms_v,
        snr_db: n.snr_db,
        contributors: n
            .contributors
            .iter()
            .map(|c| ContributorResults {
                part: c.part.clone(),
                mechanism: name_of(&c.mechanism),
                density_v2_per_hz: c.density_v2_per_hz,
                share: c.share,
                band_share: c.band_share,
            })
            .collect(),
    }
}

/// The tool's identity.
pub fn tool() -> Tool {
    Tool { name: "tauweave".into(), version: env!("CARGO_PKG_VERSION").into() }
}

/// The name serde gives a unit-like enum value (`active`, `gaussian`, `value_rule`): the
/// analysis types own their names, the contract carries them as text.
fn name_of(value: &impl Serialize) -> String {
    match serde_json::to_value(value) {
        Ok(serde_json::Value::String(s)) => s,
        _ => String::new(),
    }
}

/// Builds the document of `review` for `design`, whose file hashes to `hashes.design`.
pub fn document(
    design: &Design,
    review: &Review,
    hashes: Hashes,
    design_name: &str,
) -> ResultsDocument {
    let m = &design.meta;
    let a = &review.analysis;
    ResultsDocument {
        tool: tool(),
        design: DesignId {
            id: m.id.clone(),
            title: m.title.clone(),
            revision: m.revision.clone(),
            date: m.date.clone(),
        },
        provenance: Provenance {
            design_sha256: hashes.design,
            template_sha256: hashes.template,
            seed: design.analysis.seed,
            rebuild_command: match &hashes.template_name {
                Some(t) => format!("tauweave render {design_name} --template {t}"),
                None => format!("tauweave render {design_name}"),
            },
        },
        operating_point: a.operating_point.as_ref().map(operating_point),
        capacitors: a
            .capacitors
            .iter()
            .map(|c| CapacitorResults {
                part: c.part.clone(),
                c_f: c.c_f,
                set: name_of(&c.set),
                reason: name_of(&c.reason),
            })
            .collect(),
        midband: MidbandResults {
            frequency_hz: a.midband.frequency_hz,
            gain: a.midband.gain,
            gain_db: a.midband.gain_db,
            band: a.midband.band.as_ref().map(|b| BandResults {
                from_hz: b.from_hz,
                to_hz: b.to_hz,
                centre_hz: b.centre_hz,
                centre_gain_db: b.centre_gain_db,
                lowest_gain_db: b.lowest_gain_db,
                lowest_at_hz: b.lowest_at_hz,
                highest_gain_db: b.highest_gain_db,
                highest_at_hz: b.highest_at_hz,
                flatness_db: b.flatness_db,
            }),
            exact_gain_db: a.midband.exact_gain_db,
            input_resistance_ohm: a.midband.input_resistance_ohm,
            output_resistance_ohm: a.midband.output_resistance_ohm,
        },
        high: high(a),
        low: low(a),
        poles: roots(&a.poles),
        zeros: roots(&a.zeros),
        root_window: a.root_window.map(|w| RootWindowResults {
            from_hz: w.from_hz,
            to_hz: w.to_hz,
            dynamic_unknowns: w.dynamic_unknowns,
            qz_up_to: w.qz_up_to,
        }),
        has_inductors: a.has_inductors,
        noise: a.noise.as_ref().map(noise),
        large_signal: a.large_signal.as_ref().map(large_signal),
        ports: a.ports.as_ref().map(|p| ports(p, design.analysis.points_per_decade)),
        step: a.step.as_ref().map(|s| StepResults {
            rise_time_s: s.rise_time_s,
            overshoot: s.overshoot,
            settling_time_s: s.settling_time_s,
            settling_band: s.settling_band,
            rule_of_thumb_s: s.rule_of_thumb_s,
        }),
        group_delay: a.group_delay.as_ref().map(|g| GroupDelayResults {
            from_hz: g.from_hz,
            to_hz: g.to_hz,
            centre_s: g.centre_s,
            min_s: g.min_s,
            max_s: g.max_s,
            variation_s: g.variation_s(),
        }),
        suggestions: review
            .what_if
            .suggestions
            .iter()
            .map(|s| SuggestionResults {
                changes: s
                    .changes
                    .iter()
                    .map(|c| ChangeResults {
                        part: c.part.clone(),
                        from: c.from,
                        to: c.to,
                        series: c.series.to_string(),
                    })
                    .collect(),
                figures: s.figures.iter().cloned().collect(),
                worst_margin: s.worst_margin,
            })
            .collect(),
        corners: review
            .what_if
            .corners
            .iter()
            .map(|c| CornerResults {
                label: c.label.clone(),
                temperature_k: c.temperature_k,
                supplies: c.supplies.iter().cloned().collect(),
                figures: c.figures.iter().cloned().collect(),
                pass: c.failing.as_ref().map(Vec::is_empty),
                failing: c
                    .failing
                    .as_ref()
                    .map(|f| f.iter().map(|n| n.to_string()).collect())
                    .unwrap_or_default(),
                tolerance: c.tolerance.iter().map(|(n, v)| (n.to_string(), *v)).collect(),
                tolerance_failing: c.tolerance_failing.iter().map(|n| n.to_string()).collect(),
            })
            .collect(),
        sweeps: review
            .what_if
            .sweeps
            .iter()
            .map(|s| SweepResults {
                quantity: s.quantity.clone(),
                unit: s.unit.clone(),
                log: s.log,
                values: s.values.clone(),
                figures: s.figures.iter().cloned().collect(),
                failing: s
                    .failing
                    .iter()
                    .map(|f| f.as_ref().map(|f| f.iter().map(|n| n.to_string()).collect()))
                    .collect(),
            })
            .collect(),
        limits: review
            .what_if
            .limits
            .iter()
            .map(|l| LimitResults {
                quantity: l.quantity.clone(),
                unit: l.unit.clone(),
                requirement: l.requirement.to_string(),
                value: l.value,
                nominal: l.nominal,
                margin: l.margin,
                bound: l.bound,
                precision: l.precision,
                outcome: match l.outcome {
                    crate::analysis::what_if::Outcome::Reached => "reached",
                    crate::analysis::what_if::Outcome::NotReached => "not_reached",
                    crate::analysis::what_if::Outcome::FailsAtNominal => "fails_at_nominal",
                }
                .to_string(),
            })
            .collect(),
        requirements: review.requirements.iter().map(requirement).collect(),
        sensitivity: Some(sensitivity(&review.study)),
        tolerance: Some(tolerance_summary(&review.study)),
        cautions: review
            .cautions
            .iter()
            .map(|c| CautionResults {
                key: c.key.into(),
                kind: c.kind.into(),
                text: c.text.clone(),
            })
            .collect(),
        worked: Vec::new(),
    }
}

fn operating_point(op: &OperatingPointReport) -> OperatingPointResults {
    OperatingPointResults {
        converged: op.converged,
        method: op.method.as_ref().map(name_of),
        iterations: op.iterations,
        kcl_residual_a: op.kcl_residual_a,
        thermal_voltage_v: op.thermal_voltage_v,
        nodes: op.nodes.clone(),
        devices: op.devices.iter().map(device).collect(),
        supplies: op
            .supplies
            .iter()
            .map(|s| SupplyResults {
                node: s.node.clone(),
                voltage_v: s.voltage_v,
                current_a: s.current_a,
                power_w: s.power_w,
            })
            .collect(),
        stress: op
            .stress
            .iter()
            .map(|s| StressResults {
                part: s.part.clone(),
                quantity: s.quantity.into(),
                value: s.value,
                rating: s.rating,
                derated_limit: s.derated_limit,
                fraction: s.fraction,
            })
            .collect(),
    }
}

/// A requirement check as the results contract writes it.
pub fn requirement(c: &RequirementCheck) -> RequirementResults {
    RequirementResults {
        name: c.name.into(),
        unit: c.unit.into(),
        min: c.min,
        max: c.max,
        value: c.value,
        pass: c.pass,
        margin: c.margin,
        margin_db: c.margin_db,
        nearest_limit: c.nearest_limit.map(String::from),
        corner: c.corner,
        corner_pass: c.corner_pass,
        corner_monotonic: c.corner_monotonic,
        low_corner: c.low_corner,
        high_corner: c.high_corner,
        yield_fraction: c.yield_fraction,
    }
}

fn tolerance_summary(study: &Study) -> ToleranceSummary {
    ToleranceSummary {
        worst_case: study
            .worst_case
            .iter()
            .map(|w| WorstCaseResults {
                figure: w.figure.clone(),
                nominal: w.nominal,
                linear_bound: w.linear_bound,
                high_corner: w.high_corner,
                low_corner: w.low_corner,
            })
            .collect(),
        monte_carlo: study.monte_carlo.as_ref().map(monte_carlo),
    }
}

fn device(d: &DeviceReport) -> DeviceResults {
    let b = &d.bias;
    let bias = match &b.state {
        DeviceState::Bjt { region, ic_a, ib_a, vbe_v, vce_v, vcb_v, .. } => {
            DeviceBiasResults::Bjt {
                region: name_of(region),
                ic_a: *ic_a,
                ib_a: *ib_a,
                vbe_v: *vbe_v,
                vce_v: *vce_v,
                vcb_v: *vcb_v,
            }
        }
        DeviceState::Mosfet { region, id_a, vgs_v, vds_v, overdrive_v, .. } => {
            DeviceBiasResults::Mosfet {
                region: name_of(region),
                id_a: *id_a,
                vgs_v: *vgs_v,
                vds_v: *vds_v,
                overdrive_v: *overdrive_v,
            }
        }
    };
    let s = &d.small_signal;
    DeviceResults {
        part: b.part.clone(),
        bias,
        power_w: b.power_w,
        max_power_w: b.max_power_w,
        small_signal: SmallSignalResults {
            part: s.part.clone(),
            gm_s: s.gm_s,
            ro_ohm: s.ro_ohm,
            rpi_ohm: s.rpi_ohm,
            rx_ohm: s.rx_ohm,
            beta_ac: s.beta_ac,
            cpi_f: s.cpi_f,
            cmu_f: s.cmu_f,
            transit_time_s: s.transit_time_s,
            ft_hz: s.ft_hz,
            cgs_f: s.cgs_f,
            cgd_f: s.cgd_f,
            cdb_f: s.cdb_f,
        },
    }
}

fn roots(list: &[RootHz]) -> Vec<RootResults> {
    list.iter().map(|r| RootResults { re_hz: r.re_hz, im_hz: r.im_hz }).collect()
}

fn high(a: &Analysis) -> HighResults {
    let h = &a.high;
    let e = &h.estimate_errors;
    HighResults {
        f3db_hz: h.f3db_hz,
        b1_s: h.b1_s,
        b2_s2: h.b2_s2,
        dominance_ratio: h.dominance_ratio,
        octc: OctcResults {
            caps: h
                .octc
                .caps
                .iter()
                .map(|c| OpenCircuitResults {
                    part: c.part.clone(),
                    c_f: c.c_f,
                    r_ohm: c.r_ohm,
                    tau_s: c.tau_s,
                    share: c.share,
                    miller_factor: c.miller_factor,
                    r_a_ohm: c.r_a_ohm,
                    r_b_ohm: c.r_b_ohm,
                })
                .collect(),
            sum_tau_s: h.octc.sum_tau_s,
            f_estimate_hz: h.octc.f_estimate_hz,
        },
        second_order_f_estimate_hz: h.second_order_f_estimate_hz,
        rss_f_estimate_hz: h.rss_f_estimate_hz,
        estimate_errors: EstimateErrorResults {
            time_constant: e.time_constant,
            second_order: e.second_order,
            root_sum_square: e.root_sum_square,
        },
        peaking: h.peaking.as_ref().map(|p| PeakingResults {
            peak_db: p.peak_db,
            at_hz: p.at_hz,
            crossings: p.crossings,
        }),
        poles_hz: roots(&h.poles_hz),
        zeros_hz: roots(&h.zeros_hz),
    }
}

fn low(a: &Analysis) -> LowResults {
    let l = &a.low;
    let e = &l.estimate_errors;
    LowResults {
        f3db_hz: l.f3db_hz,
        sctc: SctcResults {
            caps: l
                .sctc
                .caps
                .iter()
                .map(|c| ShortCircuitResults {
                    part: c.part.clone(),
                    c_f: c.c_f,
                    r_ohm: c.r_ohm,
                    tau_s: c.tau_s,
                    share: c.share,
                })
                .collect(),
            f_estimate_hz: l.sctc.f_estimate_hz,
        },
        dominance_ratio: l.dominance_ratio,
        rss_f_estimate_hz: l.rss_f_estimate_hz,
        estimate_errors: EstimateErrorResults {
            time_constant: e.time_constant,
            second_order: e.second_order,
            root_sum_square: e.root_sum_square,
        },
        poles_hz: roots(&l.poles_hz),
        zeros_hz: roots(&l.zeros_hz),
    }
}

fn tolerance(t: &Tolerance) -> ToleranceResults {
    ToleranceResults {
        fraction: t.fraction,
        distribution: name_of(&t.distribution),
        absolute: t.absolute,
    }
}

fn sensitivity(study: &Study) -> SensitivityResults {
    SensitivityResults {
        step: study.step,
        figures: study.figures.clone(),
        levers: study
            .levers
            .iter()
            .map(|l| LeverResults {
                name: l.lever.name.clone(),
                nominal: l.lever.nominal,
                tolerance: l.lever.tolerance.as_ref().map(tolerance),
                class: name_of(&l.lever.class),
                s: l.s.clone(),
            })
            .collect(),
    }
}

fn monte_carlo(mc: &MonteCarlo) -> MonteCarloResults {
    MonteCarloResults {
        runs: mc.runs,
        seed: mc.seed,
        failed_runs: mc.failed_runs.clone(),
        spreads: mc
            .spreads
            .iter()
            .map(|s| SpreadResults {
                figure: s.figure.clone(),
                mean: s.mean,
                std_dev: s.std_dev,
                percentiles: s.percentiles,
                count: s.count,
            })
            .collect(),
        yields: mc.yields.clone(),
        yield_all: mc.yield_all,
    }
}

/// The document as pretty JSON with a final newline.
pub fn to_json(doc: &ResultsDocument) -> String {
    let mut s =
        serde_json::to_string_pretty(doc).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"));
    s.push('\n');
    s
}

/// Reads a results.json back.
pub fn from_json(bytes: &[u8]) -> Result<ResultsDocument, serde_json::Error> {
    serde_json::from_slice(bytes)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A results.json read back is the document written: the contract's types carry every
    /// key both ways, the optional device keys and the nulls included.
    #[test]
    fn a_written_document_reads_back_unchanged() {
        for name in ["rx-preamp-ce", "post-amp-cs"] {
            let text = std::fs::read_to_string(format!("designs/{name}.yaml")).unwrap();
            let design = crate::design::load(&text).design.unwrap();
            let options = crate::review::ReviewOptions::quiet(&design, Some(20));
            let review = crate::review::review(&design, &options).unwrap();
            let hashes = Hashes { design: "0".repeat(64), template: None, template_name: None };
            let doc = document(&design, &review, hashes, "x.yaml");
            let json = to_json(&doc);
            let back = from_json(json.as_bytes()).unwrap();
            assert_eq!(back, doc, "{name}");
            assert_eq!(to_json(&back), json, "{name}");
            // The keys of the other kind of transistor are absent, not null.
            let value: serde_json::Value = serde_json::from_str(&json).unwrap();
            let ss = &value["operating_point"]["devices"][0]["small_signal"];
            let bipolar = name == "rx-preamp-ce";
            assert_eq!(ss.get("cpi_f").is_some(), bipolar, "{name}");
            assert_eq!(ss.get("cgs_f").is_some(), !bipolar, "{name}");
        }
    }
}
