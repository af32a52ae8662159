//! The stage at its ports: scattering parameters in a reference impedance, the Rollett and
//! single-parameter stability tests, and the input and output impedances with the design's
//! own source and load.
//!
//! In: the small-signal network. Out: a [`PortsReport`]. Port 1 is the node the source drives
//! against the source's return, port 2 the output; the two-port is the stage without the
//! source resistance and without the design's load (`load.r`, `load.c`). Each frequency is
//! one complex factorisation of the stage terminated in the reference Z₀ at both ports, solved
//! for a drive at each port: with an EMF E behind Z₀ at port k, S_kk = 2V_k/E − 1 and
//! S_jk = 2V_j/E (Pozar, Microwave Engineering, ch. 4, from memory). The impedances with the
//! design's terminations follow from S: Γ_in = S₁₁ + S₁₂S₂₁Γ_L/(1 − S₂₂Γ_L) and its mirror.
//! No I/O.

use faer::Mat;
use faer::c64;
use faer::linalg::solvers::Solve;

use crate::analysis::linear::{SMALL, SparseSystem, sparse_pays};
use crate::analysis::mna::{self, Assembly, CapState, Mna};
use crate::circuit::small_signal::{Linear, LinearNetwork};

/// The reference impedance when the design states none, Ω (common practice).
pub const DEFAULT_REFERENCE_OHM: f64 = 50.0;

/// The two-port at one frequency.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PortPoint {
    /// Hz.
    pub frequency_hz: f64,
    /// S₁₁, S₂₁, S₁₂, S₂₂.
    pub s: [c64; 4],
    /// The input impedance with the design's load at port 2, Ω.
    pub z_in: c64,
    /// The output impedance with the design's source resistance at port 1, Ω.
    pub z_out: c64,
}

impl PortPoint {
    /// Δ = S₁₁S₂₂ − S₁₂S₂₁.
    pub fn delta(&self) -> c64 {
        let [s11, s21, s12, s22] = self.s;
        s11 * s22 - s12 * s21
    }

    /// Rollett's K = (1 − |S₁₁|² − |S₂₂|² + |Δ|²)/(2|S₁₂S₂₁|); None for a unilateral stage
    /// (|S₁₂S₂₁| at or under [`NEGLIGIBLE`]), which K cannot judge.
    pub fn k(&self) -> Option<f64> {
        let [s11, s21, s12, s22] = self.s;
        let loop_gain = (s12 * s21).norm();
        (loop_gain > NEGLIGIBLE).then(|| {
            (1.0 - s11.norm_sqr() - s22.norm_sqr() + self.delta().norm_sqr()) / (2.0 * loop_gain)
        })
    }

    /// Edwards and Sinsky's μ = (1 − |S₁₁|²)/(|S₂₂ − ΔS₁₁*| + |S₁₂S₂₁|) (IEEE Trans. MTT
    /// 40(12), 1992): the stage is unconditionally stable exactly when μ > 1. None when the
    /// denominator is at or under [`NEGLIGIBLE`]: for a unilateral stage it is
    /// |S₂₂|(1 − |S₁₁|²), and with a lossless input (|S₁₁| = 1) μ is 0/0, rounding alone.
    pub fn mu(&self) -> Option<f64> {
        let [s11, s21, s12, s22] = self.s;
        let den = (s22 - self.delta() * s11.conj()).norm() + (s12 * s21).norm();
        (den > NEGLIGIBLE).then(|| (1.0 - s11.norm_sqr()) / den)
    }

    /// Return loss at port 1, dB (−20·log10|S₁₁|); None for a perfect match.
    pub fn input_return_loss_db(&self) -> Option<f64> {
        let m = self.s[0].norm();
        (m > 0.0).then(|| -20.0 * m.log10())
    }

    /// Reverse isolation −20·log10|S₁₂|, dB; None for a unilateral stage (|S₁₂| at or under
    /// [`NEGLIGIBLE`]: more than 180 dB, rounding).
    pub fn reverse_isolation_db(&self) -> Option<f64> {
        let m = self.s[2].norm();
        (m > NEGLIGIBLE).then(|| -20.0 * m.log10())
    }

    /// Return loss at port 2, dB.
    pub fn output_return_loss_db(&self) -> Option<f64> {
        let m = self.s[3].norm();
        (m > 0.0).then(|| -20.0 * m.log10())
    }
}

/// Voltage standing-wave ratio (1 + |Γ|)/(1 − |Γ|); None at total reflection or beyond
/// (|Γ| within [`NEGLIGIBLE`] of 1, where the ratio is rounding).
pub fn vswr(gamma: c64) -> Option<f64> {
    let m = gamma.norm();
    (m < 1.0 - NEGLIGIBLE).then(|| (1.0 + m) / (1.0 - m))
}

/// A product of unit-order scattering parameters at or under this is rounding: a loop gain
/// |S₁₂S₂₁| this small makes the stage unilateral (more than 90 dB of isolation at unity
/// gain), and a μ denominator this small leaves μ undetermined.
pub const NEGLIGIBLE: f64 = 1e-9;

/// How far below 1 μ must fall to count as conditionally stable: a lossless or lone series
/// or shunt element sits exactly on μ = 1, and near total reflection rounding moves μ by
/// 1e-8 and more, which must not be flagged.
const MU_MARGIN: f64 = 1e-6;

/// The ports review.
#[derive(Clone, Debug, PartialEq)]
pub struct PortsReport {
    /// Z₀, Ω.
    pub reference_ohm: f64,
    /// False when the design states none and [`DEFAULT_REFERENCE_OHM`] is used.
    pub reference_stated: bool,
    /// Each sweep frequency where the terminated stage solves.
    pub points: Vec<PortPoint>,
    /// At the spot frequency (the band's centre, else mid-band).
    pub spot: Option<PortPoint>,
    /// The worst return loss at each port across the review band.
    pub band: Option<PortBand>,
}

/// The worst match across a band: the smallest return loss at each port and where.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PortBand {
    /// Band edges, Hz.
    pub from_hz: f64,
    /// Band edges, Hz.
    pub to_hz: f64,
    /// The smallest return loss at port 1, dB, and its frequency (None when no point of the
    /// band solves).
    pub input_return_loss_db: Option<(f64, f64)>,
    /// The smallest return loss at port 2, dB, and its frequency.
    pub output_return_loss_db: Option<(f64, f64)>,
}

/// Points of a band on which its worst return loss is searched: log-spaced, edges included.
pub const BAND_POINTS: usize = 64;

/// The log-spaced frequencies of a band, edges included.
fn band_grid(from: f64, to: f64) -> impl Iterator<Item = f64> {
    let n = BAND_POINTS - 1;
    (0..=n).map(move |k| if k == n { to } else { from * (to / from).powf(k as f64 / n as f64) })
}

/// The point with the smallest value of `f` among `points`: (value, frequency).
fn least(points: &[PortPoint], f: impl Fn(&PortPoint) -> Option<f64>) -> Option<(f64, f64)> {
    points
        .iter()
        .filter_map(|p| f(p).map(|v| (v, p.frequency_hz)))
        .min_by(|a, b| a.0.total_cmp(&b.0))
}

/// The worst return losses across [from, to] Hz.
fn band_of(t: &Terminated, lin: &LinearNetwork, z0: f64, (from, to): (f64, f64)) -> PortBand {
    let points: Vec<PortPoint> = band_grid(from, to).filter_map(|f| t.at(f, lin, z0)).collect();
    PortBand {
        from_hz: from,
        to_hz: to,
        input_return_loss_db: least(&points, PortPoint::input_return_loss_db),
        output_return_loss_db: least(&points, PortPoint::output_return_loss_db),
    }
}

/// The figures requirements limit, without the rest of the review.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Figures {
    /// The smallest return loss at port 1 across the band, dB.
    pub input_return_loss_db: Option<f64>,
    /// The smallest return loss at port 2 across the band, dB.
    pub output_return_loss_db: Option<f64>,
    /// The smallest μ over the sweep.
    pub mu_min: Option<f64>,
}

/// Which of [`Figures`] to compute.
#[derive(Clone, Copy, Debug, Default)]
pub struct Wanted {
    /// Either return loss (both come from the same solves).
    pub return_loss: bool,
    /// μ over the sweep.
    pub stability: bool,
}

/// The figures `wanted` asks for: the return losses across `band`, μ over `frequencies` —
/// the same numbers [`review`] reports.
pub fn figures(
    lin: &LinearNetwork,
    reference_ohm: Option<f64>,
    frequencies: &[f64],
    band: Option<(f64, f64)>,
    wanted: Wanted,
) -> Figures {
    if !wanted.return_loss && !wanted.stability {
        return Figures::default();
    }
    let z0 = reference_ohm.unwrap_or(DEFAULT_REFERENCE_OHM);
    let Some(t) = Terminated::new(lin, z0) else { return Figures::default() };
    let b = band.filter(|_| wanted.return_loss).map(|b| band_of(&t, lin, z0, b));
    let mu_min = wanted
        .stability
        .then(|| frequencies.iter().filter_map(|&f| t.at(f, lin, z0)?.mu()).reduce(f64::min))
        .flatten();
    Figures {
        input_return_loss_db: b.and_then(|b| b.input_return_loss_db).map(|(v, _)| v),
        output_return_loss_db: b.and_then(|b| b.output_return_loss_db).map(|(v, _)| v),
        mu_min,
    }
}

impl PortsReport {
    /// The smallest K over the sweep (None for a unilateral stage).
    pub fn k_min(&self) -> Option<f64> {
        self.points.iter().filter_map(PortPoint::k).reduce(f64::min)
    }

    /// The smallest μ over the sweep.
    pub fn mu_min(&self) -> Option<f64> {
        self.points.iter().filter_map(PortPoint::mu).reduce(f64::min)
    }

    /// The frequency ranges (first and last sweep point) where μ < 1: the stage is only
    /// conditionally stable there (some passive terminations make it oscillate).
    pub fn conditionally_stable(&self) -> Vec<(f64, f64)> {
        let mut out: Vec<(f64, f64)> = Vec::new();
        let mut open: Option<(f64, f64)> = None;
        for p in &self.points {
            let unstable = p.mu().is_some_and(|m| m < 1.0 - MU_MARGIN);
            match (&mut open, unstable) {
                (Some(r), true) => r.1 = p.frequency_hz,
                (None, true) => open = Some((p.frequency_hz, p.frequency_hz)),
                (Some(_), false) => out.extend(open.take()),
                (None, false) => {}
            }
        }
        out.extend(open);
        out
    }
}

/// The stage of `lin` as a two-port, terminated in `z0` at both ports.
struct Terminated {
    solver: Solver,
    /// Port 1 drive: the EMF (1 V) behind Z₀.
    drive_1: Vec<f64>,
    /// Port 2 drive: 1 V behind Z₀ as a Norton current.
    drive_2: Vec<f64>,
    /// Port voltages as functionals of the unknowns.
    port_1: Vec<f64>,
    port_2: Vec<f64>,
}

enum Solver {
    Dense(Mat<f64>, Mat<f64>),
    Sparse(SparseSystem),
}

impl Solver {
    fn new(m: &Mna) -> Option<Solver> {
        let n = m.size();
        if n > SMALL && sparse_pays(n, m.g.nonzeros() + m.c.nonzeros()) {
            return SparseSystem::new(&m.g, &m.c).map(Solver::Sparse);
        }
        Some(Solver::Dense(m.g.dense(), m.c.dense()))
    }

    /// (G + sC)⁻¹ applied to two right-hand sides.
    fn solve(&self, s: c64, a: &[f64], b: &[f64]) -> Option<[Vec<c64>; 2]> {
        let complex = |v: &[f64]| v.iter().map(|x| c64::new(*x, 0.0)).collect::<Vec<_>>();
        match self {
            Solver::Sparse(sys) => Some([sys.solve(s, &complex(a))?, sys.solve(s, &complex(b))?]),
            Solver::Dense(g, c) if g.nrows() <= SMALL => solve_small(g, c, s, a, b),
            Solver::Dense(g, c) => {
                let n = g.nrows();
                let m = Mat::<c64>::from_fn(n, n, |i, j| c64::new(g[(i, j)], 0.0) + s * c[(i, j)]);
                let scale = (0..n)
                    .flat_map(|i| (0..n).map(move |j| (i, j)))
                    .fold(0.0f64, |acc, (i, j)| acc.max(m[(i, j)].norm()));
                let lu = m.partial_piv_lu();
                let u = lu.U();
                if (0..n).any(|i| u[(i, i)].norm() <= 1e-13 * scale) {
                    return None;
                }
                let rhs = Mat::<c64>::from_fn(n, 2, |i, j| {
                    c64::new(if j == 0 { a[i] } else { b[i] }, 0.0)
                });
                let x = lu.solve(&rhs);
                let col = |j: usize| (0..n).map(|i| x[(i, j)]).collect::<Vec<_>>();
                let out = [col(0), col(1)];
                out.iter().flatten().all(|v| v.is_finite()).then_some(out)
            }
        }
    }
}

/// (G + sC)⁻¹ applied to `a` and `b` by Gaussian elimination with partial pivoting in place
/// (magnitudes compared squared), for the small systems of a stage: no library call and one
/// buffer per solve. None when a pivot is at or under 1e-13 of the largest entry.
fn solve_small(g: &Mat<f64>, c: &Mat<f64>, s: c64, a: &[f64], b: &[f64]) -> Option<[Vec<c64>; 2]> {
    let n = g.nrows();
    let w = n + 2;
    let zero = c64::new(0.0, 0.0);
    let mut m = vec![zero; n * w];
    let mut largest = 0.0f64;
    for i in 0..n {
        for j in 0..n {
            let v = c64::new(g[(i, j)], 0.0) + s * c[(i, j)];
            largest = largest.max(v.norm_sqr());
            m[i * w + j] = v;
        }
        m[i * w + n] = c64::new(a[i], 0.0);
        m[i * w + n + 1] = c64::new(b[i], 0.0);
    }
    let floor = 1e-26 * largest;
    for k in 0..n {
        let p = crate::analysis::linear::pivot(&m, w, n, k, floor)?;
        if p != k {
            for j in 0..w {
                m.swap(k * w + j, p * w + j);
            }
        }
        let inv = c64::new(1.0, 0.0) / m[k * w + k];
        for i in k + 1..n {
            let f = m[i * w + k] * inv;
            if f == zero {
                continue;
            }
            for j in k..w {
                let t = m[k * w + j];
                m[i * w + j] -= f * t;
            }
        }
    }
    let mut out = [vec![zero; n], vec![zero; n]];
    for (col, x) in out.iter_mut().enumerate() {
        for i in (0..n).rev() {
            let mut acc = m[i * w + n + col];
            for j in i + 1..n {
                acc -= m[i * w + j] * x[j];
            }
            x[i] = acc / m[i * w + i];
        }
    }
    out.iter().flatten().all(|v| v.is_finite()).then_some(out)
}

fn dot(a: &[c64], f: &[f64]) -> c64 {
    a.iter().zip(f).fold(c64::new(0.0, 0.0), |acc, (x, w)| acc + x * *w)
}

/// The design's terminations as impedances at `s`: the source resistance, and the load
/// (`load.r` ∥ `load.c`; None for an open output).
fn terminations(lin: &LinearNetwork, s: c64) -> (f64, Option<c64>) {
    let mut y = c64::new(0.0, 0.0);
    let mut any = false;
    for el in &lin.elements {
        match el {
            Linear::Conductance { name, g, .. } if name == "load.r" => {
                y += c64::new(*g, 0.0);
                any = true;
            }
            Linear::Capacitor { name, c, .. } if name == "load.c" => {
                y += s * *c;
                any = true;
            }
            _ => {}
        }
    }
    let load = (any && y.norm() > 0.0).then(|| c64::new(1.0, 0.0) / y);
    (lin.source_terminal.1, load)
}

fn is_load(el: &Linear) -> bool {
    matches!(el, Linear::Conductance { name, .. } | Linear::Capacitor { name, .. } if name == "load.r" || name == "load.c")
}

impl Terminated {
    fn new(lin: &LinearNetwork, z0: f64) -> Option<Terminated> {
        let mut t = lin.clone();
        let (terminal, _) = lin.source_terminal;
        let (emf, ret) = lin.source;
        // The source resistance becomes Z₀; the design's load leaves; Z₀ closes port 2.
        for el in &mut t.elements {
            match el {
                Linear::Conductance { a, b, g, .. }
                    if (*a == emf && *b == terminal) || (*a == terminal && *b == emf) =>
                {
                    *g = 1.0 / z0;
                }
                _ => {}
            }
        }
        t.elements.retain(|el| !is_load(el));
        t.load_resistance = None;
        let (op, on) = lin.output;
        t.elements.push(Linear::Conductance { name: "port2.z0".into(), a: op, b: on, g: 1.0 / z0 });
        let m = mna::assemble(&t, |_| CapState::Present, Assembly::default());
        let mut drive_2 = m.incidence(op, on);
        drive_2.iter_mut().for_each(|v| *v /= z0);
        Some(Terminated {
            solver: Solver::new(&m)?,
            drive_1: m.b.clone(),
            drive_2,
            port_1: m.incidence(terminal, ret),
            port_2: m.out.clone(),
        })
    }

    fn at(&self, f: f64, lin: &LinearNetwork, z0: f64) -> Option<PortPoint> {
        let s = c64::new(0.0, 2.0 * std::f64::consts::PI * f);
        let [x1, x2] = self.solver.solve(s, &self.drive_1, &self.drive_2)?;
        let (v11, v21) = (dot(&x1, &self.port_1), dot(&x1, &self.port_2));
        let (v12, v22) = (dot(&x2, &self.port_1), dot(&x2, &self.port_2));
        let one = c64::new(1.0, 0.0);
        let s = [v11 * 2.0 - one, v21 * 2.0, v12 * 2.0, v22 * 2.0 - one];
        let (rs, load) = terminations(lin, c64::new(0.0, 2.0 * std::f64::consts::PI * f));
        let gamma = |z: c64| (z - z0) / (z + z0);
        let g_l = load.map_or(one, gamma);
        let g_s = gamma(c64::new(rs, 0.0));
        let [s11, s21, s12, s22] = s;
        let g_in = s11 + s12 * s21 * g_l / (one - s22 * g_l);
        let g_out = s22 + s12 * s21 * g_s / (one - s11 * g_s);
        let z = |g: c64| c64::new(z0, 0.0) * (one + g) / (one - g);
        let point = PortPoint { frequency_hz: f, s, z_in: z(g_in), z_out: z(g_out) };
        point.s.iter().chain([&point.z_in, &point.z_out]).all(|v| v.is_finite()).then_some(point)
    }
}

/// The ports review over `frequencies`, with the spot values at `spot_hz` and the worst
/// match across `band`; None when the terminated stage cannot be assembled.
pub fn review(
    lin: &LinearNetwork,
    reference_ohm: Option<f64>,
    frequencies: &[f64],
    spot_hz: f64,
    band: Option<(f64, f64)>,
) -> Option<PortsReport> {
    let z0 = reference_ohm.unwrap_or(DEFAULT_REFERENCE_OHM);
    let t = Terminated::new(lin, z0)?;
    let points = frequencies.iter().filter_map(|&f| t.at(f, lin, z0)).collect();
    Some(PortsReport {
        reference_ohm: z0,
        reference_stated: reference_ohm.is_some(),
        points,
        spot: t.at(spot_hz, lin, z0),
        band: band.map(|b| band_of(&t, lin, z0, b)),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(f: f64, s: [f64; 4]) -> PortPoint {
        let c = |v: f64| c64::new(v, 0.0);
        PortPoint { frequency_hz: f, s: s.map(c), z_in: c(50.0), z_out: c(50.0) }
    }

    #[test]
    fn k_and_mu_of_a_potentially_unstable_set_derived_by_hand() {
        // S₁₁ = S₂₂ = 0.9, S₁₂ = 0.5, S₂₁ = 5: Δ = 0.81 − 2.5 = −1.69, so
        // K = (1 − 0.81 − 0.81 + 1.69²)/(2·2.5) = 0.447 22 and
        // μ = (1 − 0.81)/(|0.9 + 1.69·0.9| + 2.5) = 0.19/4.921 (by hand).
        let p = point(1e6, [0.9, 5.0, 0.5, 0.9]);
        assert!((p.k().unwrap() - (1.0 - 1.62 + 1.69f64.powi(2)) / 5.0).abs() < 1e-12);
        assert!((p.mu().unwrap() - 0.19 / (0.9 + 1.69 * 0.9 + 2.5)).abs() < 1e-12);
        // A unilateral stage has no K.
        assert_eq!(point(1e6, [0.5, 3.0, 0.0, 0.5]).k(), None);
    }

    #[test]
    fn conditionally_stable_ranges_span_the_points_below_mu_one() {
        let stable = [0.1, 1.0, 0.1, 0.1];
        let unstable = [0.9, 5.0, 0.5, 0.9];
        let report = PortsReport {
            reference_ohm: 50.0,
            reference_stated: false,
            points: vec![
                point(1.0, stable),
                point(2.0, unstable),
                point(3.0, unstable),
                point(4.0, stable),
                point(5.0, unstable),
            ],
            spot: None,
            band: None,
        };
        assert_eq!(report.conditionally_stable(), vec![(2.0, 3.0), (5.0, 5.0)]);
        assert!(report.mu_min().unwrap() < 1.0);
    }
}
