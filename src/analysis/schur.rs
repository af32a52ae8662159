//! Reduction of (G + sC)x = b·u, y = outᵀx to its dynamic unknowns by a Schur complement.
//!
//! Unknowns whose row and column of C are empty (no capacitor or inductor touches them) carry
//! no dynamics: eliminating them, G_DD − G_DS G_SS⁻¹ G_SD, leaves a small dense system with the
//! same finite poles, zeros and transfer (Golub & Van Loan, Matrix Computations, §3.2: block
//! elimination). G_SS is factorised sparse when it is large, so a network of thousands of
//! nodes with a few dozen capacitors reduces in time proportional to its parts.
//!
//! In: [`Matrix`] G and C, the input column and output row. Out: [`Reduced`], or None when
//! G_SS is singular (the caller then keeps the whole system).

use faer::Mat;

use crate::analysis::linear::Factor;
use crate::analysis::matrix::Matrix;

/// The system on its dynamic unknowns: (g + sc)x_D = b·u, y = outᵀx_D + direct·u.
pub struct Reduced {
    /// G_DD − G_DS G_SS⁻¹ G_SD.
    pub g: Mat<f64>,
    /// C_DD (C is zero elsewhere).
    pub c: Mat<f64>,
    /// b_D − G_DS G_SS⁻¹ b_S.
    pub b: Vec<f64>,
    /// out_D − X_Dᵀ out_S (X = G_SS⁻¹ G_SD): the output row with the static unknowns
    /// substituted.
    pub out: Vec<f64>,
    /// The part of the output that passes straight through the static unknowns.
    pub direct: f64,
}

/// The unknowns C touches, ascending.
pub fn dynamic_unknowns(c: &Matrix) -> Vec<usize> {
    c.touches().iter().enumerate().filter(|(_, t)| **t).map(|(i, _)| i).collect()
}

/// Eliminates every unknown C does not touch; None when there are none to eliminate, none
/// left, or G_SS is singular.
pub fn reduce(g: &Matrix, c: &Matrix, b: &[f64], out: &[f64]) -> Option<Reduced> {
    let r = reduce_inputs(g, c, &Mat::from_fn(b.len(), 1, |i, _| b[i]), out)?;
    Some(Reduced {
        b: (0..r.g.nrows()).map(|i| r.b[(i, 0)]).collect(),
        direct: r.direct[0],
        g: r.g,
        c: r.c,
        out: r.out,
    })
}

/// [`Reduced`] for several inputs at once: column k of `b` is input k.
pub struct ReducedInputs {
    /// G_DD − G_DS G_SS⁻¹ G_SD.
    pub g: Mat<f64>,
    /// C_DD.
    pub c: Mat<f64>,
    /// B_D − G_DS G_SS⁻¹ B_S, one column an input.
    pub b: Mat<f64>,
    /// The output row with the static unknowns substituted.
    pub out: Vec<f64>,
    /// Each input's part of the output that passes straight through the static unknowns.
    pub direct: Vec<f64>,
}

/// [`reduce`] with every column of `b` an input (the same elimination; one solve of G_SS
/// for all of them).
pub fn reduce_inputs(g: &Matrix, c: &Matrix, b: &Mat<f64>, out: &[f64]) -> Option<ReducedInputs> {
    let n = g.size();
    let inputs = b.ncols();
    let touched = c.touches();
    let dynamic: Vec<usize> = (0..n).filter(|&i| touched[i]).collect();
    let fixed: Vec<usize> = (0..n).filter(|&i| !touched[i]).collect();
    if fixed.is_empty() || dynamic.is_empty() {
        return None;
    }
    let (d, f) = (dynamic.len(), fixed.len());
    let lu = Factor::new(&g.select(&fixed, &fixed).square()).ok()?;
    // X = G_SS⁻¹ [G_SD | B_S]
    let mut rhs = g.select(&fixed, &dynamic).dense();
    rhs.resize_with(f, d + inputs, |i, j| b[(fixed[i], j - d)]);
    let x = lu.solve_columns(&rhs);
    let mut reduced_g = g.select(&dynamic, &dynamic).dense();
    let mut reduced_b = Mat::<f64>::from_fn(d, inputs, |i, j| b[(dynamic[i], j)]);
    // G_DD − G_DS X and B_D − G_DS X_B, through G_DS's entries only.
    for (i, k, v) in g.select(&dynamic, &fixed).entries {
        for j in 0..d {
            reduced_g[(i, j)] -= v * x[(k, j)];
        }
        for j in 0..inputs {
            reduced_b[(i, j)] -= v * x[(k, d + j)];
        }
    }
    let out_s: Vec<(usize, f64)> = fixed
        .iter()
        .enumerate()
        .filter(|(_, r)| out[**r] != 0.0)
        .map(|(k, r)| (k, out[*r]))
        .collect();
    let reduced_out = (0..d)
        .map(|j| out[dynamic[j]] - out_s.iter().map(|(k, o)| o * x[(*k, j)]).sum::<f64>())
        .collect();
    let direct = (0..inputs).map(|j| out_s.iter().map(|(k, o)| o * x[(*k, d + j)]).sum()).collect();
    Some(ReducedInputs {
        g: reduced_g,
        c: c.select(&dynamic, &dynamic).dense(),
        b: reduced_b,
        out: reduced_out,
        direct,
    })
}
