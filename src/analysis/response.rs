//! The exact frequency response: a log-spaced sweep of H(j2πf), the exact −3 dB points
//! (bracketed on a log grid, refined by Brent's method) and peaking.
//!
//! In: an assembled [`Mna`] and the mid-band gain. Out: sweep points and cut-offs. No I/O.

use std::f64::consts::PI;

use faer::c64;
use serde::Serialize;

use crate::analysis::linear::{brent, transfer};
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

/// H(j2πf).
pub fn at(m: &Mna, f: f64) -> Option<c64> {
    transfer(&m.g, &m.c, &m.b, &m.out, c64::new(0.0, 2.0 * PI * f))
}

/// Log-spaced frequencies from `start` to `stop`, `per_decade` a decade, both ends included.
pub fn grid(start: f64, stop: f64, per_decade: u32) -> Vec<f64> {
    let decades = (stop / start).log10();
    let steps = (decades * per_decade as f64).ceil().max(1.0) as usize;
    (0..=steps).map(|k| start * 10f64.powf(decades * k as f64 / steps as f64)).collect()
}

/// The sweep over `frequencies`, phase unwrapped.
pub fn sweep(m: &Mna, frequencies: &[f64]) -> Vec<SweepPoint> {
    let mut out: Vec<SweepPoint> = Vec::with_capacity(frequencies.len());
    let mut last_phase: Option<f64> = None;
    for &f in frequencies {
        let Some(h) = at(m, f) else { continue };
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
    m: &Mna,
    from: f64,
    level: f64,
    up: bool,
    per_decade: u32,
    limit: f64,
) -> Option<f64> {
    let ratio = 10f64.powf(1.0 / per_decade.max(10) as f64);
    let below = |f: f64| at(m, f).map(|h| h.norm() - level);
    let mut f_prev = from;
    let mut g_prev = below(from)?;
    if g_prev < 0.0 {
        return None;
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
        g_prev = g;
        let _ = g_prev;
    }
}
