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

use crate::analysis::{Metrics, metrics};
use crate::design::{Design, Distribution};

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
    out
}

/// Relative step of the central differences: small enough that the O(h²) error is below
/// 1e-7, large enough that the operating point's rounding does not show.
pub const STEP: f64 = 1e-4;

/// S = ∂ln y/∂ln x for every lever and figure: `s[lever][figure]`, None where a
/// perturbed evaluation failed or the figure vanished.
pub fn sensitivities(design: &Design, levers: &[Lever], figs: &[Figure]) -> Vec<Vec<Option<f64>>> {
    (0..levers.len())
        .into_par_iter()
        .map(|i| {
            let up = metrics(&perturbed(design, levers, &[(i, 1.0 + STEP)])).ok();
            let down = metrics(&perturbed(design, levers, &[(i, 1.0 - STEP)])).ok();
            figs.iter()
                .map(|f| {
                    let (a, b) =
                        (up.as_ref().and_then(|m| f.of(m))?, down.as_ref().and_then(|m| f.of(m))?);
                    (a > 0.0 && b > 0.0)
                        .then(|| (a.ln() - b.ln()) / ((1.0 + STEP).ln() - (1.0 - STEP).ln()))
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
    figs.iter()
        .enumerate()
        .filter_map(|(k, f)| {
            let y0 = f.of(nominal)?;
            let mut bound = 0.0;
            let mut up = Vec::new();
            let mut down = Vec::new();
            for (i, l) in levers.iter().enumerate() {
                let (Some(t), Some(sens)) = (l.tolerance, s[i][k]) else { continue };
                bound += sens.abs() * t.fraction;
                let sign = if sens >= 0.0 { 1.0 } else { -1.0 };
                up.push((i, 1.0 + sign * t.fraction));
                down.push((i, 1.0 - sign * t.fraction));
            }
            let eval = |c: &[(usize, f64)]| {
                metrics(&perturbed(design, levers, c)).ok().and_then(|m| f.of(&m))
            };
            Some(WorstCase {
                figure: f.key(names),
                nominal: y0,
                linear_bound: bound,
                high_corner: eval(&up),
                low_corner: eval(&down),
            })
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
/// requirements; `progress` is called with the count done.
pub fn monte_carlo(
    design: &Design,
    levers: &[Lever],
    figs: &[Figure],
    names: &[String],
    runs: u32,
    progress: &(dyn Fn(u64) + Sync),
) -> MonteCarlo {
    let seed = design.analysis.seed;
    let requirements = &design.requirements;
    let done = std::sync::atomic::AtomicU64::new(0);
    let samples: Vec<Option<Metrics>> = (0..runs as u64)
        .into_par_iter()
        .map(|k| {
            let m = metrics(&perturbed(design, levers, &draw(levers, seed, k))).ok();
            let n = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
            if n % 64 == 0 {
                progress(n);
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
    let within = |l: &crate::design::Limits, v: Option<f64>| {
        v.is_some_and(|v| l.min.is_none_or(|lo| v >= lo) && l.max.is_none_or(|hi| v <= hi))
    };
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
    progress: &(dyn Fn(u64) + Sync),
) -> Study {
    let all = levers(design);
    let figs = figures(nominal);
    let s = sensitivities(design, &all, &figs);
    let worst = worst_case(design, &all, &figs, &s, nominal, device_names);
    let mc = (runs > 0).then(|| monte_carlo(design, &all, &figs, device_names, runs, progress));
    Study {
        step: STEP,
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
