//! The exact frequency response: a log-spaced sweep of H(j2πf), the exact −3 dB points
//! (bracketed on a log grid, refined by Brent's method), peaking, and the gain across a
//! stated operating band (its centre, its lowest and highest point).
//!
//! In: an assembled [`Mna`] and the mid-band gain. Out: sweep points and cut-offs. No I/O.

use std::f64::consts::PI;

use faer::c64;
use serde::Serialize;

use faer::Mat;

use crate::analysis::linear::{SPARSE_FROM, SparseSystem, brent_bracketed, sparse_pays};
use crate::analysis::matrix::Matrix;
use crate::analysis::mna::Mna;
use crate::analysis::pencil::Pencil;
use crate::analysis::schur;
use crate::design::Band;

/// One sweep point.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct SweepPoint {
    /// Frequency, Hz.
    pub frequency_hz: f64,
    /// |H| in dB.
    pub magnitude_db: f64,
    /// Phase, degrees, unwrapped along the sweep.
    pub phase_deg: f64,
}

/// The transfer function with the static unknowns (those no capacitor or inductor
/// touches) eliminated once: H(s) = y0 + c′ᵀ(G′ + sC′)⁻¹ b′, where G′ is the Schur
/// complement (`schur.rs`). Exact; each frequency then costs a factorisation of the small
/// dynamic part. A network with many dynamic unknowns (a ladder of parasitics) is kept whole
/// and solved in sparse form instead: its reduction would be large and dense.
pub struct Transfer(Form);

enum Form {
    /// The (reduced) pencil in Hessenberg–triangular form (`pencil.rs`): O(n²) a frequency.
    Dense {
        pencil: Pencil,
        direct: f64,
    },
    Sparse {
        system: SparseSystem,
        b: Vec<f64>,
        out: Vec<f64>,
    },
}

/// The sparse form of (g, c) when it pays ([`sparse_pays`]).
pub(crate) fn sparse_form(g: &Matrix, c: &Matrix) -> Option<SparseSystem> {
    sparse_pays(g.size(), g.nonzeros() + c.nonzeros()).then(|| SparseSystem::new(g, c)).flatten()
}

impl Transfer {
    /// Reduces `m` (or keeps it whole when its static part is singular, or it has many
    /// dynamic unknowns).
    pub fn new(m: &Mna) -> Transfer {
        let dynamic = schur::dynamic_unknowns(&m.c).len();
        if dynamic <= SPARSE_FROM
            && let Some(r) = schur::reduce(&m.g, &m.c, &m.b, &m.out)
        {
            return Transfer(Form::Dense {
                pencil: Pencil::new(&r.g, &r.c, &column(&r.b), &r.out),
                direct: r.direct,
            });
        }
        Transfer(match sparse_form(&m.g, &m.c) {
            Some(system) => Form::Sparse { system, b: m.b.clone(), out: m.out.clone() },
            None => Form::Dense {
                pencil: Pencil::new(&m.g.dense(), &m.c.dense(), &column(&m.b), &m.out),
                direct: 0.0,
            },
        })
    }

    /// H(j2πf).
    pub fn at(&self, f: f64) -> Option<c64> {
        let s = c64::new(0.0, 2.0 * PI * f);
        match &self.0 {
            Form::Sparse { system, b, out } => system.transfer(b, out, s),
            Form::Dense { pencil, direct } => pencil.transfer(s).map(|h| h + direct),
        }
    }
}

/// `v` as a one-column matrix.
fn column(v: &[f64]) -> Mat<f64> {
    Mat::from_fn(v.len(), 1, |i, _| v[i])
}

/// Log-spaced frequencies from `start` to `stop`, `per_decade` a decade, both ends included.
pub fn grid(start: f64, stop: f64, per_decade: u32) -> Vec<f64> {
    // The difference of logs: stop/start itself can overflow (1e-300 Hz … 1 GHz).
    let decades = stop.log10() - start.log10();
    let steps = (decades * per_decade as f64).ceil().max(1.0) as usize;
    (0..=steps).map(|k| start * 10f64.powf(decades * k as f64 / steps as f64)).collect()
}

/// The sweep over `frequencies`, phase unwrapped.
pub fn sweep(m: &Transfer, frequencies: &[f64]) -> Vec<SweepPoint> {
    points(frequencies.iter().filter_map(|&f| Some((f, m.at(f)?))))
}

impl Transfer {
    /// True when the response is solved in sparse form (a large network), where a solve
    /// that gives H as well (the noise sweep's) is worth sharing.
    pub fn is_sparse(&self) -> bool {
        matches!(self.0, Form::Sparse { .. })
    }
}

/// Sweep points from values of H, in frequency order, phase unwrapped.
pub fn points(values: impl Iterator<Item = (f64, c64)>) -> Vec<SweepPoint> {
    let mut out: Vec<SweepPoint> = Vec::new();
    let mut last_phase: Option<f64> = None;
    for (f, h) in values {
        let mut phase = h.im.atan2(h.re).to_degrees();
        if let Some(prev) = last_phase {
            while phase - prev > 180.0 {
                phase -= 360.0;
            }
            while phase - prev < -180.0 {
                phase += 360.0;
            }
        }
        last_phase = Some(phase);
        let mag = h.norm();
        out.push(SweepPoint {
            frequency_hz: f,
            magnitude_db: if mag > 0.0 { 20.0 * mag.log10() } else { -400.0 },
            phase_deg: phase,
        });
    }
    out
}

/// Searches from `from` in steps of at most 10^(±1/`per_decade`) until |H| drops below
/// `level`, then refines the crossing by Brent's method in log frequency. `up` picks the
/// direction; the search ends at `limit`.
///
/// With a time-constant `estimate` the walk starts near it: from the estimate itself when
/// |H| is still above the level there — in steps of an eighth of the grid's, doubling up to
/// the grid's, so a close estimate gives a tight bracket — else from within 20 % (or a
/// factor of two) of it, in the grid's steps. No step is longer than the grid's.
pub fn crossing(
    m: &Transfer,
    from: f64,
    level: f64,
    up: bool,
    per_decade: u32,
    limit: f64,
    estimate: Option<f64>,
) -> Option<f64> {
    let grid = 1.0 / per_decade.max(10) as f64;
    let below = |f: f64| m.at(f).map(|h| h.norm() - level);
    let mut f_prev = from;
    let mut g_prev = below(from)?;
    if g_prev < 0.0 {
        return None;
    }
    let beyond = |target: f64, start: f64| if up { target > start } else { target < start };
    let mut step = grid;
    if let Some(e) = estimate {
        let targets = if up { [e / 1.25, e / 2.0] } else { [e * 1.25, e * 2.0] };
        for target in targets {
            let Some(g) = beyond(target, from).then(|| below(target)).flatten() else { continue };
            if g >= 0.0 {
                (f_prev, g_prev) = (target, g);
                if let Some(g) = beyond(e, target).then(|| below(e)).flatten().filter(|g| *g >= 0.0)
                {
                    (f_prev, g_prev) = (e, g);
                    step = grid / 8.0;
                }
                break;
            }
        }
    }
    loop {
        let f = f_prev * 10f64.powf(if up { step } else { -step });
        if beyond(f, limit) {
            return None;
        }
        let g = below(f)?;
        if g < 0.0 {
            let (a, b) = ((f_prev.log10(), g_prev), (f.log10(), g));
            let x = brent_bracketed(|x| below(10f64.powf(x)).unwrap_or(-level), a, b, 1e-14);
            return Some(10f64.powf(x));
        }
        (f_prev, g_prev) = (f, g);
        step = (2.0 * step).min(grid);
    }
}

/// |H| across an operating band.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BandResponse {
    /// |H| at the band's geometric centre, V/V.
    pub centre: f64,
    /// The lowest |H| in the band: (frequency Hz, V/V).
    pub lowest: (f64, f64),
    /// The highest |H| in the band: (frequency Hz, V/V).
    pub highest: (f64, f64),
}

impl BandResponse {
    /// Highest over lowest, dB: the gain flatness.
    pub fn flatness_db(&self) -> f64 {
        20.0 * (self.highest.1 / self.lowest.1).log10()
    }
}

/// Log-spaced points a decade on the grid that brackets the band's extremes.
const BAND_POINTS_PER_DECADE: f64 = 64.0;

/// The centre, lowest and highest |H| over `band`: |H| on a log grid (both edges included,
/// at least 17 points), each extreme that falls inside the band refined by a golden-section
/// search in log frequency between its grid neighbours. None when H cannot be evaluated
/// somewhere in the band or vanishes there.
pub fn band_response(m: &Transfer, band: Band) -> Option<BandResponse> {
    let magnitude = |f: f64| m.at(f).map(|h| h.norm()).filter(|v| *v > 0.0 && v.is_finite());
    let (a, b) = (band.from_hz.log10(), band.to_hz.log10());
    let steps = ((b - a) * BAND_POINTS_PER_DECADE).ceil().max(16.0) as usize;
    let x: Vec<f64> = (0..=steps).map(|k| a + (b - a) * k as f64 / steps as f64).collect();
    let y: Vec<f64> = x.iter().map(|&x| magnitude(10f64.powf(x))).collect::<Option<_>>()?;
    let extreme = |sign: f64| {
        let k = (0..y.len()).max_by(|&i, &j| (sign * y[i]).total_cmp(&(sign * y[j])))?;
        if k == 0 || k == steps {
            return Some((10f64.powf(x[k]), y[k]));
        }
        let at = golden(|x| magnitude(10f64.powf(x)).map(|v| sign * v), x[k - 1], x[k + 1])?;
        let v = magnitude(10f64.powf(at))?;
        // The refined point can only improve on the grid's best.
        Some(if sign * v >= sign * y[k] { (10f64.powf(at), v) } else { (10f64.powf(x[k]), y[k]) })
    };
    Some(BandResponse {
        centre: magnitude(band.centre_hz())?,
        lowest: extreme(-1.0)?,
        highest: extreme(1.0)?,
    })
}

/// The maximiser of a unimodal `f` on [lo, hi], to 1e-6 of the interval — near a smooth
/// extreme the value's error is the square of that — by Brent's method: parabolic steps
/// through the best three points, golden-section steps when a parabola would leave the
/// bracket or shrink it too slowly (Brent, "Algorithms for Minimization without
/// Derivatives", 1973, ch. 5, from memory). About ten evaluations where golden section
/// alone takes thirty.
fn golden(mut f: impl FnMut(f64) -> Option<f64>, lo: f64, hi: f64) -> Option<f64> {
    let ratio = 0.5 * (3.0 - 5f64.sqrt());
    let tol = 1e-6 * (hi - lo);
    let (mut a, mut b) = (lo, hi);
    let mut x = a + ratio * (b - a);
    let (mut w, mut v) = (x, x);
    // Minimise −f.
    let mut fx = -f(x)?;
    let (mut fw, mut fv) = (fx, fx);
    let (mut d, mut e) = (0.0f64, 0.0f64);
    loop {
        let xm = 0.5 * (a + b);
        let tol1 = f64::EPSILON.sqrt() * x.abs() + tol / 3.0;
        let tol2 = 2.0 * tol1;
        if (x - xm).abs() <= tol2 - 0.5 * (b - a) {
            return Some(x);
        }
        let mut golden_step = true;
        if e.abs() > tol1 {
            let r = (x - w) * (fx - fv);
            let mut q = (x - v) * (fx - fw);
            let mut p = (x - v) * q - (x - w) * r;
            q = 2.0 * (q - r);
            if q > 0.0 {
                p = -p;
            } else {
                q = -q;
            }
            let previous = e;
            e = d;
            if p.abs() < (0.5 * q * previous).abs() && p > q * (a - x) && p < q * (b - x) {
                d = p / q;
                let u = x + d;
                if u - a < tol2 || b - u < tol2 {
                    d = tol1.copysign(xm - x);
                }
                golden_step = false;
            }
        }
        if golden_step {
            e = if x < xm { b - x } else { a - x };
            d = ratio * e;
        }
        let u = x + if d.abs() >= tol1 { d } else { tol1.copysign(d) };
        let fu = -f(u)?;
        if fu <= fx {
            if u < x {
                b = x;
            } else {
                a = x;
            }
            (v, fv, w, fw, x, fx) = (w, fw, x, fx, u, fu);
        } else {
            if u < x {
                a = u;
            } else {
                b = u;
            }
            if fu <= fw || w == x {
                (v, fv, w, fw) = (w, fw, u, fu);
            } else if fu <= fv || v == x || v == w {
                (v, fv) = (u, fu);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The maximiser of a smooth peak: 1/(1 + (x − c)²) peaks at c (by inspection), to the
    /// stated 1e-6 of the interval, in far fewer evaluations than golden section's ~30.
    #[test]
    fn the_extreme_search_finds_a_smooth_peak_in_few_evaluations() {
        for c in [0.137, 0.5, 0.91] {
            let mut calls = 0;
            let at = golden(
                |x| {
                    calls += 1;
                    Some(1.0 / (1.0 + (x - c) * (x - c)))
                },
                0.0,
                1.0,
            )
            .unwrap();
            assert!((at - c).abs() < 1e-6, "{at} vs {c}");
            assert!(calls <= 15, "{calls} evaluations");
        }
    }
}
