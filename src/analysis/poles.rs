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
pub fn pencil_roots(a: &Mat<f64>, b: &Mat<f64>) -> Option<Vec<Root>> {
    let n = a.nrows();
    if n == 0 {
        return Some(Vec::new());
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
    let evd = an.generalized_eigen(&bn).ok()?;
    let (sa, sb) = (evd.S_a(), evd.S_b());
    let mut roots = Vec::new();
    for k in 0..n {
        let alpha = sa[k];
        let beta = sb[k];
        if beta.norm() <= INFINITE_RATIO * alpha.norm() || beta.norm() == 0.0 {
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
