//! The exact frequency response: a log-spaced sweep of H(j2πf), the exact −3 dB points
//! (bracketed on a log grid, refined by Brent's method) and peaking.
//!
//! In: an assembled [`Mna`] and the mid-band gain. Out: sweep points and cut-offs. No I/O.

use std::f64::consts::PI;

use faer::c64;
use serde::Serialize;

use faer::Mat;

use crate::analysis::linear::{Factor, brent, transfer};
use crate::analysis::mna::Mna;

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
/// complement. Exact; each frequency then costs a factorisation of the small dynamic part.
pub struct Transfer {
    g: Mat<f64>,
    c: Mat<f64>,
    b: Vec<f64>,
    out: Vec<f64>,
    direct: f64,
}

impl Transfer {
    /// Reduces `m` (or keeps it whole when its static part is singular).
    pub fn new(m: &Mna) -> Transfer {
        let n = m.size();
        let whole = || Transfer {
            g: m.g.clone(),
            c: m.c.clone(),
            b: m.b.clone(),
            out: m.out.clone(),
            direct: 0.0,
        };
        let dynamic: Vec<usize> =
            (0..n).filter(|&i| (0..n).any(|j| m.c[(i, j)] != 0.0 || m.c[(j, i)] != 0.0)).collect();
        let fixed: Vec<usize> = (0..n).filter(|i| !dynamic.contains(i)).collect();
        if fixed.is_empty() || dynamic.is_empty() {
            return whole();
        }
        let (d, f) = (dynamic.len(), fixed.len());
        let g_ss = Mat::<f64>::from_fn(f, f, |i, j| m.g[(fixed[i], fixed[j])]);
        let Ok(lu) = Factor::new(&g_ss) else { return whole() };
        // X = G_SS⁻¹ [G_SD | b_S]
        let rhs = Mat::<f64>::from_fn(f, d + 1, |i, j| {
            if j < d { m.g[(fixed[i], dynamic[j])] } else { m.b[fixed[i]] }
        });
        let x = lu.solve_columns(&rhs);
        let g = Mat::<f64>::from_fn(d, d, |i, j| {
            m.g[(dynamic[i], dynamic[j])]
                - (0..f).map(|k| m.g[(dynamic[i], fixed[k])] * x[(k, j)]).sum::<f64>()
        });
        let c = Mat::<f64>::from_fn(d, d, |i, j| m.c[(dynamic[i], dynamic[j])]);
        let b = (0..d)
            .map(|i| {
                m.b[dynamic[i]]
                    - (0..f).map(|k| m.g[(dynamic[i], fixed[k])] * x[(k, d)]).sum::<f64>()
            })
            .collect();
        let out = (0..d)
            .map(|j| m.out[dynamic[j]] - (0..f).map(|k| m.out[fixed[k]] * x[(k, j)]).sum::<f64>())
            .collect();
        let direct = (0..f).map(|k| m.out[fixed[k]] * x[(k, d)]).sum();
        Transfer { g, c, b, out, direct }
    }

    /// H(j2πf).
    pub fn at(&self, f: f64) -> Option<c64> {
        transfer(&self.g, &self.c, &self.b, &self.out, c64::new(0.0, 2.0 * PI * f))
            .map(|h| h + self.direct)
    }
}

/// Log-spaced frequencies from `start` to `stop`, `per_decade` a decade, both ends included.
pub fn grid(start: f64, stop: f64, per_decade: u32) -> Vec<f64> {
    let decades = (stop / start).log10();
    let steps = (decades * per_decade as f64).ceil().max(1.0) as usize;
    (0..=steps).map(|k| start * 10f64.powf(decades * k as f64 / steps as f64)).collect()
}

/// The sweep over `frequencies`, phase unwrapped.
pub fn sweep(m: &Transfer, frequencies: &[f64]) -> Vec<SweepPoint> {
    let mut out: Vec<SweepPoint> = Vec::with_capacity(frequencies.len());
    let mut last_phase: Option<f64> = None;
    for &f in frequencies {
        let Some(h) = m.at(f) else { continue };
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

/// Searches from `from` in steps of 10^(±1/`per_decade`) until |H| drops below `level`,
/// then refines the crossing by Brent's method in log frequency. `up` picks the direction;
/// the search ends at `limit`.
pub fn crossing(
    m: &Transfer,
    from: f64,
    level: f64,
    up: bool,
    per_decade: u32,
    limit: f64,
    estimate: Option<f64>,
) -> Option<f64> {
    let ratio = 10f64.powf(1.0 / per_decade.max(10) as f64);
    let below = |f: f64| m.at(f).map(|h| h.norm() - level);
    let mut f_prev = from;
    if below(from)? < 0.0 {
        return None;
    }
    // Jump toward the time-constant estimate (halfway there on a log scale) when the
    // response is still above the level there: the grid walk then starts close to the edge.
    if let Some(e) = estimate {
        let target = if up { e / 2.0 } else { e * 2.0 };
        let beyond_start = if up { target > from } else { target < from };
        if beyond_start && below(target).is_some_and(|g| g >= 0.0) {
            f_prev = target;
        }
    }
    loop {
        let f = if up { f_prev * ratio } else { f_prev / ratio };
        if (up && f > limit) || (!up && f < limit) {
            return None;
        }
        let g = below(f)?;
        if g < 0.0 {
            let (a, b) = (f_prev.log10(), f.log10());
            let x = brent(|x| below(10f64.powf(x)).unwrap_or(-level), a, b, 1e-14);
            return Some(10f64.powf(x));
        }
        f_prev = f;
    }
}
