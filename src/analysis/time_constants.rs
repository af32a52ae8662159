//! Open- and short-circuit time constants from one factorisation of the mid-band G.
//!
//! In the mid-band network the low-frequency capacitors are 0 V branches (shorts) and the
//! high-frequency ones are absent (open). So for a high capacitor i with incidence vector
//! d_i, R_i0 = d_iᵀ G⁻¹ d_i (Gray & Meyer's zero-value time constants; Hajimiri, IEEE
//! TCAS-I 57(6), 2010), and for a low capacitor k whose short is branch unknown k,
//! R_ks = −1/(G⁻¹)_kk — the resistance the short sees with the other shorts in place.
//! b2 = Σ_{i<j} C_i C_j (M_ii M_jj − M_ij M_ji), M = DᵀG⁻¹D: Cochrun & Grabel's
//! τ_i⁰·τ_j^i (IEEE Trans. Circuit Theory CT-20(1), 1973), shorting C_i by a rank-one
//! update. No I/O; pure numbers in, numbers out.

use faer::Mat;
use serde::Serialize;

use crate::analysis::linear::Factor;
use crate::analysis::mna::Mna;

/// One high-frequency capacitor's open-circuit time constant.
#[derive(Clone, Debug, Serialize)]
pub struct OpenCircuitCap {
    /// Designator (`C3`, `Q1.cmu`, `load.c`).
    pub part: String,
    /// Capacitance, F.
    pub c_f: f64,
    /// Resistance seen with the other high capacitors open, Ω.
    pub r_ohm: f64,
    /// R·C, s.
    pub tau_s: f64,
    /// Share of the sum.
    pub share: f64,
    /// R over the sum of the resistances from each terminal to ground; ≫ 1 marks Miller
    /// multiplication. Absent when both terminals are grounded at small signal.
    pub miller_factor: Option<f64>,
    /// Resistance from the first terminal to ground, Ω.
    pub r_a_ohm: f64,
    /// Resistance from the second terminal to ground, Ω.
    pub r_b_ohm: f64,
}

/// One low-frequency capacitor's short-circuit time constant.
#[derive(Clone, Debug, Serialize)]
pub struct ShortCircuitCap {
    /// Designator.
    pub part: String,
    /// Capacitance, F.
    pub c_f: f64,
    /// Resistance seen with the other low capacitors shorted, Ω.
    pub r_ohm: f64,
    /// R·C, s.
    pub tau_s: f64,
    /// Share of Σ 1/τ.
    pub share: f64,
}

/// A capacitor to analyse: its name, value, terminals and (for low ones) branch unknown.
pub struct CapRef {
    /// Designator.
    pub name: String,
    /// F.
    pub c: f64,
    /// Terminal.
    pub a: usize,
    /// Terminal.
    pub b: usize,
    /// Its short's branch unknown in the mid-band system (low set only).
    pub branch: Option<usize>,
}

/// The open-circuit time constants and b1, b2 of the high set.
pub struct OpenCircuit {
    /// Per capacitor, in netlist order.
    pub caps: Vec<OpenCircuitCap>,
    /// Σ τ = b1, s.
    pub b1: f64,
    /// b2, s².
    pub b2: f64,
}

/// Open-circuit time constants of `caps` in the factorised mid-band system.
pub fn open_circuit(mna: &Mna, g: &Factor, caps: &[CapRef]) -> OpenCircuit {
    let n = mna.size();
    let m = caps.len();
    if m == 0 {
        return OpenCircuit { caps: Vec::new(), b1: 0.0, b2: 0.0 };
    }
    // One solve per capacitor (batched), plus one per terminal node for the Miller view.
    let mut terminals: Vec<usize> =
        caps.iter().flat_map(|c| [c.a, c.b]).filter(|&t| t != 0).collect();
    terminals.sort_unstable();
    terminals.dedup();
    let rhs = Mat::<f64>::from_fn(n, m + terminals.len(), |r, k| {
        if k < m {
            let d = &caps[k];
            let plus = Mna::row(d.a) == Some(r);
            let minus = Mna::row(d.b) == Some(r);
            (plus as i32 - minus as i32) as f64
        } else {
            (Mna::row(terminals[k - m]) == Some(r)) as i32 as f64
        }
    });
    let x = g.solve_columns(&rhs);
    let project = |k: usize, col: usize| -> f64 {
        let d = &caps[k];
        let va = Mna::row(d.a).map_or(0.0, |r| x[(r, col)]);
        let vb = Mna::row(d.b).map_or(0.0, |r| x[(r, col)]);
        va - vb
    };
    let mut mm = vec![vec![0.0; m]; m];
    for (i, row) in mm.iter_mut().enumerate() {
        for (j, v) in row.iter_mut().enumerate() {
            *v = project(i, j);
        }
    }
    let to_ground = |node: usize| -> f64 {
        match terminals.iter().position(|&t| t == node) {
            Some(k) => Mna::row(node).map_or(0.0, |r| x[(r, m + k)]),
            None => 0.0,
        }
    };
    let b1: f64 = (0..m).map(|i| caps[i].c * mm[i][i]).sum();
    let mut b2 = 0.0;
    for i in 0..m {
        for j in i + 1..m {
            b2 += caps[i].c * caps[j].c * (mm[i][i] * mm[j][j] - mm[i][j] * mm[j][i]);
        }
    }
    let out = caps
        .iter()
        .enumerate()
        .map(|(i, c)| {
            let r = mm[i][i];
            let (ra, rb) = (to_ground(c.a), to_ground(c.b));
            OpenCircuitCap {
                part: c.name.clone(),
                c_f: c.c,
                r_ohm: r,
                tau_s: r * c.c,
                share: if b1 != 0.0 { r * c.c / b1 } else { 0.0 },
                miller_factor: (ra + rb > 0.0).then(|| r / (ra + rb)),
                r_a_ohm: ra,
                r_b_ohm: rb,
            }
        })
        .collect();
    OpenCircuit { caps: out, b1, b2 }
}

/// Short-circuit time constants of the low set; returns the caps and Σ 1/τ (rad/s).
pub fn short_circuit(mna: &Mna, g: &Factor, caps: &[CapRef]) -> (Vec<ShortCircuitCap>, f64) {
    let n = mna.size();
    let m = caps.len();
    if m == 0 {
        return (Vec::new(), 0.0);
    }
    let rhs = Mat::<f64>::from_fn(n, m, |r, k| (caps[k].branch == Some(r)) as i32 as f64);
    let x = g.solve_columns(&rhs);
    let rs: Vec<f64> = caps
        .iter()
        .enumerate()
        .map(|(k, c)| {
            let diag = x[(c.branch.expect("low cap has a branch"), k)];
            if diag == 0.0 { f64::INFINITY } else { -1.0 / diag }
        })
        .collect();
    let inverse_sum: f64 = caps.iter().zip(&rs).map(|(c, r)| 1.0 / (r * c.c)).sum();
    let out = caps
        .iter()
        .zip(&rs)
        .map(|(c, &r)| ShortCircuitCap {
            part: c.name.clone(),
            c_f: c.c,
            r_ohm: r,
            tau_s: r * c.c,
            share: if inverse_sum > 0.0 { 1.0 / (r * c.c) / inverse_sum } else { 0.0 },
        })
        .collect();
    (out, inverse_sum)
}

/// The −3 dB angular frequency of 1/(1 + b1 s + b2 s²): ω² = 2/(B + √(B² + 4 b2²)),
/// B = b1² − 2 b2 (this arrangement avoids cancellation; derived, docs/methods.md, Estimates).
pub fn second_order_omega(b1: f64, b2: f64) -> Option<f64> {
    if b1 <= 0.0 {
        return None;
    }
    let big_b = b1 * b1 - 2.0 * b2;
    let den = big_b + (big_b * big_b + 4.0 * b2 * b2).sqrt();
    (den > 0.0).then(|| (2.0 / den).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn second_order_matches_direct_solution() {
        // |1/(1 + b1 jω + b2 (jω)²)|² = 1/2 solved directly for two real poles at 1 and 3 rad/s.
        let (p1, p2) = (1.0f64, 3.0f64);
        let b1 = 1.0 / p1 + 1.0 / p2;
        let b2 = 1.0 / (p1 * p2);
        let w = second_order_omega(b1, b2).unwrap();
        let mag2 = 1.0 / ((1.0 - b2 * w * w).powi(2) + (b1 * w).powi(2));
        assert!((mag2 - 0.5).abs() < 1e-14);
        // One pole: ω = 1/b1.
        assert!((second_order_omega(2.0, 0.0).unwrap() - 0.5).abs() < 1e-15);
    }
}
