//! The stage in time: the step response by partial fractions of the exact poles and zeros,
//! its 10–90 % rise time, overshoot and settling time, and the group delay over the band.
//!
//! In: a gain, poles and zeros (rad/s). Out: a [`StepReport`] or a [`GroupDelayReport`].
//! For H(s) = A·∏(1 − s/z_j)/∏(1 − s/p_i) with simple poles, the step response is
//! y(t) = A·[1 − Σᵢ cᵢ·e^{pᵢt}], cᵢ = ∏_j(1 − pᵢ/z_j)/∏_{k≠i}(1 − pᵢ/p_k) (the residues of
//! H(s)/s; Oppenheim & Willsky, Signals and Systems, ch. 9, from memory); the group delay is
//! Σ_p −σ_p/((ω − ω_p)² + σ_p²) − Σ_z −σ_z/((ω − ω_z)² + σ_z²) for p = σ_p + jω_p. Exact for
//! the linear stage; crossings refined by bisection on the closed form. No I/O.

use faer::c64;

/// Samples of the step response before the crossings are refined.
const SAMPLES: usize = 4000;
/// Poles closer than this (relative) count as repeated, which the closed form cannot take.
const REPEATED: f64 = 1e-7;
/// The settling band when the design states none (common practice: 1 %).
pub const DEFAULT_SETTLING_BAND: f64 = 0.01;

/// The step response's figures.
#[derive(Clone, Debug, PartialEq)]
pub struct StepReport {
    /// 10–90 % rise time, s.
    pub rise_time_s: f64,
    /// Peak over the final value, as a fraction (0 when it never exceeds it).
    pub overshoot: f64,
    /// When it last leaves ±`settling_band` of its final value, s.
    pub settling_time_s: Option<f64>,
    /// The settling band, a fraction of the final value.
    pub settling_band: f64,
    /// 0.35/f_H, s, when the upper cut-off is known (the rule of thumb for one pole).
    pub rule_of_thumb_s: Option<f64>,
    /// (t, y/A) over the response, for the plot.
    pub curve: Vec<[f64; 2]>,
}

/// The normalised step response y(t)/A and its derivative, from the residues.
struct Response {
    poles: Vec<c64>,
    residues: Vec<c64>,
}

impl Response {
    fn new(poles: &[c64], zeros: &[c64]) -> Option<Response> {
        let one = c64::new(1.0, 0.0);
        for (i, p) in poles.iter().enumerate() {
            if p.re >= 0.0 {
                return None; // no settled step from an unstable or marginal network
            }
            for q in &poles[i + 1..] {
                if (p - q).norm() <= REPEATED * p.norm() {
                    return None;
                }
            }
        }
        let residues = poles
            .iter()
            .enumerate()
            .map(|(i, p)| {
                let num = zeros.iter().fold(one, |acc, z| acc * (one - p / z));
                let den = poles
                    .iter()
                    .enumerate()
                    .filter(|(k, _)| *k != i)
                    .fold(one, |acc, (_, q)| acc * (one - p / q));
                num / den
            })
            .collect();
        let residues: Vec<c64> = residues;
        residues.iter().all(|c| c.is_finite()).then(|| Response { poles: poles.to_vec(), residues })
    }

    /// y(t)/A.
    fn at(&self, t: f64) -> f64 {
        let sum = self
            .poles
            .iter()
            .zip(&self.residues)
            .fold(c64::new(0.0, 0.0), |acc, (p, c)| acc + c * (p * t).exp());
        1.0 - sum.re
    }

    /// d(y/A)/dt.
    fn slope(&self, t: f64) -> f64 {
        let sum = self
            .poles
            .iter()
            .zip(&self.residues)
            .fold(c64::new(0.0, 0.0), |acc, (p, c)| acc + c * p * (p * t).exp());
        -sum.re
    }
}

/// The root of `f` between `a` and `b` (f(a), f(b) of opposite signs) by bisection to the
/// last bit.
fn bisect(f: impl Fn(f64) -> f64, mut a: f64, mut b: f64) -> f64 {
    let fa = f(a);
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        if m <= a || m >= b {
            break;
        }
        if (f(m) > 0.0) == (fa > 0.0) {
            a = m;
        } else {
            b = m;
        }
    }
    0.5 * (a + b)
}

/// The step response of poles and zeros given in rad/s; None for a repeated or unstable
/// pole, or no pole at all.
pub fn step(
    poles: &[c64],
    zeros: &[c64],
    settling_band: f64,
    f_high: Option<f64>,
) -> Option<StepReport> {
    if poles.is_empty() {
        return None;
    }
    let r = Response::new(poles, zeros)?;
    let slowest = poles.iter().map(|p| -p.re).fold(f64::INFINITY, f64::min);
    let end = 14.0 / slowest;
    let dt = end / SAMPLES as f64;
    let t = |k: usize| k as f64 * dt;
    let y: Vec<f64> = (0..=SAMPLES).map(|k| r.at(t(k))).collect();
    let crossing = |level: f64| {
        let k = (1..=SAMPLES).find(|&k| y[k - 1] < level && y[k] >= level)?;
        Some(bisect(|x| r.at(x) - level, t(k - 1), t(k)))
    };
    let rise_time_s = crossing(0.9)? - crossing(0.1)?;
    // The peak: where the slope turns from rising to falling, highest first.
    let mut overshoot = 0.0f64;
    for k in 1..SAMPLES {
        if y[k] > 1.0 && y[k] >= y[k - 1] && y[k] >= y[k + 1] {
            let peak = if r.slope(t(k - 1)) > 0.0 && r.slope(t(k + 1)) < 0.0 {
                r.at(bisect(|x| r.slope(x), t(k - 1), t(k + 1)))
            } else {
                y[k]
            };
            overshoot = overshoot.max(peak - 1.0);
        }
    }
    let outside = |v: f64| (v - 1.0).abs() > settling_band;
    let settling_time_s = match (0..=SAMPLES).rev().find(|&k| outside(y[k])) {
        Some(k) if k == SAMPLES => None,
        Some(k) => {
            let level = if y[k] > 1.0 { 1.0 + settling_band } else { 1.0 - settling_band };
            Some(bisect(|x| r.at(x) - level, t(k), t(k + 1)))
        }
        None => Some(0.0),
    };
    let shown = 400;
    let curve = (0..=shown)
        .map(|k| {
            let x = end * k as f64 / shown as f64 / 2.0;
            [x, r.at(x)]
        })
        .collect();
    Some(StepReport {
        rise_time_s,
        overshoot,
        settling_time_s,
        settling_band,
        rule_of_thumb_s: f_high.map(|f| 0.35 / f),
        curve,
    })
}

/// The group delay at angular frequency ω of poles and zeros in rad/s, s.
pub fn group_delay(poles: &[c64], zeros: &[c64], omega: f64) -> f64 {
    let term = |r: &c64| {
        let d = omega - r.im;
        -r.re / (d * d + r.re * r.re)
    };
    poles.iter().map(term).sum::<f64>() - zeros.iter().map(term).sum::<f64>()
}

/// The group delay across a band.
#[derive(Clone, Debug, PartialEq)]
pub struct GroupDelayReport {
    /// Band edges, Hz.
    pub from_hz: f64,
    /// Band edges, Hz.
    pub to_hz: f64,
    /// At the band's geometric centre, s.
    pub centre_s: f64,
    /// Smallest over the band, s.
    pub min_s: f64,
    /// Largest over the band, s.
    pub max_s: f64,
}

impl GroupDelayReport {
    /// max − min, s.
    pub fn variation_s(&self) -> f64 {
        self.max_s - self.min_s
    }
}

/// The group delay across [from, to] Hz, on 200 log-spaced points and the edges.
pub fn group_delay_over(
    poles: &[c64],
    zeros: &[c64],
    from: f64,
    to: f64,
) -> Option<GroupDelayReport> {
    if !(from > 0.0 && to > from) || poles.is_empty() {
        return None;
    }
    let w = |f: f64| 2.0 * std::f64::consts::PI * f;
    let n = 200;
    let values: Vec<f64> = (0..=n)
        .map(|k| {
            let f = from * (to / from).powf(k as f64 / n as f64);
            group_delay(poles, zeros, w(f))
        })
        .collect();
    let min_s = values.iter().copied().fold(f64::INFINITY, f64::min);
    let max_s = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let centre_s = group_delay(poles, zeros, w((from * to).sqrt()));
    [min_s, max_s, centre_s].iter().all(|v| v.is_finite()).then_some(GroupDelayReport {
        from_hz: from,
        to_hz: to,
        centre_s,
        min_s,
        max_s,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_pole_rises_in_tau_ln_9_and_never_overshoots() {
        // y = 1 − e^(−t/τ): 10 % at τ·ln(10/9), 90 % at τ·ln 10, so t_r = τ·ln 9; to 1 % at
        // τ·ln 100 (common practice: the single-pole step).
        let tau = 1e-6;
        let s = step(&[c64::new(-1.0 / tau, 0.0)], &[], 0.01, None).unwrap();
        assert!((s.rise_time_s - tau * 9f64.ln()).abs() <= 1e-9 * tau);
        assert_eq!(s.overshoot, 0.0);
        assert!((s.settling_time_s.unwrap() - tau * 100f64.ln()).abs() <= 1e-9 * tau);
    }

    #[test]
    fn two_poles_overshoot_by_the_damping_formula() {
        // ω₀ = 1e6 rad/s, ζ = 0.3: poles −ζω₀ ± jω₀√(1 − ζ²); overshoot e^(−πζ/√(1−ζ²))
        // (Ogata, Modern Control Engineering, second-order systems, from memory).
        let (w0, zeta) = (1e6f64, 0.3f64);
        let wd = w0 * (1.0 - zeta * zeta).sqrt();
        let poles = [c64::new(-zeta * w0, wd), c64::new(-zeta * w0, -wd)];
        let s = step(&poles, &[], 0.01, None).unwrap();
        let want = (-std::f64::consts::PI * zeta / (1.0 - zeta * zeta).sqrt()).exp();
        assert!((s.overshoot - want).abs() <= 1e-9, "{} vs {want}", s.overshoot);
    }

    #[test]
    fn first_order_group_delay_is_tau_over_one_plus_omega_tau_squared() {
        // H = 1/(1 + sτ): τ_g = τ/(1 + (ωτ)²) (common practice).
        let tau = 2e-6;
        for w in [0.0, 1e5, 5e5, 3e6] {
            let g = group_delay(&[c64::new(-1.0 / tau, 0.0)], &[], w);
            let want = tau / (1.0 + (w * tau) * (w * tau));
            assert!((g - want).abs() <= 1e-12 * tau);
        }
    }
}
