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

/// Right-hand sides solved at once: enough to batch the solves, few enough that a network
/// of thousands of capacitors never holds an n × m block.
const CHUNK: usize = 32;

/// b1 = Σ R_i0 C_i alone: the sum the lean evaluation needs, from one solve per capacitor
/// (the same solves, in the same order, as [`open_circuit`]'s, so the same bits).
pub fn open_circuit_sum(mna: &Mna, g: &Factor, caps: &[CapRef]) -> f64 {
    let n = mna.size();
    let mut b1 = 0.0;
    for first in (0..caps.len()).step_by(CHUNK) {
        let last = (first + CHUNK).min(caps.len());
        let x = g.solve_columns(&incidence_columns(n, &caps[first..last]));
        for (k, c) in caps[first..last].iter().enumerate() {
            b1 += c.c * across(&x, k, c);
        }
    }
    b1
}

/// The incidence vectors of `caps` as the columns of an n-row matrix.
fn incidence_columns(n: usize, caps: &[CapRef]) -> Mat<f64> {
    Mat::<f64>::from_fn(n, caps.len(), |r, k| {
        let d = &caps[k];
        (Mna::row(d.a) == Some(r)) as i32 as f64 - (Mna::row(d.b) == Some(r)) as i32 as f64
    })
}

/// v_a − v_b of capacitor `d` in column `col` of node-voltage solutions `x`.
fn across(x: &Mat<f64>, col: usize, d: &CapRef) -> f64 {
    let va = Mna::row(d.a).map_or(0.0, |r| x[(r, col)]);
    let vb = Mna::row(d.b).map_or(0.0, |r| x[(r, col)]);
    va - vb
}

/// Open-circuit time constants of `caps` in the factorised mid-band system.
///
/// The capacitors' columns of M = DᵀG⁻¹D are solved [`CHUNK`] at a time, and beyond the first
/// chunk each column's row through the transposed system (M_ji = d_iᵀG⁻ᵀd_j), so b2 is summed pair by pair,
/// C_iC_j(M_iiM_jj − M_ijM_ji) for i < j, without storing M. Memory grows as n·CHUNK + m,
/// work as the solves do (and as m² for the pairs).
pub fn open_circuit(mna: &Mna, g: &Factor, caps: &[CapRef]) -> OpenCircuit {
    let n = mna.size();
    let m = caps.len();
    if m == 0 {
        return OpenCircuit { caps: Vec::new(), b1: 0.0, b2: 0.0 };
    }
    let mut diagonal = vec![0.0; m];
    let mut b2 = 0.0;
    for first in (0..m).step_by(CHUNK) {
        let last = (first + CHUNK).min(m);
        let rhs = incidence_columns(n, &caps[first..last]);
        let x = g.solve_columns(&rhs);
        // Rows of M for the pairs with earlier chunks; within a chunk, M_ji is read off
        // column i itself (a pair of parallel capacitors then cancels exactly).
        let y = (first > 0).then(|| g.solve_transpose_columns(&rhs));
        for (k, j) in (first..last).enumerate() {
            diagonal[j] = across(&x, k, &caps[j]);
        }
        for (k, j) in (first..last).enumerate() {
            let cj = &caps[j];
            for (i, ci) in caps[..j].iter().enumerate() {
                let m_ij = across(&x, k, ci);
                let m_ji = match &y {
                    Some(y) if i < first => across(y, k, ci),
                    _ => across(&x, i - first, cj),
                };
                b2 += ci.c * cj.c * (diagonal[i] * diagonal[j] - m_ij * m_ji);
            }
        }
    }
    // One solve per terminal node for the Miller view: the resistance from it to ground.
    let mut terminals: Vec<usize> =
        caps.iter().flat_map(|c| [c.a, c.b]).filter(|&t| t != 0).collect();
    terminals.sort_unstable();
    terminals.dedup();
    let mut to_ground_of = vec![0.0; terminals.len()];
    for first in (0..terminals.len()).step_by(CHUNK) {
        let last = (first + CHUNK).min(terminals.len());
        let rhs = Mat::<f64>::from_fn(n, last - first, |r, k| {
            (Mna::row(terminals[first + k]) == Some(r)) as i32 as f64
        });
        let x = g.solve_columns(&rhs);
        for (k, t) in (first..last).enumerate() {
            to_ground_of[t] = Mna::row(terminals[t]).map_or(0.0, |r| x[(r, k)]);
        }
    }
    let to_ground =
        |node: usize| -> f64 { terminals.binary_search(&node).map_or(0.0, |k| to_ground_of[k]) };
    let b1 = diagonal.iter().zip(caps).fold(0.0, |acc, (d, c)| acc + c.c * d);
    let out = caps
        .iter()
        .enumerate()
        .map(|(i, c)| {
            let r = diagonal[i];
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
    let mut rs = Vec::with_capacity(m);
    for first in (0..m).step_by(CHUNK) {
        let last = (first + CHUNK).min(m);
        let rhs = Mat::<f64>::from_fn(n, last - first, |r, k| {
            (caps[first + k].branch == Some(r)) as i32 as f64
        });
        let x = g.solve_columns(&rhs);
        rs.extend(caps[first..last].iter().enumerate().map(|(k, c)| {
            let diag = x[(c.branch.expect("low cap has a branch"), k)];
            if diag == 0.0 { f64::INFINITY } else { -1.0 / diag }
        }));
    }
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
