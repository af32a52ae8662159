//! Noise: every part's noise sources, their transfer to the output by the adjoint system,
//! and what the stage adds to its source — output and input-referred densities, noise
//! figure, the equivalent input generators, integrated noise over a band, and who
//! contributes.
//!
//! In: the small-signal network with every capacitor present (its [`Mna`]), the operating
//! point's bias currents and the temperature. Out: [`NoiseSources`] and, per frequency,
//! [`Spectrum`]s; integrals over a band. No formatting, no files.
//!
//! Sources, each an uncorrelated current between two nodes (common practice; Gray, Hurst,
//! Lewis & Meyer, *Analysis and Design of Analog Integrated Circuits*, noise chapter, from
//! memory):
//! - a resistor: thermal noise 4kT/R (the signal source's resistance at T0 = 290 K, the
//!   temperature the noise figure is defined at; every other part at the design's);
//! - a bipolar transistor: collector shot noise 2qI_C from collector to emitter, base shot
//!   noise 2qI_B from the internal base to the emitter, and its base resistance's thermal
//!   noise (a resistor). The two shot noises are taken as uncorrelated, as the hybrid-π
//!   model's usual noise model does;
//! - a MOSFET: channel thermal noise 4kTγg_m from drain to source, γ = 2/3 (long channel in
//!   saturation, from memory);
//! - flicker (1/f) noise where a model states its corner frequency f_c: beside the base
//!   current's shot noise of a bipolar transistor, 2qI_B·f_c/f, and beside a MOSFET's channel
//!   noise, 4kTγg_m·f_c/f — equal to the white noise it accompanies at f_c (the corner as a
//!   data sheet gives it, common practice). For a base current whose 1/f noise grows as I_B
//!   (the usual exponent of one) the corner holds at any bias; for a MOSFET it is taken at the
//!   operating point;
//! - the small-signal resistances rπ and r_o, and ideal controlled sources: none.
//!
//! One transposed solve per frequency gives every source's transfer at once: with
//! (G + sC)ᵀλ = c for the output row c, a unit current from node a to node b reaches the
//! output as λ_b − λ_a (Rohrer, Nagel, Meyer & Weber, IEEE JSSC 6(4), 1971, from memory;
//! it is the adjoint identity used for the sensitivities, `adjoint.rs`).

use std::cell::RefCell;

use faer::{Mat, c64};

use crate::analysis::linear::{SparseSystem, sparse_pays};
use crate::analysis::mna::Mna;
use crate::analysis::pencil::Pencil;
use crate::analysis::schur;
use crate::circuit::devices::{BOLTZMANN, ELEMENTARY_CHARGE};
use crate::circuit::operating_point::{DeviceState, OperatingPoint};
use crate::circuit::small_signal::{Linear, LinearNetwork};

/// The standard noise temperature of a source, K (IEEE Std 161; the noise figure's
/// reference, common practice).
pub const T0: f64 = 290.0;

/// Channel thermal-noise coefficient γ of a MOSFET in saturation (long channel, 2/3; from
/// memory).
pub const GAMMA: f64 = 2.0 / 3.0;

/// How a source makes its noise.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Mechanism {
    /// A resistor's thermal noise, 4kT/R.
    Thermal,
    /// A bipolar transistor's base resistance, 4kT/r_x.
    BaseResistance,
    /// Collector shot noise, 2qI_C.
    CollectorShot,
    /// Base shot noise, 2qI_B.
    BaseShot,
    /// MOSFET channel thermal noise, 4kTγg_m.
    Channel,
    /// 1/f noise, from the model's corner frequency.
    Flicker,
}

impl Mechanism {
    /// In words, for the review.
    pub fn describe(self) -> &'static str {
        match self {
            Mechanism::Thermal => "thermal noise",
            Mechanism::BaseResistance => "base-resistance thermal noise",
            Mechanism::CollectorShot => "collector shot noise",
            Mechanism::BaseShot => "base shot noise",
            Mechanism::Channel => "channel thermal noise",
            Mechanism::Flicker => "flicker (1/f) noise",
        }
    }
}

/// One noise source: a current of density `density` (A²/Hz; for a 1/f source, at 1 Hz)
/// from node `a` to `b`.
#[derive(Clone, Debug, PartialEq)]
pub struct Source {
    /// The part it belongs to (`R1`, `Q1`, `source`, `load`).
    pub part: String,
    /// How.
    pub mechanism: Mechanism,
    /// Terminal the current leaves.
    pub a: usize,
    /// Terminal it enters.
    pub b: usize,
    /// A²/Hz.
    pub density: f64,
    /// True for the signal source's own resistance.
    pub is_source: bool,
    /// True for a 1/f source: its density at f is `density / f`.
    pub flicker: bool,
}

impl Source {
    /// A²/Hz at `f`.
    pub fn density_at(&self, f: f64) -> f64 {
        if self.flicker { self.density / f } else { self.density }
    }
}

/// Every noise source of a network; `corners` holds each transistor's flicker corner
/// frequency, Hz (0: none), in the order of the operating point's devices.
pub fn sources(
    lin: &LinearNetwork,
    op: Option<&OperatingPoint>,
    kelvin: f64,
    corners: &[f64],
) -> Vec<Source> {
    let in_device: Vec<bool> =
        (0..lin.elements.len()).map(|k| lin.devices.iter().any(|r| r.contains(&k))).collect();
    let mut out = Vec::new();
    for (k, el) in lin.elements.iter().enumerate() {
        let Linear::Conductance { name, a, b, g } = el else { continue };
        if in_device[k] || *g <= 0.0 {
            continue;
        }
        let is_source = name == "source.r";
        let (part, mechanism) = match name.split_once('.') {
            Some((part, "rx")) => (part.to_string(), Mechanism::BaseResistance),
            Some((part, _)) => (part.to_string(), Mechanism::Thermal),
            None => (name.clone(), Mechanism::Thermal),
        };
        let t = if is_source { T0 } else { kelvin };
        out.push(Source {
            part,
            mechanism,
            a: *a,
            b: *b,
            density: 4.0 * BOLTZMANN * t * g,
            is_source,
            flicker: false,
        });
    }
    let Some(op) = op else { return out };
    for (j, (range, bias)) in lin.devices.iter().zip(&op.devices).enumerate() {
        let corner = corners.get(j).copied().unwrap_or(0.0);
        let element = |suffix: &str| {
            range.clone().map(|k| &lin.elements[k]).find(|e| match e {
                Linear::Conductance { name, .. } | Linear::Vccs { name, .. } => {
                    name.rsplit_once('.').is_some_and(|(_, s)| s == suffix)
                }
                _ => false,
            })
        };
        let part = bias.part.clone();
        match &bias.state {
            DeviceState::Bjt { ic_a, ib_a, .. } => {
                if let Some(Linear::Vccs { a, b, .. }) = element("gm") {
                    out.push(Source {
                        part: part.clone(),
                        mechanism: Mechanism::CollectorShot,
                        a: *a,
                        b: *b,
                        density: 2.0 * ELEMENTARY_CHARGE * ic_a.abs(),
                        is_source: false,
                        flicker: false,
                    });
                }
                if let Some(Linear::Conductance { a, b, .. }) = element("rpi") {
                    out.push(Source {
                        part,
                        mechanism: Mechanism::BaseShot,
                        a: *a,
                        b: *b,
                        density: 2.0 * ELEMENTARY_CHARGE * ib_a.abs(),
                        is_source: false,
                        flicker: false,
                    });
                    if corner > 0.0 {
                        out.push(Source {
                            part: bias.part.clone(),
                            mechanism: Mechanism::Flicker,
                            a: *a,
                            b: *b,
                            density: 2.0 * ELEMENTARY_CHARGE * ib_a.abs() * corner,
                            is_source: false,
                            flicker: true,
                        });
                    }
                }
            }
            DeviceState::Mosfet { .. } => {
                if let Some(Linear::Vccs { a, b, gm, .. }) = element("gm") {
                    let white = 4.0 * BOLTZMANN * kelvin * GAMMA * gm.abs();
                    out.push(Source {
                        part: part.clone(),
                        mechanism: Mechanism::Channel,
                        a: *a,
                        b: *b,
                        density: white,
                        is_source: false,
                        flicker: false,
                    });
                    if corner > 0.0 {
                        out.push(Source {
                            part,
                            mechanism: Mechanism::Flicker,
                            a: *a,
                            b: *b,
                            density: white * corner,
                            is_source: false,
                            flicker: true,
                        });
                    }
                }
            }
        }
    }
    out
}

/// The noise at one frequency.
#[derive(Clone, Debug, PartialEq)]
pub struct Spectrum {
    /// Hz.
    pub frequency_hz: f64,
    /// |H|, the signal's gain from the source EMF to the output.
    pub gain: f64,
    /// H itself.
    pub h: c64,
    /// Each source's output density, V²/Hz, in the order of the sources.
    pub each: Vec<f64>,
}

impl Spectrum {
    /// Total output density, V²/Hz.
    pub fn output(&self) -> f64 {
        self.each.iter().sum()
    }

    /// Output density less the signal source's own, V²/Hz: what the stage adds.
    pub fn added(&self, sources: &[Source]) -> f64 {
        self.each.iter().zip(sources).filter(|(_, s)| !s.is_source).map(|(v, _)| v).sum()
    }

    /// Input-referred density (at the source EMF), V²/Hz.
    pub fn input(&self) -> Option<f64> {
        (self.gain > 0.0).then(|| self.output() / (self.gain * self.gain))
    }

    /// Noise factor F = total output noise ÷ the part the source resistance (at T0)
    /// makes; None without a source resistance or where it does not reach the output.
    pub fn factor(&self, sources: &[Source]) -> Option<f64> {
        let from_source: f64 =
            self.each.iter().zip(sources).filter(|(_, s)| s.is_source).map(|(v, _)| v).sum();
        (from_source > 0.0).then(|| self.output() / from_source)
    }
}

/// The network solved for noise at any frequency, for the sources it was built with: the
/// signal's transfer and every source's, all from one transposed solve.
pub struct Solver<'a> {
    mna: &'a Mna,
    /// Each source's terminals, in the order its spectrum lists them.
    terminals: Vec<(usize, usize)>,
    form: Form,
}

/// How the solver holds the network: sparse above the size where that pays; else its
/// static unknowns eliminated (`schur.rs`) and the rest in Hessenberg–triangular form
/// (`pencil.rs`: one O(n³) reduction, then O(n²) a frequency), the signal and each source
/// an input of it.
enum Form {
    Sparse(SparseSystem),
    Dense { pencil: Pencil, direct: Vec<f64>, transfers: RefCell<Vec<c64>> },
}

impl<'a> Solver<'a> {
    /// A solver for the full network `mna` (every capacitor present) and `sources`.
    pub fn new(mna: &'a Mna, sources: &[Source]) -> Solver<'a> {
        Solver::injecting(mna, sources.iter().map(|s| (s.a, s.b)).collect())
    }

    /// A solver for a unit current into node `node` from ground: [`Solver::transimpedance`].
    pub fn into_node(mna: &'a Mna, node: usize) -> Solver<'a> {
        Solver::injecting(mna, vec![(0, node)])
    }

    fn injecting(mna: &'a Mna, terminals: Vec<(usize, usize)>) -> Solver<'a> {
        let n = mna.size();
        let sparse = sparse_pays(n, mna.g.nonzeros() + mna.c.nonzeros())
            .then(|| SparseSystem::new(&mna.g, &mna.c))
            .flatten();
        let form = match sparse {
            Some(s) => Form::Sparse(s),
            None => {
                // Column 0 the signal, column k + 1 source k's incidence (e_b − e_a).
                let mut inputs = Mat::<f64>::zeros(n, terminals.len() + 1);
                for (i, v) in mna.b.iter().enumerate() {
                    inputs[(i, 0)] = *v;
                }
                for (k, &(a, b)) in terminals.iter().enumerate() {
                    if let Some(r) = Mna::row(b) {
                        inputs[(r, k + 1)] += 1.0;
                    }
                    if let Some(r) = Mna::row(a) {
                        inputs[(r, k + 1)] -= 1.0;
                    }
                }
                let (pencil, direct) = match schur::reduce_inputs(&mna.g, &mna.c, &inputs, &mna.out)
                {
                    Some(r) => (Pencil::new(&r.g, &r.c, &r.b, &r.out), r.direct),
                    None => (
                        Pencil::new(&mna.g.dense(), &mna.c.dense(), &inputs, &mna.out),
                        vec![0.0; terminals.len() + 1],
                    ),
                };
                Form::Dense { pencil, direct, transfers: RefCell::new(Vec::new()) }
            }
        };
        Solver { mna, terminals, form }
    }

    /// The signal's transfer H and each source's (output volts per ampere from its a to
    /// its b terminal) at s = j2πf, handed to `read`; None where the network is singular.
    fn transfers<T>(
        &self,
        f: f64,
        read: impl FnOnce(c64, &mut dyn Iterator<Item = c64>) -> T,
    ) -> Option<T> {
        let s = c64::new(0.0, 2.0 * std::f64::consts::PI * f);
        match &self.form {
            Form::Sparse(sparse) => {
                let (x, lambda) = sparse.solve_pair(s, &self.mna.b, &self.mna.out)?;
                let h = self.mna.out.iter().zip(&x).map(|(c, v)| v * *c).sum::<c64>();
                let at = |node: usize| Mna::row(node).map_or(c64::new(0.0, 0.0), |r| lambda[r]);
                Some(read(h, &mut self.terminals.iter().map(|&(a, b)| at(b) - at(a))))
            }
            Form::Dense { pencil, direct, transfers } => {
                let t = &mut *transfers.borrow_mut();
                pencil.transfers(s, t)?;
                let mut each = t.iter().zip(direct).map(|(t, d)| t + d);
                let h = each.next()?;
                Some(read(h, &mut each))
            }
        }
    }

    /// Each source's output density and the signal gain at `f` (`sources` those the solver
    /// was built with).
    pub fn spectrum(&self, sources: &[Source], f: f64) -> Option<Spectrum> {
        debug_assert_eq!(sources.len(), self.terminals.len());
        self.transfers(f, |h, each| {
            // Room for one more: the band integral appends the input-referred total.
            let mut v = Vec::with_capacity(sources.len() + 1);
            v.extend(each.zip(sources).map(|(t, s)| t.norm_sqr() * s.density_at(f)));
            Spectrum { frequency_hz: f, gain: h.norm(), h, each: v }
        })
    }

    /// |Z|: the output voltage per ampere injected into the node the solver was built for
    /// ([`Solver::into_node`]), at `f`.
    pub fn transimpedance(&self, f: f64) -> Option<f64> {
        self.transfers(f, |_, each| each.next().map(|z| z.norm())).flatten()
    }
}

/// The stage's equivalent input noise generators at `f`, from the sources `keep` admits
/// (the signal source's own never): e_n² (V²/Hz), the output noise with the source shorted
/// referred to the input by the gain, and i_n² (A²/Hz), the output noise with the source
/// open referred by the transimpedance from the input node. "Shorted" is a source
/// resistance of 1 µΩ: its error, about 1 µΩ over the input resistance, is far below any
/// other. None when either network cannot be solved or does not pass a signal.
pub fn input_generators(
    lin: &LinearNetwork,
    op: Option<&OperatingPoint>,
    kelvin: f64,
    corners: &[f64],
    f: f64,
    keep: impl Fn(&Source) -> bool,
) -> Option<(f64, f64)> {
    let k = lin
        .elements
        .iter()
        .position(|e| matches!(e, Linear::Conductance { name, .. } if name == "source.r"))?;
    let with_source = |g: f64| {
        let mut changed = lin.clone();
        if let Linear::Conductance { g: value, .. } = &mut changed.elements[k] {
            *value = g;
        }
        changed
    };
    let added = |lin: &LinearNetwork| -> Option<(Spectrum, Mna)> {
        let srcs: Vec<Source> = sources(lin, op, kelvin, corners)
            .into_iter()
            .filter(|s| !s.is_source && keep(s))
            .collect();
        let mna = crate::analysis::mna::assemble(
            lin,
            |_| crate::analysis::mna::CapState::Present,
            crate::analysis::mna::Assembly::default(),
        );
        let spectrum = Solver::new(&mna, &srcs).spectrum(&srcs, f)?;
        Some((spectrum, mna))
    };
    let (shorted, _) = added(&with_source(1e6))?;
    let open = with_source(0.0);
    let (opened, mna) = added(&open)?;
    let z = Solver::into_node(&mna, lin.source_terminal.0).transimpedance(f)?;
    (shorted.gain > 0.0 && z > 0.0)
        .then(|| (shorted.output() / (shorted.gain * shorted.gain), opened.output() / (z * z)))
}

/// The optimum source resistance e_n/i_n and the noise factor there, 1 + 2·e_n·i_n/(4kT0),
/// treating e_n and i_n as uncorrelated (Gray, Hurst, Lewis & Meyer, noise chapter, from
/// memory); the noise factor at the design's own source is exact, correlation included.
pub fn optimum(e_n2: f64, i_n2: f64) -> Option<(f64, f64)> {
    (e_n2 > 0.0 && i_n2 > 0.0)
        .then(|| ((e_n2 / i_n2).sqrt(), 1.0 + 2.0 * (e_n2 * i_n2).sqrt() / (4.0 * BOLTZMANN * T0)))
}

/// Evaluations an integral may take: a smooth band needs a few hundred; an integrand that
/// will not settle (a notch where the input-referred density soars) stops here with the
/// estimate it has.
const MOST_EVALUATIONS: usize = 4000;

/// The accuracy an integral is refined to: each component's error, relative to its own
/// total, about 1e-8 (the tests hold the noise to 1e-6 of an independent integration).
const TOLERANCE: f64 = 1e-8;

/// ∫ g(f) df from `from` to `to` (Hz, both > 0) of a vector of non-negative densities, by
/// adaptive Simpson's rule in ln f (Lyness, 1969, from memory), each component integrated
/// on the same nodes to [`TOLERANCE`] of its own total (estimated from a first pass over
/// the starting panels, and shared out among the panels by width), at most
/// [`MOST_EVALUATIONS`] evaluations. None when g cannot be evaluated somewhere or is not
/// finite.
pub fn integrate(
    mut g: impl FnMut(f64) -> Option<Vec<f64>>,
    from: f64,
    to: f64,
) -> Option<Vec<f64>> {
    // In u = ln f: ∫ g(e^u) e^u du.
    let evaluations = std::cell::Cell::new(0usize);
    let mut h = |u: f64| -> Option<Vec<f64>> {
        let f = u.exp();
        evaluations.set(evaluations.get() + 1);
        let mut v = g(f)?;
        v.iter_mut().for_each(|x| *x *= f);
        v.iter().all(|x| x.is_finite()).then_some(v)
    };
    let (a, b) = (from.ln(), to.ln());
    // Start from 16 panels and at least four a decade (five evaluations each at least), so
    // a peak is seen before the adaptive splitting decides where to look closer: a wide
    // panel's two Simpson estimates can agree by accident.
    let decades = (b - a) / std::f64::consts::LN_10;
    let panels = ((4.0 * decades).ceil() as usize).max(16);
    let width = (b - a) / panels as f64;
    let mut points = vec![h(a)?];
    for k in 0..panels {
        points.push(h(a + width * (k as f64 + 0.5))?);
        points.push(h(a + width * (k + 1) as f64)?);
    }
    let components = points[0].len();
    let mut coarse = vec![0.0; components];
    for k in 0..panels {
        for (c, total) in coarse.iter_mut().enumerate() {
            let [l, m, r] = [&points[2 * k], &points[2 * k + 1], &points[2 * k + 2]];
            *total += width / 6.0 * (l[c] + 4.0 * m[c] + r[c]);
        }
    }
    let share = 1.0 / panels as f64;
    let allowed: Vec<f64> = coarse.iter().map(|t| TOLERANCE * t.abs() * share).collect();
    let mut total = vec![0.0; components];
    for k in 0..panels {
        let (lo, hi) = (a + width * k as f64, a + width * (k + 1) as f64);
        let piece = simpson(
            &mut h,
            [(lo, &points[2 * k]), (0.5 * (lo + hi), &points[2 * k + 1]), (hi, &points[2 * k + 2])],
            &allowed,
            12,
            &evaluations,
        )?;
        for (t, p) in total.iter_mut().zip(&piece) {
            *t += p;
        }
    }
    Some(total)
}

type Point<'a> = (f64, &'a Vec<f64>);

/// One adaptive Simpson panel: split until the two halves agree with the whole within
/// 15× `allowed` in every component (the error of the halves is then about `allowed`, and
/// Richardson's correction is added); each half is allowed half.
fn simpson(
    h: &mut impl FnMut(f64) -> Option<Vec<f64>>,
    [(a, fa), (m, fm), (b, fb)]: [Point; 3],
    allowed: &[f64],
    depth: u32,
    evaluations: &std::cell::Cell<usize>,
) -> Option<Vec<f64>> {
    let rule = |x: f64, y: f64, z: f64, w: f64| w / 6.0 * (x + 4.0 * y + z);
    let (lm, rm) = (0.5 * (a + m), 0.5 * (m + b));
    let (flm, frm) = (h(lm)?, h(rm)?);
    // Component by component: the whole panel's rule, its two halves', and their sum.
    let parts = |c: usize| {
        let whole = rule(fa[c], fm[c], fb[c], b - a);
        let halves = rule(fa[c], flm[c], fm[c], m - a) + rule(fm[c], frm[c], fb[c], b - m);
        (whole, halves)
    };
    let settled = (0..allowed.len()).all(|c| {
        let (whole, halves) = parts(c);
        (halves - whole).abs() <= 15.0 * allowed[c]
    });
    if depth == 0 || settled || evaluations.get() >= MOST_EVALUATIONS {
        return Some(
            (0..allowed.len())
                .map(|c| {
                    let (whole, halves) = parts(c);
                    halves + (halves - whole) / 15.0
                })
                .collect(),
        );
    }
    let half: Vec<f64> = allowed.iter().map(|e| 0.5 * e).collect();
    let mut l = simpson(h, [(a, fa), (lm, &flm), (m, fm)], &half, depth - 1, evaluations)?;
    let r = simpson(h, [(m, fm), (rm, &frm), (b, fb)], &half, depth - 1, evaluations)?;
    l.iter_mut().zip(&r).for_each(|(x, y)| *x += y);
    Some(l)
}

/// One part's noise by one mechanism.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Contributor {
    /// `R1`, `Q1`, `source`, `load`.
    pub part: String,
    /// How.
    pub mechanism: Mechanism,
    /// Its output density at the spot frequency, V²/Hz.
    pub density_v2_per_hz: f64,
    /// Its share of the output density there.
    pub share: f64,
    /// Its share of the output noise integrated over the band.
    pub band_share: Option<f64>,
}

/// Where the noise is integrated.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum BandBasis {
    /// The design's stated operating band.
    Stated,
    /// Between the exact −3 dB frequencies.
    Cutoffs,
}

/// Noise integrated over a band.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct NoiseBand {
    /// Hz.
    pub start_hz: f64,
    /// Hz.
    pub stop_hz: f64,
    /// Which band.
    pub basis: BandBasis,
    /// rms output noise, V.
    pub output_rms_v: f64,
    /// rms noise referred to the source EMF, V.
    pub input_rms_v: f64,
}

/// Noise at one sweep frequency.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct NoisePoint {
    /// Hz.
    pub frequency_hz: f64,
    /// V/√Hz at the output.
    pub output_density_v_per_rthz: f64,
    /// V/√Hz referred to the source EMF.
    pub input_density_v_per_rthz: Option<f64>,
    /// dB, with the source at T0.
    pub noise_figure_db: Option<f64>,
}

/// The noise review of a stage.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct NoiseReport {
    /// The design temperature every part but the source is at, K.
    pub temperature_k: f64,
    /// The source resistance, Ω (at T0 = 290 K).
    pub source_resistance_ohm: f64,
    /// Where the spot values are taken, Hz.
    pub spot_frequency_hz: f64,
    /// V/√Hz at the output.
    pub output_density_v_per_rthz: f64,
    /// V/√Hz referred to the source EMF.
    pub input_density_v_per_rthz: Option<f64>,
    /// F, with the source at T0.
    pub noise_factor: Option<f64>,
    /// 10·log10 F, dB.
    pub noise_figure_db: Option<f64>,
    /// The stage's equivalent input noise voltage (source shorted), V/√Hz.
    pub e_n_v_per_rthz: Option<f64>,
    /// The stage's equivalent input noise current (source open), A/√Hz.
    pub i_n_a_per_rthz: Option<f64>,
    /// e_n/i_n, Ω.
    pub r_opt_ohm: Option<f64>,
    /// The noise figure at R_opt, dB (e_n and i_n taken as uncorrelated).
    pub nf_min_db: Option<f64>,
    /// Integrated over the band.
    pub band: Option<NoiseBand>,
    /// The stated signal's rms at the source EMF, V.
    pub signal_rms_v: Option<f64>,
    /// Signal-to-noise ratio at the output over the band, dB.
    pub snr_db: Option<f64>,
    /// Each part and mechanism, largest first.
    pub contributors: Vec<Contributor>,
    /// Over the sweep.
    pub sweep: Vec<NoisePoint>,
    /// H at each frequency of the sweep, from the same solves: a large network's response
    /// sweep is read from here rather than factorised a second time.
    #[serde(skip)]
    pub responses: Vec<(f64, c64)>,
}

/// What the noise review is asked.
pub struct Request<'a> {
    /// The network with every capacitor present.
    pub lin: &'a LinearNetwork,
    /// Its operating point.
    pub op: Option<&'a OperatingPoint>,
    /// Its assembled system.
    pub mna: &'a Mna,
    /// Design temperature, K.
    pub kelvin: f64,
    /// Each transistor's flicker corner, Hz (0: none), in the operating point's order.
    pub corners: &'a [f64],
    /// The signal's peak amplitude at the source EMF, V, when the design states one.
    pub amplitude_v: Option<f64>,
    /// The spot frequency, Hz.
    pub spot_hz: f64,
    /// The band to integrate over, if any.
    pub band: Option<(f64, f64, BandBasis)>,
    /// The sweep.
    pub frequencies: &'a [f64],
}

/// Every source's output noise (V²) integrated from `from` to `to`, then the input-referred
/// total's: all on the same nodes, so the lean figures and the review agree to the bit.
fn band_sums(solver: &Solver, srcs: &[Source], from: f64, to: f64) -> Option<Vec<f64>> {
    integrate(
        |f| {
            let s = solver.spectrum(srcs, f)?;
            let input = s.input()?;
            let mut v = s.each;
            v.push(input);
            Some(v)
        },
        from,
        to,
    )
}

/// The noise figures a requirement can limit: what the tolerance study follows.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Figures {
    /// Spot noise figure, dB.
    pub noise_figure_db: Option<f64>,
    /// Spot input-referred density, V/√Hz.
    pub input_density: Option<f64>,
    /// rms output noise over the band, V.
    pub output_rms: Option<f64>,
    /// Signal-to-noise ratio at the output over the band, dB.
    pub snr_db: Option<f64>,
}

/// Which of [`Figures`] to compute: the band integral costs a few hundred solves, the spot
/// values one.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Wanted {
    /// The spot noise figure and input density.
    pub spot: bool,
    /// The rms output noise over the band.
    pub band: bool,
    /// The signal-to-noise ratio (the spot gain and the band integral).
    pub snr: bool,
}

/// The figures `wanted` asks for, computed as [`review`] computes them (the same numbers to
/// the bit), without the contributors, generators and sweep.
pub fn figures(r: &Request, wanted: Wanted) -> Figures {
    let mut out = Figures::default();
    if !wanted.spot && !wanted.band && !wanted.snr {
        return out;
    }
    let srcs = sources(r.lin, r.op, r.kelvin, r.corners);
    let solver = Solver::new(r.mna, &srcs);
    let spot = (wanted.spot || wanted.snr).then(|| solver.spectrum(&srcs, r.spot_hz)).flatten();
    if let Some(spot) = &spot {
        out.noise_figure_db = spot.factor(&srcs).map(|f| 10.0 * f.log10());
        out.input_density = spot.input().map(f64::sqrt);
    }
    if (wanted.band || wanted.snr)
        && let Some((from, to, _)) = r.band
    {
        out.output_rms =
            band_sums(&solver, &srcs, from, to).map(|s| s[..srcs.len()].iter().sum::<f64>().sqrt());
    }
    out.snr_db = snr_db(r.amplitude_v, spot.as_ref().map(|s| s.gain), out.output_rms);
    out
}

/// 20·log10 of the signal's rms at the output (a sine of peak `amplitude` at the source EMF,
/// through the gain at the spot frequency) over the rms output noise.
fn snr_db(amplitude: Option<f64>, gain: Option<f64>, noise_rms: Option<f64>) -> Option<f64> {
    let signal = amplitude? / std::f64::consts::SQRT_2 * gain?;
    let noise = noise_rms?;
    (signal > 0.0 && noise > 0.0).then(|| 20.0 * (signal / noise).log10())
}

/// The noise review; None when the network cannot be solved at the spot frequency.
pub fn review(r: &Request) -> Option<NoiseReport> {
    let srcs = sources(r.lin, r.op, r.kelvin, r.corners);
    let solver = Solver::new(r.mna, &srcs);
    let spot = solver.spectrum(&srcs, r.spot_hz)?;
    let total = spot.output();
    let figure = |s: &Spectrum| s.factor(&srcs).map(|f| 10.0 * f.log10());
    let generators = input_generators(r.lin, r.op, r.kelvin, r.corners, r.spot_hz, |_| true);
    let optimum = generators.and_then(|(e2, i2)| optimum(e2, i2));
    let band = r.band.and_then(|(from, to, basis)| {
        Some((from, to, basis, band_sums(&solver, &srcs, from, to)?))
    });
    let band_total = band.as_ref().map(|(_, _, _, sums)| sums[..srcs.len()].iter().sum::<f64>());
    let mut contributors: Vec<Contributor> = Vec::new();
    for (k, src) in srcs.iter().enumerate() {
        let in_band = band.as_ref().map(|(_, _, _, sums)| sums[k]);
        match contributors.iter_mut().find(|c| c.part == src.part && c.mechanism == src.mechanism) {
            Some(c) => {
                c.density_v2_per_hz += spot.each[k];
                c.band_share = c.band_share.zip(in_band).map(|(a, b)| a + b);
            }
            None => contributors.push(Contributor {
                part: src.part.clone(),
                mechanism: src.mechanism,
                density_v2_per_hz: spot.each[k],
                share: 0.0,
                band_share: in_band,
            }),
        }
    }
    for c in &mut contributors {
        c.share = if total > 0.0 { c.density_v2_per_hz / total } else { 0.0 };
        c.band_share = c.band_share.zip(band_total).map(|(v, t)| if t > 0.0 { v / t } else { 0.0 });
    }
    contributors.sort_by(|a, b| b.share.total_cmp(&a.share).then_with(|| a.part.cmp(&b.part)));
    let mut responses = Vec::with_capacity(r.frequencies.len());
    let sweep = r
        .frequencies
        .iter()
        .filter_map(|&f| {
            let s = solver.spectrum(&srcs, f)?;
            responses.push((f, s.h));
            Some(NoisePoint {
                frequency_hz: f,
                output_density_v_per_rthz: s.output().sqrt(),
                input_density_v_per_rthz: s.input().map(f64::sqrt),
                noise_figure_db: figure(&s),
            })
        })
        .collect();
    let noise_band = band.map(|(start_hz, stop_hz, basis, sums)| NoiseBand {
        start_hz,
        stop_hz,
        basis,
        output_rms_v: sums[..srcs.len()].iter().sum::<f64>().sqrt(),
        input_rms_v: sums[srcs.len()].sqrt(),
    });
    Some(NoiseReport {
        temperature_k: r.kelvin,
        source_resistance_ohm: r.lin.source_terminal.1,
        spot_frequency_hz: r.spot_hz,
        output_density_v_per_rthz: total.sqrt(),
        input_density_v_per_rthz: spot.input().map(f64::sqrt),
        noise_factor: spot.factor(&srcs),
        noise_figure_db: figure(&spot),
        e_n_v_per_rthz: generators.map(|(e2, _)| e2.sqrt()),
        i_n_a_per_rthz: generators.map(|(_, i2)| i2.sqrt()),
        r_opt_ohm: optimum.map(|(r, _)| r),
        nf_min_db: optimum.map(|(_, f)| 10.0 * f.log10()),
        band: noise_band.clone(),
        signal_rms_v: r.amplitude_v.map(|a| a / std::f64::consts::SQRT_2),
        snr_db: snr_db(r.amplitude_v, Some(spot.gain), noise_band.map(|b| b.output_rms_v)),
        contributors,
        sweep,
        responses,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::mna::{self, Assembly, CapState};
    use crate::circuit::netlist::Netlist;
    use crate::circuit::{operating_point, small_signal};

    struct Case {
        lin: LinearNetwork,
        op: Option<OperatingPoint>,
        mna: Mna,
        kelvin: f64,
    }

    fn case(text: &str) -> Case {
        let loaded = crate::design::load(text);
        let d = loaded.design.unwrap_or_else(|| panic!("{:?}", loaded.diagnostics));
        let net = Netlist::from_design(&d);
        let op = net.has_devices().then(|| operating_point::solve(&net).expect("bias"));
        let (lin, _) = small_signal::linearize(&net, op.as_ref());
        let mna = mna::assemble(&lin, |_| CapState::Present, Assembly::default());
        Case { lin, op, mna, kelvin: d.temperature_k }
    }

    const K: f64 = BOLTZMANN;

    fn close(got: f64, want: f64, rel: f64, what: &str) {
        assert!((got - want).abs() <= rel * want.abs(), "{what}: {got:e} vs {want:e}");
    }

    #[test]
    fn an_rc_low_pass_integrates_to_kt_over_c() {
        // The kT/C identity (a textbook identity, common practice): the noise of any
        // resistance into C integrates to kT/C over all frequencies. With the source's
        // 1 kΩ at T0 and R1's 9 kΩ at 350 K in series, T is the resistance-weighted mean.
        let c = case(
            "tauweave: 1\ndesign: {id: t, title: t, revision: A, date: 2026-12-03}\n\
             environment: {temperature: 350 K}\n\
             signal: {at: in, resistance: 1k}\noutput: {at: out}\nparts:\n\
             \x20 R1: {kind: resistor, value: 9k, between: [in, out]}\n\
             \x20 C1: {kind: capacitor, value: 1n, between: [out, gnd]}\n",
        );
        let srcs = sources(&c.lin, None, c.kelvin, &[]);
        assert_eq!(srcs.len(), 2, "{srcs:?}");
        let solver = Solver::new(&c.mna, &srcs);
        let fc = 1.0 / (2.0 * std::f64::consts::PI * 10e3 * 1e-9);
        let total =
            integrate(|f| Some(vec![solver.spectrum(&srcs, f)?.output()]), fc * 1e-9, fc * 1e9)
                .unwrap()[0];
        let t_mean = (T0 * 1e3 + 350.0 * 9e3) / 10e3;
        close(total, K * t_mean / 1e-9, 1e-6, "∫ output noise");
    }

    /// A common-emitter stage, no capacitance but a 1 F coupling capacitor (a short at the
    /// test frequency), I_C near 1 mA, β = 100, no Early effect, base resistance `rx`.
    fn common_emitter(rx: &str, celsius: &str) -> Case {
        case(&format!(
            "tauweave: 1\ndesign: {{id: t, title: t, revision: A, date: 2026-12-03}}\n\
             environment: {{temperature: {celsius} °C}}\n\
             supplies: {{vcc: 12 V}}\nsignal: {{at: in, resistance: 1k}}\noutput: {{at: coll}}\n\
             parts:\n\
             \x20 C1: {{kind: capacitor, value: 1, between: [in, base], role: coupling}}\n\
             \x20 RB: {{kind: resistor, value: 1M, between: [vcc, base]}}\n\
             \x20 RC: {{kind: resistor, value: 1k, between: [vcc, coll]}}\n\
             \x20 Q1: {{kind: bjt, model: N, c: coll, b: base, e: gnd}}\n\
             models:\n  N: {{type: npn, beta: 100, saturation_current: 1e-15 A, base_resistance: {rx}}}\n"
        ))
    }

    /// gm, rπ, I_C and I_B of the first transistor.
    fn hybrid_pi(c: &Case) -> (f64, f64, f64, f64) {
        let value = |suffix: &str| {
            c.lin.elements[c.lin.devices[0].clone()]
                .iter()
                .find_map(|e| match e {
                    Linear::Conductance { name, g, .. } | Linear::Vccs { name, gm: g, .. }
                        if name.ends_with(suffix) =>
                    {
                        Some(*g)
                    }
                    _ => None,
                })
                .unwrap()
        };
        let DeviceState::Bjt { ic_a, ib_a, .. } = c.op.as_ref().unwrap().devices[0].state else {
            panic!("a bipolar transistor")
        };
        (value(".gm"), 1.0 / value(".rpi"), ic_a, ib_a)
    }

    #[test]
    fn a_common_emitter_transistor_has_the_published_input_noise_generators() {
        let c = common_emitter("10", "27");
        let (gm, rpi, ic, ib) = hybrid_pi(&c);
        let (kt, q, rx) = (K * c.kelvin, ELEMENTARY_CHARGE, 10.0);
        let (e2, i2) =
            input_generators(&c.lin, c.op.as_ref(), c.kelvin, &[], 1e6, |s| s.part == "Q1")
                .unwrap();
        // Derived by hand from the hybrid-π model with the input shorted and opened:
        // r_x's 4kT·r_x, base shot through r_x, collector shot referred through the gain.
        let e2_exact = 4.0 * kt * rx
            + 2.0 * q * ib * rx * rx
            + 2.0 * q * ic / (gm * gm) * (1.0 + rx / rpi).powi(2);
        // With the source open, RB (1 MΩ, to AC ground at the base) shunts the input.
        let rb = 1e6;
        let i2_exact = 2.0 * q * ib * ((rb + rx) / rb).powi(2)
            + 2.0 * q * ic * ((rb + rx + rpi) / (gm * rpi * rb)).powi(2);
        close(e2, e2_exact, 1e-7, "e_n² against the hybrid-π derivation");
        close(i2, i2_exact, 1e-7, "i_n² against the hybrid-π derivation");
        // Gray, Hurst, Lewis & Meyer (noise chapter, from memory): e_n² = 4kT(r_x + 1/(2g_m))
        // and i_n² = 2qI_B, each neglecting terms of order r_x/rπ and 1/β.
        close(e2, 4.0 * kt * (rx + 0.5 / gm), 0.01, "e_n² against the published form");
        close(i2, 2.0 * q * ib, 0.02, "i_n² against the published form");
    }

    #[test]
    fn a_common_emitter_transistor_has_the_published_optimum_source_and_noise_figure() {
        // At T0 and r_x = 0 (Gray, Hurst, Lewis & Meyer, noise chapter, from memory):
        // R_opt = √β/g_m and F_min = 1 + 1/√β, to order 1/β.
        let c = common_emitter("0", "16.85");
        let (gm, rpi, ic, ib) = hybrid_pi(&c);
        let beta = gm * rpi;
        let (e2, i2) =
            input_generators(&c.lin, c.op.as_ref(), c.kelvin, &[], 1e6, |s| s.part == "Q1")
                .unwrap();
        let (r_opt, f_min) = optimum(e2, i2).unwrap();
        close(r_opt, beta.sqrt() / gm, 0.01, "R_opt");
        close(f_min, 1.0 + 1.0 / beta.sqrt(), 0.01, "F_min");
        // The noise factor of the transistor from the 1 kΩ source, exactly: the hybrid-π
        // derivation (by hand) against the adjoint sum over Q1's sources and the source's.
        let srcs: Vec<Source> = sources(&c.lin, c.op.as_ref(), c.kelvin, &[])
            .into_iter()
            .filter(|s| s.is_source || s.part == "Q1")
            .collect();
        let s = Solver::new(&c.mna, &srcs).spectrum(&srcs, 1e6).unwrap();
        // RB (1 MΩ to AC ground) at the base: the source sees a Thévenin R_th = R_s ∥ RB
        // behind a divider RB/(R_s + RB).
        let (q, rs, rb) = (ELEMENTARY_CHARGE, 1e3, 1e6);
        let (rth, divider) = (rs * rb / (rs + rb), (rs + rb) / rb);
        let added = (2.0 * q * ib * rth * rth + 2.0 * q * ic * ((rth + rpi) / (gm * rpi)).powi(2))
            * divider
            * divider;
        close(s.factor(&srcs).unwrap(), 1.0 + added / (4.0 * K * T0 * rs), 1e-7, "F at 1 kΩ");
        // and the published approximation F ≈ 1 + 1/(2g_mR_s) + g_mR_s/(2β) within 3 %.
        let published = 1.0 + 0.5 / (gm * rs) + gm * rs / (2.0 * beta);
        close(s.factor(&srcs).unwrap(), published, 0.03, "F against the published form");
    }

    #[test]
    fn a_common_source_transistor_has_the_published_input_noise_voltage() {
        // e_n² = 4kTγ/g_m (Razavi, noise chapter, from memory), γ = 2/3.
        let c = case(
            "tauweave: 1\ndesign: {id: t, title: t, revision: A, date: 2026-12-03}\n\
             supplies: {vdd: 5 V, vg: 2 V}\nsignal: {at: in, resistance: 1k}\noutput: {at: d}\n\
             parts:\n\
             \x20 C1: {kind: capacitor, value: 1 µF, between: [in, g], role: coupling}\n\
             \x20 RG: {kind: resistor, value: 1M, between: [vg, g]}\n\
             \x20 RD: {kind: resistor, value: 2k, between: [vdd, d]}\n\
             \x20 M1: {kind: mosfet, model: N, d: d, g: g, s: gnd}\n\
             models:\n  N: {type: nmos, threshold: 1 V, process_transconductance: 200 µA/V², \
             width: 20 µm, length: 1 µm}\n",
        );
        let gm = c.lin.elements[c.lin.devices[0].clone()]
            .iter()
            .find_map(|e| match e {
                Linear::Vccs { gm, .. } => Some(*gm),
                _ => None,
            })
            .unwrap();
        let (e2, _) =
            input_generators(&c.lin, c.op.as_ref(), c.kelvin, &[], 1e6, |s| s.part == "M1")
                .unwrap();
        close(e2, 4.0 * K * c.kelvin * GAMMA / gm, 1e-7, "e_n²");
    }

    /// A flicker corner f_c adds S·f_c/f beside the white S it accompanies (the definition of
    /// the corner, common practice): at f_c the two are equal, a decade below it 10:1, and
    /// the whole over a band integrates to S·((f2 − f1) + f_c·ln(f2/f1)) through a flat path.
    #[test]
    fn a_flicker_corner_adds_one_over_f_noise_equal_to_the_white_at_the_corner() {
        let c = case(
            "tauweave: 1\ndesign: {id: t, title: t, revision: A, date: 2026-12-04}\n\
             supplies: {vdd: 5 V, vg: 2 V}\nsignal: {at: in, resistance: 1k}\noutput: {at: d}\n\
             parts:\n\
             \x20 C1: {kind: capacitor, value: 1 µF, between: [in, g], role: coupling}\n\
             \x20 RG: {kind: resistor, value: 1M, between: [vg, g]}\n\
             \x20 RD: {kind: resistor, value: 2k, between: [vdd, d]}\n\
             \x20 M1: {kind: mosfet, model: N, d: d, g: g, s: gnd}\n\
             models:\n  N: {type: nmos, threshold: 1 V, process_transconductance: 200 µA/V², \
             width: 20 µm, length: 1 µm, flicker_corner: 20 kHz}\n",
        );
        let corner = 20e3;
        let srcs = sources(&c.lin, c.op.as_ref(), c.kelvin, &[corner]);
        let find = |m: Mechanism| srcs.iter().position(|s| s.mechanism == m).unwrap();
        let (white, flicker) = (find(Mechanism::Channel), find(Mechanism::Flicker));
        let solver = Solver::new(&c.mna, &srcs);
        for (f, ratio) in [(corner, 1.0), (corner / 10.0, 10.0), (corner * 100.0, 0.01)] {
            let s = solver.spectrum(&srcs, f).unwrap();
            close(s.each[flicker] / s.each[white], ratio, 1e-12, "flicker to white");
        }
        // The drain current's path to the output is R_D ∥ r_o whatever the frequency (the
        // gate side carries none of it), so the band integral has the closed form.
        let (f1, f2) = (100.0, 1e5);
        let sums = integrate(
            |f| {
                let s = solver.spectrum(&srcs, f)?;
                Some(vec![s.each[white] + s.each[flicker]])
            },
            f1,
            f2,
        )
        .unwrap();
        let s_white = solver.spectrum(&srcs, 1e3).unwrap().each[white];
        close(sums[0], s_white * ((f2 - f1) + corner * (f2 / f1).ln()), 1e-7, "band integral");
        // Without a corner there is no flicker source.
        assert!(sources(&c.lin, c.op.as_ref(), c.kelvin, &[0.0]).iter().all(|s| !s.flicker));
    }

    #[test]
    fn a_resistor_divider_at_a_stated_temperature_gives_4ktr() {
        // 4kTR of each resistor through the divider (Johnson–Nyquist, common practice):
        // R2's current noise sees R2 ∥ (R1 + Rs); R1's and Rs's voltages are divided by 3.
        let c = case(
            "tauweave: 1\ndesign: {id: t, title: t, revision: A, date: 2026-12-03}\n\
             environment: {temperature: 350 K}\n\
             signal: {at: in, resistance: 1k}\noutput: {at: out}\nparts:\n\
             \x20 R1: {kind: resistor, value: 1k, between: [in, out]}\n\
             \x20 R2: {kind: resistor, value: 1k, between: [out, gnd]}\n",
        );
        let srcs = sources(&c.lin, None, c.kelvin, &[]);
        let s = Solver::new(&c.mna, &srcs).spectrum(&srcs, 1e3).unwrap();
        let z = 1e3 * 2e3 / 3e3;
        let want = 4.0 * K * (350.0 / 1e3 * z * z + (350.0 * 1e3 + T0 * 1e3) / 9.0);
        close(s.output(), want, 1e-9, "output density");
        // The noise factor: everything over the source's share.
        let from_source = 4.0 * K * T0 * 1e3 / 9.0;
        close(s.factor(&srcs).unwrap(), want / from_source, 1e-9, "noise factor");
    }
}
