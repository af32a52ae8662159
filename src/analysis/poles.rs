//! Poles and zeros by the QZ algorithm (Moler & Stewart, SIAM J. Numer. Anal. 10(2), 1973),
//! through faer's generalised eigensolver.
//!
//! Poles are the finite s with det(G + sC) = 0: the eigenvalues of the pencil (G, −C).
//! Zeros are the finite s where the Rosenbrock system matrix [[G + sC, −b], [cᵀ, 0]] drops
//! rank (Emami-Naeini & Van Dooren, Automatica 18(4), 1982). Both matrices are scaled to
//! unit norm first, and an eigenvalue is infinite when |β| is negligible against |α| —
//! a naive |β| threshold misclassifies pF-scale pencils.

use faer::{Mat, c64};

use crate::analysis::mna::Mna;

/// |β|/|α| below which an eigenvalue of the normalised pencil counts as infinite.
const INFINITE_RATIO: f64 = 1e-11;

/// A root in rad/s.
pub type Root = c64;

fn frobenius(m: &Mat<f64>) -> f64 {
    let mut s = 0.0;
    for j in 0..m.ncols() {
        for i in 0..m.nrows() {
            s += m[(i, j)] * m[(i, j)];
        }
    }
    s.sqrt()
}

/// Finite eigenvalues s of det(A + sB) = 0, sorted by |s| then by imaginary part.
///
/// Unknowns whose row and column of B are empty (no capacitor or inductor touches them)
/// are eliminated first by a Schur complement, A_DD − A_DS A_SS⁻¹ A_SD: they carry only
/// infinite eigenvalues, and QZ on the smaller pencil is both faster and cleaner.
pub fn pencil_roots(a: &Mat<f64>, b: &Mat<f64>) -> Option<Vec<Root>> {
    let n = a.nrows();
    let dynamic: Vec<usize> =
        (0..n).filter(|&i| (0..n).any(|j| b[(i, j)] != 0.0 || b[(j, i)] != 0.0)).collect();
    if dynamic.len() < n && !dynamic.is_empty() {
        let fixed: Vec<usize> = (0..n).filter(|i| !dynamic.contains(i)).collect();
        let a_ss = Mat::<f64>::from_fn(fixed.len(), fixed.len(), |i, j| a[(fixed[i], fixed[j])]);
        if let Ok(f) = crate::analysis::linear::Factor::new(&a_ss) {
            let a_sd =
                Mat::<f64>::from_fn(fixed.len(), dynamic.len(), |i, j| a[(fixed[i], dynamic[j])]);
            let x = f.solve_columns(&a_sd);
            let reduced = Mat::<f64>::from_fn(dynamic.len(), dynamic.len(), |i, j| {
                let correction: f64 =
                    (0..fixed.len()).map(|k| a[(dynamic[i], fixed[k])] * x[(k, j)]).sum();
                a[(dynamic[i], dynamic[j])] - correction
            });
            let b_dd = Mat::<f64>::from_fn(dynamic.len(), dynamic.len(), |i, j| {
                b[(dynamic[i], dynamic[j])]
            });
            return qz_roots(&reduced, &b_dd);
        }
    }
    qz_roots(a, b)
}

fn qz_roots(a: &Mat<f64>, b: &Mat<f64>) -> Option<Vec<Root>> {
    let n = a.nrows();
    if n == 0 {
        return Some(Vec::new());
    }
    if n == 1 {
        // faer's QZ does not take a 1×1 pencil; a + s·b = 0 is solved directly.
        let (x, y) = (a[(0, 0)], b[(0, 0)]);
        // The reduction left one dynamic unknown: any non-zero b gives a finite root.
        let finite = y != 0.0 && (x / y).is_finite();
        return Some(if finite { vec![c64::new(-x / y, 0.0)] } else { Vec::new() });
    }
    let (na, nb) = (frobenius(a), frobenius(b));
    if nb == 0.0 {
        return Some(Vec::new());
    }
    if na == 0.0 {
        return None;
    }
    let an = Mat::<f64>::from_fn(n, n, |i, j| a[(i, j)] / na);
    let bn = Mat::<f64>::from_fn(n, n, |i, j| -b[(i, j)] / nb);
    let (alpha, beta) = generalized_eigenvalues(an, bn)?;
    let mut roots = Vec::new();
    for k in 0..n {
        let (alpha, beta) = (alpha[k], beta[k]);
        if beta.abs() <= INFINITE_RATIO * alpha.norm() || beta == 0.0 {
            continue;
        }
        let s = alpha / beta * (na / nb);
        if s.is_finite() {
            roots.push(s);
        }
    }
    tidy(&mut roots);
    Some(roots)
}

/// Relative distance within which eigenvalues are taken as one multiple root.
const CLUSTER: f64 = 1e-3;

/// QZ eigenvalues (α_k, β_k) of the pencil (A, B), without eigenvectors, sequentially.
fn generalized_eigenvalues(mut a: Mat<f64>, mut b: Mat<f64>) -> Option<(Vec<c64>, Vec<f64>)> {
    use faer::dyn_stack::{MemBuffer, MemStack};
    use faer::linalg::evd::ComputeEigenvectors;
    let n = a.nrows();
    let mut re = faer::diag::Diag::<f64>::zeros(n);
    let mut im = faer::diag::Diag::<f64>::zeros(n);
    let mut beta = faer::diag::Diag::<f64>::zeros(n);
    let scratch = faer::linalg::gevd::gevd_scratch::<f64>(
        n,
        ComputeEigenvectors::No,
        ComputeEigenvectors::No,
        faer::Par::Seq,
        Default::default(),
    );
    let mut buffer = MemBuffer::new(scratch);
    faer::linalg::gevd::gevd_real(
        a.as_mut(),
        b.as_mut(),
        re.as_mut(),
        im.as_mut(),
        beta.as_mut(),
        None,
        None,
        faer::Par::Seq,
        MemStack::new(&mut buffer),
        Default::default(),
    )
    .ok()?;
    // A complex pair is stored once, at its first index (as faer's own conversion reads it).
    let mut alpha = vec![c64::new(0.0, 0.0); n];
    let mut k = 0;
    while k < n {
        if im[k] == 0.0 || k + 1 == n {
            alpha[k] = c64::new(re[k], 0.0);
            k += 1;
        } else {
            alpha[k] = c64::new(re[k], im[k]);
            alpha[k + 1] = c64::new(re[k], -im[k]);
            k += 2;
        }
    }
    let beta = (0..n).map(|k| beta[k]).collect();
    Some((alpha, beta))
}

/// Cleans rounding. A multiple root (n identical isolated sections, say) comes out of QZ
/// as a ring of roots about ε^(1/k) apart; the ring's mean is well-conditioned, so roots
/// within [`CLUSTER`] of each other are replaced by their mean (Wilkinson, The Algebraic
/// Eigenvalue Problem, 1965: the mean of a cluster is insensitive, from memory). Then an
/// imaginary part below 1e-9 of the magnitude is zero, complex roots come in exact
/// conjugate pairs, and the list is sorted by |s|, then imaginary part.
fn tidy(roots: &mut [Root]) {
    let n = roots.len();
    let mut group: Vec<usize> = (0..n).collect();
    for i in 0..n {
        for j in 0..i {
            if (roots[i] - roots[j]).norm() <= CLUSTER * roots[i].norm().max(roots[j].norm()) {
                let (gi, gj) = (group[i], group[j]);
                for g in group.iter_mut() {
                    if *g == gi {
                        *g = gj;
                    }
                }
            }
        }
    }
    for g in 0..n {
        let members: Vec<usize> = (0..n).filter(|&k| group[k] == g).collect();
        if members.len() > 1 {
            let sum = members.iter().fold(c64::new(0.0, 0.0), |acc, &k| acc + roots[k]);
            let mean = sum / members.len() as f64;
            for &k in &members {
                roots[k] = mean;
            }
        }
    }
    for r in roots.iter_mut() {
        if r.im.abs() <= 1e-9 * r.norm() {
            r.im = 0.0;
        }
    }
    roots.sort_by(|x, y| {
        x.norm()
            .partial_cmp(&y.norm())
            .unwrap_or(std::cmp::Ordering::Equal)
            .then(x.im.partial_cmp(&y.im).unwrap_or(std::cmp::Ordering::Equal))
    });
    // Pair conjugates: for each root with positive imaginary part, use the mean of it and
    // its partner so the pair is exact.
    let mut i = 0;
    while i + 1 < roots.len() {
        let (a, b) = (roots[i], roots[i + 1]);
        if a.im != 0.0 && (a - b.conj()).norm() <= 1e-6 * a.norm() {
            let re = 0.5 * (a.re + b.re);
            let im = 0.5 * (a.im.abs() + b.im.abs());
            roots[i] = c64::new(re, -im);
            roots[i + 1] = c64::new(re, im);
            i += 2;
        } else {
            i += 1;
        }
    }
}

/// Zeros within 1e-7 of the smallest pole's magnitude of the origin are at the origin
/// (coupling capacitors put exact zeros there; QZ returns them as rounding noise).
pub fn snap_origin(mut zeros: Vec<Root>, poles: &[Root]) -> Vec<Root> {
    let smallest = poles.iter().map(|p| p.norm()).fold(f64::INFINITY, f64::min);
    if smallest.is_finite() {
        for z in zeros.iter_mut() {
            if z.norm() <= 1e-7 * smallest {
                *z = c64::new(0.0, 0.0);
            }
        }
    }
    zeros
}

/// The poles of a network, rad/s.
pub fn poles(m: &Mna) -> Option<Vec<Root>> {
    pencil_roots(&m.g, &m.c)
}

/// The transmission zeros from the source to the output, rad/s.
pub fn zeros(m: &Mna) -> Option<Vec<Root>> {
    let n = m.size();
    let a = Mat::<f64>::from_fn(n + 1, n + 1, |i, j| match (i < n, j < n) {
        (true, true) => m.g[(i, j)],
        (true, false) => -m.b[i],
        (false, true) => m.out[j],
        (false, false) => 0.0,
    });
    let b =
        Mat::<f64>::from_fn(n + 1, n + 1, |i, j| if i < n && j < n { m.c[(i, j)] } else { 0.0 });
    pencil_roots(&a, &b)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_pole_pencil() {
        // diag(G) = (1e-3, 2e-3) S, diag(C) = (1 pF, 1 pF): poles at −1e9 and −2e9 rad/s.
        let g = Mat::<f64>::from_fn(2, 2, |i, j| if i == j { [1e-3, 2e-3][i] } else { 0.0 });
        let c = Mat::<f64>::from_fn(2, 2, |i, j| if i == j { 1e-12 } else { 0.0 });
        let p = pencil_roots(&g, &c).unwrap();
        assert_eq!(p.len(), 2);
        assert!((p[0].re + 1e9).abs() < 1e-3 && (p[1].re + 2e9).abs() < 1e-3, "{p:?}");
    }

    #[test]
    fn infinite_eigenvalues_are_dropped() {
        // Second unknown has no capacitance: one finite pole only.
        let g = Mat::<f64>::from_fn(2, 2, |i, j| [[2e-3, -1e-3], [-1e-3, 2e-3]][i][j]);
        let c = Mat::<f64>::from_fn(2, 2, |i, j| if i == 0 && j == 0 { 1e-12 } else { 0.0 });
        let p = pencil_roots(&g, &c).unwrap();
        assert_eq!(p.len(), 1, "{p:?}");
        assert!((p[0].re + 1.5e9).abs() < 1e-2, "{p:?}");
    }
}
