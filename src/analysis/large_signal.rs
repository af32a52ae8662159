//! Signal handling: how large a signal the stage takes before it clips or distorts.
//!
//! In: the netlist, its operating point and the mid-band figures. Out: a
//! [`LargeSignalReport`] from the quasi-static transfer ([`crate::circuit::quasi_static`]):
//! the output swing on each side and the device edge that ends it, the input at which the
//! first edge is reached, harmonic distortion at the stated amplitude, the input 1 dB
//! compression point, the third-order intercept extrapolated from the transfer's power
//! series at the bias, and the dynamic range from the noise floor to compression.
//!
//! Harmonics come from Chebyshev nodes: the output at A·cos θ_k, θ_k = π(k + ½)/N, is one
//! period of the waveform sampled uniformly in phase, so its cosine coefficients are the
//! harmonic amplitudes (exact up to aliasing of harmonic 2N ∓ n; Trefethen, Approximation
//! Theory and Approximation Practice, ch. 3). No I/O.

use std::f64::consts::PI;

use crate::analysis::linear::brent;
use crate::circuit::netlist::Netlist;
use crate::circuit::operating_point::OperatingPoint;
use crate::circuit::quasi_static::{Edge, Held, Path, limit_node};

/// Chebyshev nodes for the distortion at the stated amplitude; the THD sums harmonics 2 to
/// 31 (half the nodes, well clear of the aliasing from 128 ∓ n).
const HARMONIC_NODES: usize = 64;
/// The smallest |mid-band gain| the distortion and compression figures are taken against,
/// V/V: below it the stage passes almost nothing linearly and ratios to its fundamental mean
/// nothing.
const MIN_GAIN: f64 = 1e-6;
/// Chebyshev nodes per amplitude in the compression search.
const COMPRESSION_NODES: usize = 24;
/// Chebyshev nodes of the power-series fit at the bias.
const SERIES_NODES: usize = 16;
/// Points on each side of the transfer curve drawn in the review.
const CURVE_POINTS: usize = 30;
/// Points of the output waveform drawn over one period.
const WAVEFORM_POINTS: usize = 97;
/// Growth of the amplitude per step of the compression bracket.
const GROWTH: f64 = 1.5;
/// The gain drop that defines the compression point, dB (common practice).
pub const COMPRESSION_DB: f64 = 1.0;

/// What limits the swing on one side.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct SwingLimit {
    /// The transistor that reaches an edge of its bias region first.
    pub part: String,
    /// Which edge.
    pub edge: Edge,
    /// Its collector or drain node.
    pub node: String,
    /// The source EMF there, V (signed).
    pub input_v: f64,
    /// The output's change from its bias value there, V (signed).
    pub output_v: f64,
}

/// The output swing about the bias on each side.
#[derive(Clone, Debug, Default, PartialEq, serde::Serialize)]
pub struct Swing {
    /// How far the output rises before the first edge, V.
    pub positive_v: Option<f64>,
    /// How far it falls, V (a magnitude).
    pub negative_v: Option<f64>,
    /// What ends the rise.
    pub positive_limit: Option<SwingLimit>,
    /// What ends the fall.
    pub negative_limit: Option<SwingLimit>,
}

impl Swing {
    /// The largest peak of a symmetric output that stays inside both limits, V; None unless
    /// both sides have one.
    pub fn symmetric_peak_v(&self) -> Option<f64> {
        Some(self.positive_v?.min(self.negative_v?))
    }
}

/// The transfer's power series at the bias: y ≈ a₁v + a₂v² + a₃v³ about zero EMF.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Series {
    /// V/V (the small-signal mid-band gain).
    pub a1: f64,
    /// 1/V.
    pub a2: f64,
    /// 1/V².
    pub a3: f64,
    /// Half-width of the EMF interval it was fitted on, V.
    pub fitted_over_v: f64,
}

impl Series {
    /// HD2 ≈ |a₂|A/(2|a₁|) at peak amplitude `a` (Gray & Meyer, distortion section).
    pub fn hd2(&self, a: f64) -> f64 {
        if self.a1 == 0.0 { 0.0 } else { (self.a2 * a / (2.0 * self.a1)).abs() }
    }

    /// HD3 ≈ |a₃|A²/(4|a₁|).
    pub fn hd3(&self, a: f64) -> f64 {
        if self.a1 == 0.0 { 0.0 } else { (self.a3 * a * a / (4.0 * self.a1)).abs() }
    }

    /// The input third-order intercept, peak EMF per tone: √(4/3·|a₁/a₃|) (Razavi, RF
    /// Microelectronics, ch. 2); None when the series has no third-order term.
    pub fn iip3(&self) -> Option<f64> {
        let d = self.fitted_over_v;
        (self.a3.abs() * d * d > 1e-9 * self.a1.abs())
            .then(|| (4.0 / 3.0 * (self.a1 / self.a3).abs()).sqrt())
    }
}

/// Distortion at one amplitude.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Distortion {
    /// Peak EMF, V.
    pub amplitude_v: f64,
    /// Fundamental at the output, peak V.
    pub fundamental_v: f64,
    /// Second harmonic over the fundamental, dB (None below 1e-12).
    pub hd2_db: Option<f64>,
    /// Third harmonic over the fundamental, dB.
    pub hd3_db: Option<f64>,
    /// √(Σₙ₌₂ Hₙ²)/H₁, %.
    pub thd_percent: f64,
    /// Harmonic amplitudes, peak V, from the fundamental up.
    #[serde(skip)]
    pub harmonics: Vec<f64>,
    /// The output change over one period: (phase in degrees, output, the ideal a₁·A·cos).
    #[serde(skip)]
    pub waveform: Vec<[f64; 3]>,
}

/// The signal-handling review.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct LargeSignalReport {
    /// The frequency the quasi-static view stands for, Hz.
    pub frequency_hz: f64,
    /// True when that frequency lies a decade inside both cut-offs, where holding the
    /// coupling capacitors and dropping the device capacitances is a good model.
    pub well_inside_band: bool,
    /// The stated peak EMF, V.
    pub input_amplitude_v: Option<f64>,
    /// The output swing and what ends it.
    pub output_swing: Swing,
    /// The smaller of the EMFs at which either side reaches its limit, V.
    pub clipping_input_v: Option<f64>,
    /// Distortion at the stated amplitude.
    pub distortion: Option<Distortion>,
    /// The power series at the bias.
    pub series: Option<Series>,
    /// The EMF at which the fundamental's gain has fallen 1 dB, peak V.
    pub compression_1db_input_v: Option<f64>,
    /// Extrapolated input third-order intercept, peak V per tone.
    pub iip3_v: Option<f64>,
    /// From the input-referred noise over the band to the 1 dB compression point (both
    /// rms), dB.
    pub dynamic_range_db: Option<f64>,
    /// The transfer: (EMF, output change), V, across both limits.
    #[serde(skip)]
    pub curve: Vec<[f64; 2]>,
    /// Transistors outside their normal region at the bias (not watched for limits).
    pub unwatched: Vec<String>,
}

/// What the caller knows already.
pub struct Request<'a> {
    /// The netlist.
    pub net: &'a Netlist,
    /// Its operating point.
    pub op: &'a OperatingPoint,
    /// The small-signal mid-band gain, V/V (signed).
    pub gain: f64,
    /// The stated peak EMF, V.
    pub amplitude_v: Option<f64>,
    /// The frequency of interest, Hz.
    pub frequency_hz: f64,
    /// The exact cut-offs, Hz.
    pub cutoffs: (Option<f64>, Option<f64>),
    /// rms noise referred to the source EMF over the band, V.
    pub input_noise_rms_v: Option<f64>,
}

/// Which figures a caller needs (the tolerance study asks for the limited ones only).
#[derive(Clone, Copy, Debug, Default)]
pub struct Wanted {
    /// Swing limits.
    pub swing: bool,
    /// Distortion at the stated amplitude.
    pub distortion: bool,
    /// The compression point.
    pub compression: bool,
}

/// The lean figures a requirement may limit.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Figures {
    /// The symmetric output swing, peak V.
    pub output_swing_v: Option<f64>,
    /// THD at the stated amplitude, %.
    pub thd_percent: Option<f64>,
    /// The 1 dB compression EMF, peak V.
    pub compression_v: Option<f64>,
}

/// The whole review; None without transistors or when the held circuit will not solve.
pub fn review(req: &Request) -> Option<LargeSignalReport> {
    let mut held = Held::new(req.net, req.op)?;
    let scale = input_scale(req.net, req.gain);
    let output_swing = swing(&mut held, req.net, scale);
    let clipping_input_v = clipping_input(&output_swing);
    let reach = clipping_input_v.unwrap_or(scale);
    let amplifies = req.gain.abs() >= MIN_GAIN;
    let series = series(&mut held, 0.25 * reach).filter(|_| amplifies);
    let distortion = req
        .amplitude_v
        .filter(|_| amplifies)
        .and_then(|a| distortion(&mut held, a, HARMONIC_NODES, req.gain));
    let compression_1db_input_v =
        if amplifies { compression(&mut held, req.gain, reach, scale) } else { None };
    let dynamic_range_db = compression_1db_input_v
        .zip(req.input_noise_rms_v)
        .filter(|(_, n)| *n > 0.0)
        .map(|(c, n)| 20.0 * (c / 2f64.sqrt() / n).log10());
    let span = [output_swing.positive_limit.as_ref(), output_swing.negative_limit.as_ref()]
        .iter()
        .flatten()
        .map(|l| l.input_v.abs())
        .fold(req.amplitude_v.unwrap_or(0.0), f64::max);
    let curve = curve(&mut held, 1.5 * if span > 0.0 { span } else { scale });
    let (lo, hi) = req.cutoffs;
    let f = req.frequency_hz;
    Some(LargeSignalReport {
        frequency_hz: f,
        well_inside_band: lo.is_none_or(|l| f >= 10.0 * l) && hi.is_none_or(|h| f <= 0.1 * h),
        input_amplitude_v: req.amplitude_v,
        output_swing,
        clipping_input_v,
        distortion,
        iip3_v: series.and_then(|s| s.iip3()),
        series,
        compression_1db_input_v,
        dynamic_range_db,
        curve,
        unwatched: held.unwatched(),
    })
}

/// The figures `wanted`, for tolerance work.
pub fn figures(req: &Request, wanted: Wanted) -> Figures {
    if !(wanted.swing || wanted.distortion || wanted.compression) {
        return Figures::default();
    }
    let Some(mut held) = Held::new(req.net, req.op) else { return Figures::default() };
    let scale = input_scale(req.net, req.gain);
    let needs_swing = wanted.swing || wanted.compression;
    let s = if needs_swing { swing(&mut held, req.net, scale) } else { Swing::default() };
    let reach = clipping_input(&s).unwrap_or(scale);
    let amplifies = req.gain.abs() >= MIN_GAIN;
    Figures {
        output_swing_v: s.symmetric_peak_v().filter(|_| wanted.swing),
        thd_percent: req
            .amplitude_v
            .filter(|_| wanted.distortion && amplifies)
            .and_then(|a| distortion(&mut held, a, HARMONIC_NODES, req.gain))
            .map(|d| d.thd_percent),
        compression_v: (wanted.compression && amplifies)
            .then(|| compression(&mut held, req.gain, reach, scale))
            .flatten(),
    }
}

/// An EMF that would swing the output across the supplies at the small-signal gain: the
/// scale of every search here, V.
fn input_scale(net: &Netlist, gain: f64) -> f64 {
    let span = net.supplies.iter().map(|s| s.1.abs()).fold(0.0, f64::max);
    let span = if span > 0.0 { span } else { 1.0 };
    span / gain.abs().max(1.0)
}

fn clipping_input(s: &Swing) -> Option<f64> {
    [s.positive_limit.as_ref(), s.negative_limit.as_ref()]
        .into_iter()
        .flatten()
        .map(|l| l.input_v.abs())
        .reduce(f64::min)
}

/// Both sides' limits, sorted by the sign of the output change.
fn swing(held: &mut Held, net: &Netlist, scale: f64) -> Swing {
    let mut out = Swing::default();
    for direction in [1.0, -1.0] {
        let Some(limit) = side_limit(held, net, direction, scale) else { continue };
        if limit.output_v >= 0.0 {
            if out.positive_v.is_none() {
                out.positive_v = Some(limit.output_v);
                out.positive_limit = Some(limit);
            }
        } else if out.negative_v.is_none() {
            out.negative_v = Some(-limit.output_v);
            out.negative_limit = Some(limit);
        }
    }
    out
}

/// The smallest margin of any transistor at solution `x`, with its element and edge.
fn tightest(held: &Held, x: &[f64]) -> (f64, usize, Edge) {
    held.margins(x)
        .into_iter()
        .flat_map(|m| {
            [(m.margins[0], m.element, Edge::CutOff), (m.margins[1], m.element, m.second)]
        })
        .fold((f64::INFINITY, 0, Edge::CutOff), |best, c| if c.0 < best.0 { c } else { best })
}

/// Marches the EMF from zero in `direction` until a transistor reaches an edge of its bias
/// region, then finds the crossing by Brent's method to 1e-9 of the scale.
fn side_limit(held: &mut Held, net: &Netlist, direction: f64, scale: f64) -> Option<SwingLimit> {
    let mut v = 0.0f64;
    let mut x = held.bias().to_vec();
    let mut step = scale / 32.0;
    while v.abs() < 16.0 * scale {
        let next = v + direction * step;
        let y = held.track(v, &x, next)?;
        if tightest(held, &y).0 <= 0.0 {
            let (from_v, from) = (v, x.clone());
            let root = brent(
                |u| held.track(from_v, &from, u).map_or(-1.0, |s| tightest(held, &s).0),
                v,
                next,
                1e-9 * scale,
            );
            let at = held.track(from_v, &from, root)?;
            let (_, element, edge) = tightest(held, &at);
            let el = &net.elements[element];
            return Some(SwingLimit {
                part: el.name().to_string(),
                edge,
                node: net.nodes[limit_node(el)].clone(),
                input_v: root,
                output_v: held.output_change(&at),
            });
        }
        v = next;
        x = y;
        step = (step * 1.2).min(scale / 4.0);
    }
    None
}

/// The output change at the Chebyshev nodes A·cos θ_k, k = 0…n−1, each half tracked
/// outward from the bias.
fn samples(held: &mut Held, amplitude: f64, n: usize) -> Option<Vec<f64>> {
    let mut y = vec![0.0; n];
    let half = n / 2;
    for outward in [(0..half).rev().collect::<Vec<_>>(), (half..n).collect()] {
        let mut path = Path::new(held);
        for k in outward {
            let u = amplitude * (PI * (k as f64 + 0.5) / n as f64).cos();
            let x = path.advance(held, u)?;
            y[k] = held.output_change(x);
        }
    }
    Some(y)
}

/// Cosine coefficients c_j = (2/n)·Σ y_k cos(jθ_k): y(θ) = c₀/2 + Σ c_j cos jθ.
fn coefficients(y: &[f64]) -> Vec<f64> {
    let n = y.len();
    (0..n)
        .map(|j| {
            let s: f64 = y
                .iter()
                .enumerate()
                .map(|(k, yk)| yk * (PI * j as f64 * (k as f64 + 0.5) / n as f64).cos())
                .sum();
            2.0 * s / n as f64
        })
        .collect()
}

/// HD2, HD3 and THD at peak EMF `amplitude` from `n` nodes.
fn distortion(held: &mut Held, amplitude: f64, n: usize, gain: f64) -> Option<Distortion> {
    let c = coefficients(&samples(held, amplitude, n)?);
    let harmonics: Vec<f64> = c[1..n / 2].iter().map(|v| v.abs()).collect();
    let h1 = harmonics[0];
    if h1 <= 0.0 {
        return None;
    }
    let db = |h: f64| (h / h1 > 1e-12).then(|| 20.0 * (h / h1).log10());
    let rest: f64 = harmonics[1..].iter().map(|h| h * h).sum();
    let waveform = (0..WAVEFORM_POINTS)
        .map(|i| {
            let phase = 2.0 * PI * i as f64 / (WAVEFORM_POINTS - 1) as f64;
            let y = 0.5 * c[0] + (1..n).map(|j| c[j] * (j as f64 * phase).cos()).sum::<f64>();
            [phase.to_degrees(), y, gain * amplitude * phase.cos()]
        })
        .collect();
    Some(Distortion {
        amplitude_v: amplitude,
        fundamental_v: h1,
        hd2_db: db(harmonics[1]),
        hd3_db: db(harmonics[2]),
        thd_percent: 100.0 * rest.sqrt() / h1,
        harmonics,
        waveform,
    })
}

/// The power series at the bias from a Chebyshev fit over ±`half_width`.
fn series(held: &mut Held, half_width: f64) -> Option<Series> {
    if half_width <= 0.0 {
        return None;
    }
    let c = coefficients(&samples(held, half_width, SERIES_NODES)?);
    // Monomial coefficients of T_j: T₀ = 1, T₁ = t, T_{j+1} = 2t·T_j − T_{j−1}.
    let m = c.len();
    let mut t = vec![vec![0.0; m]; m];
    t[0][0] = 1.0;
    t[1][1] = 1.0;
    for j in 1..m - 1 {
        for p in 0..m {
            let up = if p > 0 { 2.0 * t[j][p - 1] } else { 0.0 };
            t[j + 1][p] = up - t[j - 1][p];
        }
    }
    let power = |p: usize| -> f64 {
        (1..m).map(|j| c[j] * t[j][p]).sum::<f64>() / half_width.powi(p as i32)
    };
    Some(Series { a1: power(1), a2: power(2), a3: power(3), fitted_over_v: half_width })
}

/// The fundamental's gain at peak EMF `a` over the small-signal gain, dB.
fn gain_change_db(held: &mut Held, a: f64, gain: f64) -> Option<f64> {
    let c = coefficients(&samples(held, a, COMPRESSION_NODES)?);
    Some(20.0 * (c[1].abs() / (a * gain.abs())).log10())
}

/// The EMF where the fundamental's gain has fallen [`COMPRESSION_DB`]: amplitudes grow by
/// half from half of `reach` (the clipping input) until the gain is that far down, then
/// Brent's method in log amplitude to 5e-4 (relative).
fn compression(held: &mut Held, gain: f64, reach: f64, scale: f64) -> Option<f64> {
    if gain == 0.0 || !(reach > 0.0 && reach.is_finite()) {
        return None;
    }
    // The bracket's lower end must be less than 1 dB down (a finite, uncompressed gain).
    let mut lo = 0.5 * reach;
    let mut uncompressed = false;
    for _ in 0..4 {
        let g = gain_change_db(held, lo, gain)?;
        if g.is_finite() && g > -COMPRESSION_DB {
            uncompressed = true;
            break;
        }
        lo *= 0.1;
    }
    if !uncompressed {
        return None;
    }
    let mut hi = lo;
    while hi < 64.0 * scale.max(reach) {
        hi *= GROWTH;
        let g = gain_change_db(held, hi, gain)?;
        if !g.is_finite() {
            return None;
        }
        if g <= -COMPRESSION_DB {
            let from = (hi / GROWTH).ln();
            let root = brent(
                |la| gain_change_db(held, la.exp(), gain).map_or(-1.0, |g| g + COMPRESSION_DB),
                from,
                hi.ln(),
                5e-4,
            );
            return Some(root.exp());
        }
    }
    None
}

/// The transfer over ±`extent`, tracked outward from the bias.
fn curve(held: &mut Held, extent: f64) -> Vec<[f64; 2]> {
    let mut points = Vec::new();
    for direction in [-1.0, 1.0] {
        let mut path = Path::new(held);
        let mut side = vec![[0.0, 0.0]];
        for i in 1..=CURVE_POINTS {
            let u = direction * extent * i as f64 / CURVE_POINTS as f64;
            let Some(x) = path.advance(held, u) else { break };
            side.push([u, held.output_change(x)]);
        }
        if direction < 0.0 {
            side.reverse();
            side.pop();
        }
        points.extend(side);
    }
    points
}
