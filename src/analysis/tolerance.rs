//! What production spread does to a design: normalised sensitivities, the worst case, and
//! Monte Carlo.
//!
//! A *lever* is anything a tolerance can move: every part value, the source resistance,
//! every model parameter, each supply, the temperature. Sensitivities are
//! S = ∂ln y/∂ln x (Bode, 1945) by central differences with the operating point re-solved
//! at each step; the worst case is the linearised bound Σ|S_i|t_i beside the corner chosen
//! by the signs of S and evaluated in full; Monte Carlo draws every toleranced lever from
//! its distribution with one ChaCha8 stream per run, evaluates runs in parallel, collects
//! them in order and reduces them sequentially — bit-identical on any thread count.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::Serialize;

use crate::analysis::levers;
use crate::analysis::{Metrics, Progress, Stage, metrics};
use crate::circuit::small_signal::{Linear, LinearNetwork};
use crate::design::{Design, Distribution, PartKind};

pub use crate::analysis::levers::{Lever, LeverClass, levers, perturbed};

/// A figure tolerance analysis follows.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Figure {
    /// |mid-band gain|.
    Gain,
    /// Gain flatness over the operating band, dB.
    Flatness,
    /// Upper cut-off.
    FHigh,
    /// Lower cut-off.
    FLow,
    /// Input resistance.
    RIn,
    /// Output resistance.
    ROut,
    /// A device's bias current (index into the devices).
    Bias(usize),
    /// Spot noise figure, dB.
    NoiseFigure,
    /// Spot input-referred noise density.
    InputNoise,
    /// rms output noise over the band.
    OutputNoise,
    /// Signal-to-noise ratio, dB.
    Snr,
    /// The largest supply current.
    SupplyCurrent,
    /// The symmetric output swing.
    OutputSwing,
    /// THD at the stated amplitude.
    Thd,
    /// The 1 dB compression EMF.
    InputCompression,
    /// The smallest input return loss across the band, dB.
    InputReturnLoss,
    /// The smallest output return loss across the band, dB.
    OutputReturnLoss,
    /// The smallest μ over the sweep.
    Stability,
    /// The step's rise time.
    RiseTime,
    /// The step's overshoot, %.
    Overshoot,
    /// The group delay's spread across the band.
    GroupDelayVariation,
}

impl Figure {
    /// The figure's value in `m`.
    pub fn of(self, m: &Metrics) -> Option<f64> {
        match self {
            Figure::Gain => Some(m.gain),
            Figure::Flatness => m.flatness_db,
            Figure::FHigh => m.f_high,
            Figure::FLow => m.f_low,
            Figure::RIn => m.r_in,
            Figure::ROut => m.r_out,
            Figure::Bias(i) => m.bias.get(i).copied(),
            Figure::NoiseFigure => m.noise_figure_db,
            Figure::InputNoise => m.input_noise,
            Figure::OutputNoise => m.output_noise,
            Figure::Snr => m.snr_db,
            Figure::SupplyCurrent => m.supply_current,
            Figure::OutputSwing => m.output_swing,
            Figure::Thd => m.thd_percent,
            Figure::InputCompression => m.input_compression,
            Figure::InputReturnLoss => m.input_return_loss_db,
            Figure::OutputReturnLoss => m.output_return_loss_db,
            Figure::Stability => m.mu_min,
            Figure::RiseTime => m.rise_time_s,
            Figure::Overshoot => m.overshoot_percent,
            Figure::GroupDelayVariation => m.group_delay_variation_s,
        }
    }

    /// Its name in results.json.
    pub fn key(self, device_names: &[String]) -> String {
        match self {
            Figure::Gain => "midband_gain".into(),
            Figure::Flatness => "gain_flatness".into(),
            Figure::FHigh => "upper_cutoff".into(),
            Figure::FLow => "lower_cutoff".into(),
            Figure::RIn => "input_resistance".into(),
            Figure::ROut => "output_resistance".into(),
            Figure::Bias(i) => {
                format!("{}.bias_current", device_names.get(i).map_or("?", String::as_str))
            }
            Figure::NoiseFigure => "noise_figure".into(),
            Figure::InputNoise => "input_noise_density".into(),
            Figure::OutputNoise => "output_noise".into(),
            Figure::Snr => "snr".into(),
            Figure::SupplyCurrent => "supply_current".into(),
            Figure::OutputSwing => "output_swing".into(),
            Figure::Thd => "thd".into(),
            Figure::InputCompression => "input_compression".into(),
            Figure::InputReturnLoss => "input_return_loss".into(),
            Figure::OutputReturnLoss => "output_return_loss".into(),
            Figure::Stability => "stability".into(),
            Figure::RiseTime => "rise_time".into(),
            Figure::Overshoot => "overshoot".into(),
            Figure::GroupDelayVariation => "group_delay_variation".into(),
        }
    }
}

impl Figure {
    /// The figure a requirement (by its design-file name) limits.
    pub fn of_requirement(name: &str) -> Figure {
        match name {
            "midband_gain" => Figure::Gain,
            "gain_flatness" => Figure::Flatness,
            "upper_cutoff" => Figure::FHigh,
            "lower_cutoff" => Figure::FLow,
            "input_resistance" => Figure::RIn,
            "noise_figure" => Figure::NoiseFigure,
            "input_noise_density" => Figure::InputNoise,
            "output_noise" => Figure::OutputNoise,
            "snr" => Figure::Snr,
            "supply_current" => Figure::SupplyCurrent,
            "output_swing" => Figure::OutputSwing,
            "thd" => Figure::Thd,
            "input_compression" => Figure::InputCompression,
            "input_return_loss" => Figure::InputReturnLoss,
            "output_return_loss" => Figure::OutputReturnLoss,
            "stability" => Figure::Stability,
            "rise_time" => Figure::RiseTime,
            "overshoot" => Figure::Overshoot,
            "group_delay_variation" => Figure::GroupDelayVariation,
            _ => Figure::ROut,
        }
    }
}

/// The figures of a nominal evaluation that exist.
pub fn figures(nominal: &Metrics) -> Vec<Figure> {
    let mut out: Vec<Figure> =
        [Figure::Gain, Figure::Flatness, Figure::FHigh, Figure::FLow, Figure::RIn, Figure::ROut]
            .into_iter()
            .filter(|f| f.of(nominal).is_some_and(|v| v > 0.0))
            .collect();
    out.extend((0..nominal.bias.len()).map(Figure::Bias));
    out.extend(
        [
            Figure::NoiseFigure,
            Figure::InputNoise,
            Figure::OutputNoise,
            Figure::Snr,
            Figure::SupplyCurrent,
            Figure::OutputSwing,
            Figure::Thd,
            Figure::InputCompression,
            Figure::InputReturnLoss,
            Figure::OutputReturnLoss,
            Figure::Stability,
            Figure::RiseTime,
            Figure::Overshoot,
            Figure::GroupDelayVariation,
        ]
        .into_iter()
        .filter(|f| f.of(nominal).is_some_and(|v| v > 0.0)),
    );
    out
}

/// Relative step of the central differences: small enough that the O(h²) error is below
/// 1e-7, large enough that the operating point's rounding does not show.
pub const STEP: f64 = 1e-4;

/// S = ∂ln y/∂ln x for every lever and figure (`s[lever][figure]`, None where the figure
/// vanished or the lever's change could not be evaluated), by the adjoint method.
///
/// Each figure's gradient over the elements of the linear network comes from one evaluation
/// with one transposed solve per figure and frequency (`adjoint.rs`); a lever then only says
/// how the elements move with it. A capacitor's or an inductor's value moves its own element
/// alone (the bias does not see it), and so does every part value of a design without
/// transistors. Any other lever (a resistor that sets a bias, a supply, the temperature, a
/// model parameter) moves the elements through the operating point: that chain is taken by
/// central differences of the bias solution and the small-signal models alone, with no AC
/// analysis, and gives the bias currents' sensitivities too. A lever whose change alters the
/// network's make-up (a device entering another region) falls back to central differences
/// of whole evaluations ([`sensitivities_by_differences`]).
pub fn sensitivities(design: &Design, levers: &[Lever], figs: &[Figure]) -> Vec<Vec<Option<f64>>> {
    sensitivities_reporting(design, levers, figs, &|_| {})
}

/// [`sensitivities`], telling `progress` how many levers are done.
fn sensitivities_reporting(
    design: &Design,
    levers: &[Lever],
    figs: &[Figure],
    progress: &(dyn Fn(Progress) + Sync),
) -> Vec<Vec<Option<f64>>> {
    let total = levers.len() as u64;
    progress(Progress { stage: Stage::Sensitivities, done: 0, total });
    let done = std::sync::atomic::AtomicU64::new(0);
    let tick = || {
        let n = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
        if n % 8 == 0 {
            progress(Progress { stage: Stage::Sensitivities, done: n, total });
        }
    };
    let Ok(nominal) = crate::analysis::evaluate::metrics_with_gradients(design) else {
        return sensitivities_by_differences(design, levers, figs);
    };
    let (grads, lin) = (&nominal.gradients, &nominal.lin);
    let transistors = design
        .parts
        .iter()
        .any(|p| matches!(p.kind, PartKind::Bjt { .. } | PartKind::Mosfet { .. }));
    let gradient = |f: Figure| -> Option<&Vec<f64>> {
        match f {
            Figure::Gain => grads.gain.as_ref(),
            Figure::Flatness => grads.flatness_db.as_ref(),
            Figure::FHigh => grads.f_high.as_ref(),
            Figure::FLow => grads.f_low.as_ref(),
            Figure::RIn => grads.r_in.as_ref(),
            Figure::ROut => grads.r_out.as_ref(),
            // Noise has no adjoint gradient here: by differences of whole evaluations.
            Figure::Bias(_)
            | Figure::NoiseFigure
            | Figure::InputNoise
            | Figure::OutputNoise
            | Figure::Snr
            | Figure::SupplyCurrent
            | Figure::OutputSwing
            | Figure::Thd
            | Figure::InputCompression
            | Figure::InputReturnLoss
            | Figure::OutputReturnLoss
            | Figure::Stability
            | Figure::RiseTime
            | Figure::Overshoot
            | Figure::GroupDelayVariation => None,
        }
    };
    let dc = transistors.then(|| DcChain::new(design, &nominal)).flatten();
    let out = (0..levers.len())
        .into_par_iter()
        .map(|i| {
            let chain = direct_chain(design, &levers[i], lin, transistors)
                .or_else(|| dc.as_ref()?.chain(levers, i));
            let Some((moves, bias)) = chain else {
                tick();
                return sensitivities_by_differences(design, &levers[i..=i], figs).remove(0);
            };
            // A figure that exists but whose gradient could not be formed (|H| flat in
            // frequency at a cut-off) is taken by differences for this lever instead.
            let fallback = std::cell::OnceCell::new();
            let by_differences = |j: usize| {
                fallback.get_or_init(|| sensitivities_by_differences(design, &levers[i..=i], figs))
                    [0][j]
            };
            let row = figs
                .iter()
                .enumerate()
                .map(|(j, &f)| match f {
                    Figure::Bias(k) => bias.get(k).copied().filter(|v| v.is_finite()),
                    _ => {
                        let y = f.of(&nominal.metrics).filter(|y| *y > 0.0)?;
                        match gradient(f) {
                            Some(g) => {
                                Some(g.iter().zip(&moves).map(|(a, b)| a * b).sum::<f64>() / y)
                            }
                            None => by_differences(j),
                        }
                    }
                })
                .collect();
            tick();
            row
        })
        .collect();
    progress(Progress { stage: Stage::Sensitivities, done: total, total });
    out
}

/// ∂θ/∂ln p over the elements, and ∂ln I/∂ln p of each bias current, for a lever that moves
/// one element and no bias: its own value (a conductance goes as 1/R, so −g).
fn direct_chain(
    design: &Design,
    lever: &Lever,
    lin: &LinearNetwork,
    transistors: bool,
) -> Option<(Vec<f64>, Vec<f64>)> {
    // The source's resistance is in the bias network too (a 0 V source behind it), so it
    // is direct only without transistors, like a resistor.
    let (name, bias_free) = if lever.is_source_resistance() {
        ("source.r", false)
    } else {
        let p = &design.parts[lever.part()?];
        (p.name.as_str(), matches!(p.kind, PartKind::Capacitor { .. } | PartKind::Inductor { .. }))
    };
    if transistors && !bias_free {
        return None;
    }
    let mut moves = vec![0.0; lin.elements.len()];
    let k = lin.elements.iter().position(|e| element_name(e) == Some(name))?;
    moves[k] = match lin.elements[k] {
        Linear::Conductance { g, .. } => -g,
        ref other => other.value()?,
    };
    let devices = design
        .parts
        .iter()
        .filter(|p| matches!(p.kind, PartKind::Bjt { .. } | PartKind::Mosfet { .. }))
        .count();
    Some((moves, vec![0.0; devices]))
}

fn element_name(e: &Linear) -> Option<&str> {
    match e {
        Linear::Conductance { name, .. }
        | Linear::Capacitor { name, .. }
        | Linear::Inductor { name, .. }
        | Linear::Vccs { name, .. }
        | Linear::Vcvs { name, .. } => Some(name),
        Linear::Grounded { .. } => None,
    }
}

/// A central-difference stencil in ln p: its step h, and offsets (in units of h) with
/// weights, so that Σ w·f(p·e^(k·h)) / h ≈ ∂f/∂ln p.
struct Stencil {
    step: f64,
    points: &'static [(f64, f64)],
}

/// Second order, h = [`STEP`]: truncation O(h²), rounding O(ε/h).
const SECOND_ORDER: Stencil = Stencil { step: STEP, points: &[(1.0, 0.5), (-1.0, -0.5)] };

const FIVE_POINT: &[(f64, f64)] =
    &[(2.0, -1.0 / 12.0), (1.0, 8.0 / 12.0), (-1.0, -8.0 / 12.0), (-2.0, 1.0 / 12.0)];

/// Fourth order (the five-point rule without its centre) through the operating point, with
/// h = [`STEP`]: the bias is solved to a KCL residual near 1e-15 A, so rounding stays near
/// 1e-10 while the truncation, O((S·h)⁴), is below 1e-9 even for a sensitivity of 20.
const FOURTH_ORDER: Stencil = Stencil { step: STEP, points: FIVE_POINT };

/// Fourth order over whole evaluations, with h = 5e-4: their exact cut-offs are found to
/// about 1e-11, which a step of 1e-4 would magnify to 1e-7 in S; the truncation stays
/// below 1e-8 for sensitivities up to 20. The reference the adjoint method is checked
/// against.
const REFERENCE: Stencil = Stencil { step: 5e-4, points: FIVE_POINT };

/// The step of the differences that give each transistor's small-signal values as functions
/// of its two controlling voltages, as a fraction of the scale over which its current
/// changes: 1/(1/V_T + max |∂ln I/∂v|) — V_T for a bipolar transistor in its active region,
/// far less in saturation, where the current is a small difference of two exponentials.
/// At a hundredth of that scale the five-point rule's truncation is near 1e-10 and its
/// rounding near 1e-12.
const CONTROL_STEP: f64 = 1e-2;

/// ∂ln I/∂v of a transistor's bias current over its two normalised controls, exactly, from
/// the derivatives its model gives.
fn ln_current_slopes(state: &crate::circuit::operating_point::DeviceState) -> [f64; 2] {
    use crate::circuit::operating_point::DeviceState;
    match state {
        DeviceState::Bjt { eval, .. } => [eval.dic_dvbe / eval.ic, eval.dic_dvbc / eval.ic],
        DeviceState::Mosfet { eval, .. } => [eval.gm / eval.id, eval.gds / eval.id],
    }
}

/// The chain from a lever through the operating point to the small-signal elements and the
/// bias currents, by the direct method on the DC Jacobian (`circuit/bias_response.rs`),
/// factorised once for every lever: one solve per lever gives the change of every node
/// voltage, and each transistor's elements follow from its own two controlling voltages
/// through slopes taken once per transistor. A resistor's or a controlled source's change
/// of the residual is exact; a lever that acts everywhere (a model parameter, a supply, the
/// temperature, the source resistance) is taken by differences of the residual and of the
/// models at the unchanged solution — a few levers, each costing one netlist, never a
/// Newton solve. The adjoint alternative (one transposed solve per figure) would save
/// nothing here: every transistor's bias current is a figure, as many as the levers grow.
struct DcChain<'a> {
    design: &'a Design,
    net: &'a crate::circuit::netlist::Netlist,
    lin: &'a LinearNetwork,
    response: crate::circuit::bias_response::BiasResponse,
    /// Per transistor: ∂θ/∂v_k of each of its elements, and ∂ln I/∂v_k, for its two
    /// controls k.
    slopes: Vec<([Vec<f64>; 2], [f64; 2])>,
    /// Netlist element of each name.
    elements: std::collections::HashMap<&'a str, usize>,
    /// Small-signal element of each name.
    linear: std::collections::HashMap<&'a str, usize>,
}

impl<'a> DcChain<'a> {
    fn new(
        design: &'a Design,
        nominal: &'a crate::analysis::evaluate::Differentiated,
    ) -> Option<DcChain<'a>> {
        use crate::circuit::{operating_point, small_signal};
        let (net, lin) = (&nominal.net, &nominal.lin);
        let op = nominal.op.as_ref()?;
        let response = crate::circuit::bias_response::BiasResponse::new(net, op)?;
        let vt = op.thermal_voltage_v;
        // The device's element values at controls v.
        let values = |k: usize, v: [f64; 2]| -> Option<Vec<f64>> {
            let el = &net.elements[k];
            let bias = operating_point::device_bias(el, v, vt)?;
            let (els, _) = small_signal::device_elements(el, &bias.state, vt)?;
            Some(els.iter().map(|e| e.value().unwrap_or(0.0)).collect())
        };
        let mut slopes = Vec::new();
        for (j, (k, v)) in response.device_controls(net).into_iter().enumerate() {
            let size = lin.devices.get(j)?.len();
            let bias = operating_point::device_bias(&net.elements[k], v, vt)?;
            let ln_current = ln_current_slopes(&bias.state);
            if !ln_current.iter().all(|s| s.is_finite()) {
                return None;
            }
            let step = CONTROL_STEP / (1.0 / vt + ln_current[0].abs().max(ln_current[1].abs()));
            let mut per = [vec![0.0; size], vec![0.0; size]];
            for c in 0..2 {
                for &(m, w) in FIVE_POINT {
                    let mut moved = v;
                    moved[c] += m * step;
                    let at = values(k, moved)?;
                    if at.len() != size {
                        return None;
                    }
                    for (s, value) in per[c].iter_mut().zip(at) {
                        *s += w * value / step;
                    }
                }
            }
            slopes.push((per, ln_current));
        }
        Some(DcChain {
            design,
            net,
            lin,
            response,
            slopes,
            elements: net.elements.iter().enumerate().map(|(k, e)| (e.name(), k)).collect(),
            linear: lin
                .elements
                .iter()
                .enumerate()
                .filter_map(|(k, e)| Some((element_name(e)?, k)))
                .collect(),
        })
    }

    /// ∂θ/∂ln p over the elements and ∂ln I/∂ln p of each bias current for lever `i`; None
    /// when a difference changes the network's make-up.
    fn chain(&self, levers: &[Lever], i: usize) -> Option<(Vec<f64>, Vec<f64>)> {
        let lin = self.lin;
        let mut moves = vec![0.0; lin.elements.len()];
        let mut bias = vec![0.0; self.slopes.len()];
        let own = levers[i].part().and_then(|p| {
            let name = self.design.parts[p].name.as_str();
            let k = *self.elements.get(name)?;
            Some((self.response.part_residual(self.net, k)?, self.linear.get(name).copied()))
        });
        let residual = match own {
            Some((r, element)) => {
                if let Some(m) = element {
                    moves[m] = match lin.elements[m] {
                        Linear::Conductance { g, .. } => -g,
                        ref other => other.value()?,
                    };
                }
                r
            }
            None => self.acting_everywhere(levers, i, &mut moves, &mut bias)?,
        };
        let dx = self.response.solve(&residual);
        let dv = self.response.device_moves(self.net, &dx);
        for (j, ((per, ln_current), d)) in self.slopes.iter().zip(&dv).enumerate() {
            for c in 0..2 {
                for (m, s) in lin.devices[j].clone().zip(&per[c]) {
                    moves[m] += s * d[c];
                }
                bias[j] += ln_current[c] * d[c];
            }
        }
        Some((moves, bias))
    }

    /// For a lever that acts everywhere: adds its direct effect at the unchanged solution
    /// to `moves` and `bias`, and returns ∂R/∂ln p — each by fourth-order differences of
    /// the changed netlist, the residual, and the models at the solution.
    fn acting_everywhere(
        &self,
        levers: &[Lever],
        i: usize,
        moves: &mut [f64],
        bias: &mut [f64],
    ) -> Option<Vec<f64>> {
        use crate::circuit::{netlist::Netlist, small_signal};
        let h = FOURTH_ORDER.step;
        let mut residual: Vec<f64> = Vec::new();
        for &(k, w) in FOURTH_ORDER.points {
            let net = Netlist::from_design(&perturbed(self.design, levers, &[(i, (k * h).exp())]));
            let r = self.response.residual(&net);
            residual.resize(r.len(), 0.0);
            for (a, b) in residual.iter_mut().zip(&r) {
                *a += w * b / h;
            }
            let op = self.response.devices_at(&net);
            let (l, _) = small_signal::linearize(&net, Some(&op));
            let same = l.elements.len() == self.lin.elements.len()
                && l.elements
                    .iter()
                    .zip(&self.lin.elements)
                    .all(|(a, b)| element_name(a) == element_name(b));
            if !same || op.devices.len() != bias.len() {
                return None;
            }
            for (m, e) in moves.iter_mut().zip(&l.elements) {
                *m += w * e.value().unwrap_or(0.0) / h;
            }
            for (b, d) in bias.iter_mut().zip(&op.devices) {
                let current = crate::analysis::evaluate::bias_current(&d.state);
                *b += w * if current > 0.0 { current.ln() } else { f64::NAN } / h;
            }
        }
        Some(residual)
    }
}

/// S by central differences of whole evaluations, with the operating point re-solved at
/// each step: two full evaluations per lever. The fallback for a lever that changes the
/// network's make-up.
pub fn sensitivities_by_differences(
    design: &Design,
    levers: &[Lever],
    figs: &[Figure],
) -> Vec<Vec<Option<f64>>> {
    differences(design, levers, figs, &SECOND_ORDER)
}

/// S by fourth-order central differences of whole evaluations (four per lever): the
/// reference the adjoint sensitivities are checked against.
pub fn sensitivities_by_precise_differences(
    design: &Design,
    levers: &[Lever],
    figs: &[Figure],
) -> Vec<Vec<Option<f64>>> {
    differences(design, levers, figs, &REFERENCE)
}

fn differences(
    design: &Design,
    levers: &[Lever],
    figs: &[Figure],
    stencil: &Stencil,
) -> Vec<Vec<Option<f64>>> {
    let all = levers::levers(design);
    levers
        .iter()
        .map(|lever| {
            let i = all.iter().position(|l| l.name == lever.name);
            let h = stencil.step;
            let runs: Vec<(f64, Option<Metrics>)> = stencil
                .points
                .iter()
                .map(|&(k, w)| {
                    let m = i.and_then(|i| {
                        metrics(&perturbed(design, &all, &[(i, (k * h).exp())])).ok()
                    });
                    (w, m)
                })
                .collect();
            figs.iter()
                .map(|f| {
                    let mut sum = 0.0;
                    for (w, m) in &runs {
                        let v = m.as_ref().and_then(|m| f.of(m)).filter(|v| *v > 0.0)?;
                        sum += w * v.ln();
                    }
                    Some(sum / h)
                })
                .collect()
        })
        .collect()
}

/// The worst case of one figure.
#[derive(Clone, Debug, Serialize)]
pub struct WorstCase {
    /// The figure (`upper_cutoff`, …).
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

/// The worst case of each figure over the toleranced levers.
pub fn worst_case(
    design: &Design,
    levers: &[Lever],
    figs: &[Figure],
    s: &[Vec<Option<f64>>],
    nominal: &Metrics,
    names: &[String],
) -> Vec<WorstCase> {
    // Each figure's bound and its two corners, chosen by the signs of its sensitivities: a
    // corner is a sign per lever (0 for one without a tolerance or a sensitivity), a byte
    // each, so a network of thousands of parts keeps its corners small.
    let plans: Vec<(usize, f64, f64, Vec<i8>)> = figs
        .iter()
        .enumerate()
        .filter_map(|(k, f)| {
            let y0 = f.of(nominal)?;
            let mut bound = 0.0;
            let mut signs = vec![0i8; levers.len()];
            for (i, l) in levers.iter().enumerate() {
                let (Some(t), Some(sens)) = (l.tolerance, s[i][k]) else { continue };
                bound += sens.abs() * t.fraction;
                signs[i] = if sens >= 0.0 { 1 } else { -1 };
            }
            Some((k, y0, bound, signs))
        })
        .collect();
    // Figures whose sensitivities share their signs share their corners: each distinct
    // corner is evaluated once, in parallel, and collected in order — in full when any
    // figure but a bias current needs it, else the operating point alone (a chain of many
    // stages has as many bias currents as transistors, each with its own corners).
    let mut distinct: Vec<Vec<i8>> = Vec::new();
    let mut full: Vec<bool> = Vec::new();
    let mut index: std::collections::HashMap<Vec<i8>, usize> = std::collections::HashMap::new();
    let mut which: Vec<[usize; 2]> = Vec::with_capacity(plans.len());
    for (k, _, _, signs) in &plans {
        let mut at = [0; 2];
        let down: Vec<i8> = signs.iter().map(|s| -s).collect();
        for (slot, corner) in at.iter_mut().zip([signs.clone(), down]) {
            *slot = *index.entry(corner.clone()).or_insert_with(|| {
                distinct.push(corner);
                full.push(false);
                distinct.len() - 1
            });
            full[*slot] |= !matches!(figs[*k], Figure::Bias(_));
        }
        which.push(at);
    }
    let factors = |signs: &[i8]| -> Vec<(usize, f64)> {
        signs
            .iter()
            .enumerate()
            .filter(|(_, s)| **s != 0)
            .filter_map(|(i, s)| Some((i, 1.0 + f64::from(*s) * levers[i].tolerance?.fraction)))
            .collect()
    };
    // Every corner's Newton starts at the nominal operating point.
    let near = crate::analysis::evaluate::operating_point(design);
    let evaluated: Vec<Option<Metrics>> = distinct
        .par_iter()
        .zip(&full)
        .map(|(c, full)| {
            let d = perturbed(design, levers, &factors(c));
            if *full {
                crate::analysis::evaluate::metrics_near(&d, near.as_ref()).ok()
            } else {
                let bias = crate::analysis::evaluate::bias_currents(&d, near.as_ref())?;
                Some(Metrics { bias, ..Metrics::default() })
            }
        })
        .collect();
    plans
        .iter()
        .zip(&which)
        .map(|((k, y0, bound, _), [high, low])| {
            let f = figs[*k];
            let value = |c: usize| evaluated[c].as_ref().and_then(|m| f.of(m));
            WorstCase {
                figure: f.key(names),
                nominal: *y0,
                linear_bound: *bound,
                high_corner: value(*high),
                low_corner: value(*low),
            }
        })
        .collect()
}

/// One Monte Carlo run's factors: each toleranced lever drawn from its distribution, from
/// the run's own ChaCha8 stream (so run k is the same on any machine and thread count).
pub fn draw(levers: &[Lever], seed: u64, run: u64) -> Vec<(usize, f64)> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(run);
    let mut out = Vec::new();
    for (i, l) in levers.iter().enumerate() {
        let Some(t) = l.tolerance else { continue };
        let u: f64 = rng.random();
        let factor = match t.distribution {
            Distribution::Uniform => 1.0 + t.fraction * (2.0 * u - 1.0),
            Distribution::Gaussian => {
                // Box–Muller with σ = t/3 (the tolerance is the 3σ point).
                let v: f64 = rng.random();
                let z = (-2.0 * (1.0 - u).ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos();
                1.0 + t.fraction / 3.0 * z
            }
        };
        out.push((i, factor));
    }
    out
}

/// Percentiles of one figure over the converged runs.
#[derive(Clone, Debug, Serialize)]
pub struct Spread {
    /// The figure.
    pub figure: String,
    /// Mean.
    pub mean: f64,
    /// Standard deviation (n − 1).
    pub std_dev: f64,
    /// 1st, 5th, 50th, 95th and 99th percentiles (linear between order statistics).
    pub percentiles: [f64; 5],
    /// Runs in which the figure existed.
    pub count: usize,
}

/// Monte Carlo results.
#[derive(Clone, Debug, Serialize)]
pub struct MonteCarlo {
    /// Runs asked for.
    pub runs: u32,
    /// The seed.
    pub seed: u64,
    /// Runs whose evaluation failed (bias did not converge, …), by index.
    pub failed_runs: Vec<u64>,
    /// Spread of each figure.
    pub spreads: Vec<Spread>,
    /// Per-requirement yield (name, fraction of all runs that pass).
    pub yields: Vec<(String, f64)>,
    /// Fraction of all runs that pass every requirement.
    pub yield_all: Option<f64>,
    /// Each run's figures (None for a failed run), for histograms.
    #[serde(skip)]
    pub samples: Vec<Option<Metrics>>,
}

/// Linear-interpolation percentile of sorted data (as numpy's default).
pub fn percentile(sorted: &[f64], p: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let x = p / 100.0 * (sorted.len() - 1) as f64;
    let (lo, hi) = (x.floor() as usize, x.ceil() as usize);
    sorted[lo] + (sorted[hi] - sorted[lo]) * (x - lo as f64)
}

/// Runs `runs` Monte Carlo evaluations with the design's seed, and the yields of its
/// requirements; `progress` is called now and then with the count done.
pub fn monte_carlo(
    design: &Design,
    levers: &[Lever],
    figs: &[Figure],
    names: &[String],
    runs: u32,
    progress: &(dyn Fn(Progress) + Sync),
) -> MonteCarlo {
    let seed = design.analysis.seed;
    let requirements = &design.requirements;
    let done = std::sync::atomic::AtomicU64::new(0);
    // Every run's Newton starts at the nominal operating point.
    let near = crate::analysis::evaluate::operating_point(design);
    let samples: Vec<Option<Metrics>> = (0..runs as u64)
        .into_par_iter()
        .map(|k| {
            let sample = perturbed(design, levers, &draw(levers, seed, k));
            let m = crate::analysis::evaluate::metrics_near(&sample, near.as_ref()).ok();
            let n = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
            if n % 64 == 0 {
                progress(Progress { stage: Stage::MonteCarlo, done: n, total: runs as u64 });
            }
            m
        })
        .collect();
    let failed_runs: Vec<u64> =
        samples.iter().enumerate().filter(|(_, m)| m.is_none()).map(|(k, _)| k as u64).collect();
    let spreads = figs
        .iter()
        .filter_map(|f| {
            let mut v: Vec<f64> = samples.iter().flatten().filter_map(|m| f.of(m)).collect();
            if v.len() < 2 {
                return None;
            }
            let n = v.len() as f64;
            let mean = v.iter().sum::<f64>() / n;
            let var = v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
            v.sort_by(f64::total_cmp);
            Some(Spread {
                figure: f.key(names),
                mean,
                std_dev: var.sqrt(),
                percentiles: [1.0, 5.0, 50.0, 95.0, 99.0].map(|p| percentile(&v, p)),
                count: v.len(),
            })
        })
        .collect();
    let checks: Vec<(&str, Option<crate::design::Limits>, Figure)> = requirements
        .items()
        .into_iter()
        .map(|(name, limits)| (name, limits, Figure::of_requirement(name)))
        .collect();
    let within = |l: &crate::design::Limits, v: Option<f64>| v.is_some_and(|v| l.contains(v));
    let total = samples.len().max(1) as f64;
    let mut yields = Vec::new();
    let mut any = false;
    for (name, limits, fig) in &checks {
        if let Some(l) = limits {
            any = true;
            let pass =
                samples.iter().filter(|m| m.as_ref().is_some_and(|m| within(l, fig.of(m)))).count();
            yields.push((name.to_string(), pass as f64 / total));
        }
    }
    let yield_all = any.then(|| {
        samples
            .iter()
            .filter(|m| {
                m.as_ref().is_some_and(|m| {
                    checks.iter().all(|(_, l, fig)| l.as_ref().is_none_or(|l| within(l, fig.of(m))))
                })
            })
            .count() as f64
            / total
    });
    MonteCarlo { runs, seed, failed_runs, spreads, yields, yield_all, samples }
}

/// A lever's sensitivities.
#[derive(Clone, Debug, Serialize)]
pub struct LeverSensitivity {
    /// The lever.
    #[serde(flatten)]
    pub lever: Lever,
    /// S of each figure (in the order of `Study::figures`), null where undefined.
    pub s: Vec<Option<f64>>,
}

/// The whole tolerance study of a design.
#[derive(Clone, Debug, Serialize)]
pub struct Study {
    /// Relative step of the central differences.
    pub step: f64,
    /// The figures, by results.json name.
    pub figures: Vec<String>,
    /// Every lever with its sensitivities.
    pub levers: Vec<LeverSensitivity>,
    /// The worst case of each figure.
    pub worst_case: Vec<WorstCase>,
    /// Monte Carlo, when runs > 0.
    pub monte_carlo: Option<MonteCarlo>,
}

impl Study {
    /// S of `lever` for the figure named `figure`.
    pub fn s(&self, lever: usize, figure: &str) -> Option<f64> {
        let k = self.figures.iter().position(|f| f == figure)?;
        self.levers[lever].s[k]
    }
}

/// Sensitivities, worst case and Monte Carlo of `design` around its nominal `metrics`.
pub fn study(
    design: &Design,
    nominal: &Metrics,
    device_names: &[String],
    runs: u32,
    progress: &(dyn Fn(Progress) + Sync),
) -> Study {
    let all = levers(design);
    let figs = figures(nominal);
    let s = sensitivities_reporting(design, &all, &figs, progress);
    progress(Progress { stage: Stage::WorstCase, done: 0, total: 0 });
    let worst = worst_case(design, &all, &figs, &s, nominal, device_names);
    let mc = (runs > 0).then(|| {
        progress(Progress { stage: Stage::MonteCarlo, done: 0, total: runs as u64 });
        monte_carlo(design, &all, &figs, device_names, runs, progress)
    });
    Study {
        step: FOURTH_ORDER.step,
        figures: figs.iter().map(|f| f.key(device_names)).collect(),
        levers: all.into_iter().zip(s).map(|(lever, s)| LeverSensitivity { lever, s }).collect(),
        worst_case: worst,
        monte_carlo: mc,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::{Tolerance, load};

    fn rc_low_pass(tolerance: &str) -> Design {
        let text = format!(
            "tauweave: 1\ndesign: {{id: t, title: tolerance test, revision: A, date: 2026-12-01}}\n\
             signal: {{at: in, resistance: 1k}}\noutput: {{at: out}}\nparts:\n\
             \x20 R1: {{kind: resistor, value: 9k, between: [in, out], {tolerance}}}\n\
             \x20 RL: {{kind: resistor, value: 90k, between: [out, gnd]}}\n\
             \x20 C1: {{kind: capacitor, value: 1n, between: [out, gnd], role: load, tolerance: 10 %}}\n"
        );
        load(&text).design.expect("the test design reads")
    }

    #[test]
    fn percentiles_interpolate_between_order_statistics() {
        // numpy.percentile's default ("linear") method, from its documentation: the value at
        // rank p/100·(n − 1), interpolated between neighbours.
        let x = [1.0, 2.0, 3.0, 4.0];
        assert_eq!(percentile(&x, 0.0), 1.0);
        assert_eq!(percentile(&x, 25.0), 1.75);
        assert_eq!(percentile(&x, 50.0), 2.5);
        assert_eq!(percentile(&x, 100.0), 4.0);
        assert!(percentile(&[], 50.0).is_nan());
    }

    #[test]
    fn a_run_draws_the_same_factors_every_time_and_stays_inside_a_uniform_tolerance() {
        let d = rc_low_pass("tolerance: 5 %, distribution: uniform");
        let all = levers(&d);
        for run in 0..200 {
            let a = draw(&all, 7, run);
            assert_eq!(a, draw(&all, 7, run));
            for (i, factor) in a {
                let t: Tolerance = all[i].tolerance.unwrap();
                if t.distribution == Distribution::Uniform {
                    assert!((factor - 1.0).abs() <= t.fraction, "{factor}");
                }
            }
        }
        assert_ne!(draw(&all, 7, 0), draw(&all, 7, 1), "each run has its own stream");
    }

    #[test]
    fn a_single_pole_moves_inversely_with_its_resistance_and_capacitance() {
        // Common practice: f_H = 1/(2π R C) with R = (R_s + R1) ∥ R_L, so S(f_H, C1) = −1
        // exactly, and the mid-band gain does not depend on C1 at all: S(gain, C1) = 0.
        let d = rc_low_pass("tolerance: 1 %");
        let all = levers(&d);
        let nominal = metrics(&d).unwrap();
        let figs = figures(&nominal);
        let s = sensitivities(&d, &all, &figs);
        let c1 = all.iter().position(|l| l.name == "C1").unwrap();
        let k = figs.iter().position(|f| *f == Figure::FHigh).unwrap();
        let g = figs.iter().position(|f| *f == Figure::Gain).unwrap();
        assert!((s[c1][k].unwrap() + 1.0).abs() < 1e-6, "{:?}", s[c1][k]);
        assert!(s[c1][g].unwrap().abs() < 1e-9, "{:?}", s[c1][g]);
    }

    #[test]
    fn the_worst_corners_of_a_single_pole_take_every_part_to_its_limit() {
        // Common practice: f_H = 1/(2π R C) with R = (R_s + R1) ∥ R_L. Raising any resistance
        // or C1 lowers f_H, so the low corner has each toleranced lever at +t and the high
        // corner each at −t; with one pole the exact −3 dB point is 1/(2π R C) itself.
        let d = rc_low_pass("tolerance: 1 %");
        let all = levers(&d);
        let nominal = metrics(&d).unwrap();
        let figs = figures(&nominal);
        let s = sensitivities(&d, &all, &figs);
        let w = worst_case(&d, &all, &figs, &s, &nominal, &[]);
        let fh = w.iter().find(|w| w.figure == "upper_cutoff").unwrap();
        let t = |name: &str| {
            all.iter()
                .find(|l| l.name == name)
                .and_then(|l| l.tolerance)
                .map_or(0.0, |t| t.fraction)
        };
        let f_at = |sign: f64| {
            let k = |name: &str| 1.0 + sign * t(name);
            let series = 1e3 * k("signal.resistance") + 9e3 * k("R1");
            let load = 90e3 * k("RL");
            let r = series * load / (series + load);
            1.0 / (2.0 * std::f64::consts::PI * r * 1e-9 * k("C1"))
        };
        assert_eq!(t("C1"), 0.1);
        assert_eq!(t("R1"), 0.01);
        let low = fh.low_corner.unwrap() / f_at(1.0);
        let high = fh.high_corner.unwrap() / f_at(-1.0);
        assert!((low - 1.0).abs() < 1e-6 && (high - 1.0).abs() < 1e-6, "{low} {high}");
    }
}

#[cfg(test)]
mod adjoint_tests {
    use super::*;

    /// A bias current's worst-case corner is solved from the operating point alone, Newton
    /// started from the nominal solution; a full evaluation solves it from zero. Both are
    /// the same root of the same equations: they agree to the Newton tolerance.
    #[test]
    fn a_bias_only_corner_matches_the_full_evaluation_of_that_corner() {
        for name in ["designs/rx-preamp-ce.yaml", "designs/if-cascode.yaml"] {
            let d = crate::design::load(&std::fs::read_to_string(name).unwrap()).design.unwrap();
            let all = levers(&d);
            let near = crate::analysis::evaluate::operating_point(&d).expect("bias converges");
            // Every toleranced lever to the edge of its band, alternately up and down.
            let corner: Vec<(usize, f64)> = all
                .iter()
                .enumerate()
                .filter_map(|(i, l)| Some((i, l.tolerance?.fraction)))
                .enumerate()
                .map(|(n, (i, t))| (i, if n % 2 == 0 { 1.0 + t } else { 1.0 - t }))
                .collect();
            assert!(corner.len() > 3, "{name}: too few toleranced levers to move");
            let moved = perturbed(&d, &all, &corner);
            let alone = crate::analysis::evaluate::bias_currents(&moved, Some(&near)).unwrap();
            let full = metrics(&moved).unwrap().bias;
            let nominal = metrics(&d).unwrap().bias;
            assert_eq!(alone.len(), full.len());
            for ((a, b), n) in alone.iter().zip(&full).zip(&nominal) {
                assert!((a - b).abs() <= 1e-9 * b, "{name}: {a} vs {b}");
                assert!((b - n).abs() > 1e-6 * n, "{name}: the corner did not move the bias");
            }
        }
    }

    /// The adjoint sensitivities against fourth-order central differences of whole
    /// evaluations (Director & Rohrer's method against the definition of the derivative):
    /// every lever and figure of every example design.
    #[test]
    fn adjoint_sensitivities_match_central_differences_on_every_example() {
        let mut worst: (f64, String) = (0.0, String::new());
        for entry in std::fs::read_dir("designs").unwrap() {
            let path = entry.unwrap().path();
            if path.extension().is_none_or(|e| e != "yaml") {
                continue; // designs/house: read under its project file, tested in the suite
            }
            let d = crate::design::load(&std::fs::read_to_string(&path).unwrap()).design.unwrap();
            let all = levers(&d);
            let figs = figures(&metrics(&d).unwrap());
            let adjoint = sensitivities(&d, &all, &figs);
            let reference = sensitivities_by_precise_differences(&d, &all, &figs);
            for (i, lever) in all.iter().enumerate() {
                for (j, f) in figs.iter().enumerate() {
                    let (a, b) = (adjoint[i][j], reference[i][j]);
                    assert_eq!(a.is_some(), b.is_some(), "{path:?} {} {f:?}", lever.name);
                    if let (Some(a), Some(b)) = (a, b) {
                        let gap = (a - b).abs();
                        if gap > worst.0 {
                            worst = (gap, format!("{path:?} {} {f:?}: {a} vs {b}", lever.name));
                        }
                    }
                }
            }
        }
        assert!(worst.0 < 1e-6, "largest gap {:e}: {}", worst.0, worst.1);
        // Two different computations never agree to the last bit: a gap of exactly zero
        // would mean the adjoint path was not taken.
        assert!(worst.0 > 0.0, "no gap at all: the adjoint path was not taken");
        eprintln!("largest gap {:e}: {}", worst.0, worst.1);
    }

    /// A 70-section RC ladder has over 60 unknowns, mostly zero: its responses and its
    /// adjoint solves go through the sparse LU. The sensitivities still match fourth-order
    /// differences of whole evaluations.
    #[test]
    fn adjoint_sensitivities_of_a_sparse_ladder_match_differences() {
        let n = 70;
        let mut parts = String::new();
        for i in 1..=n {
            parts.push_str(&format!(
                "  R{i}: {{kind: resistor, value: 1k, between: [n{i}, n{}], tolerance: 1 %}}\n  \
                 C{i}: {{kind: capacitor, value: 10p, between: [n{}, gnd], role: parasitic}}\n",
                i + 1,
                i + 1
            ));
        }
        let text = format!(
            "tauweave: 1\ndesign: {{id: ladder, title: RC ladder, revision: A, date: 2026-12-03}}\n\
             signal: {{at: n1, resistance: 1k}}\noutput: {{at: n{}, load_resistance: 10k}}\n\
             parts:\n{parts}",
            n + 1
        );
        let d = crate::design::load(&text).design.unwrap();
        let all = levers(&d);
        let figs = figures(&metrics(&d).unwrap());
        let (a, b) =
            (sensitivities(&d, &all, &figs), sensitivities_by_precise_differences(&d, &all, &figs));
        let mut compared = 0;
        for (i, lever) in all.iter().enumerate() {
            for (j, f) in figs.iter().enumerate() {
                if let (Some(x), Some(y)) = (a[i][j], b[i][j]) {
                    assert!((x - y).abs() < 1e-6, "{} {f:?}: {x} vs {y}", lever.name);
                    compared += 1;
                }
            }
        }
        assert!(compared > 100, "{compared}");
    }
}
