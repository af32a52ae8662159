//! Poles and zeros by the QZ algorithm (Moler & Stewart, SIAM J. Numer. Anal. 10(2), 1973),
//! through faer's generalised eigensolver.
//!
//! Poles are the finite s with det(G + sC) = 0: the eigenvalues of the pencil (G, −C).
//! Zeros are the finite s where the Rosenbrock system matrix [[G + sC, −b], [cᵀ, 0]] drops
//! rank (Emami-Naeini & Van Dooren, Automatica 18(4), 1982). Both matrices are scaled to
//! unit norm first, and an eigenvalue is infinite when |β| is negligible against |α| —
//! a naive |β| threshold misclassifies pF-scale pencils.

use std::f64::consts::PI;

use faer::{Mat, c64};

use crate::analysis::linear::{Factor, SparseSystem};
use crate::analysis::matrix::Matrix;
use crate::analysis::mna::Mna;
use crate::analysis::schur;

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

/// Dynamic unknowns (those a capacitor or inductor touches) up to which every finite root
/// is found, by QZ on the reduced pencil. Above, QZ's n³ work and n² memory outgrow the rest
/// of the analysis (1,000 unknowns: seconds), and the roots near the band are found by
/// shift-and-invert Arnoldi instead ([`shift_invert_roots`]).
pub const QZ_UP_TO: usize = 200;

/// Where roots are wanted when a pencil is too large for QZ: |s|/2π from `from_hz` to
/// `to_hz`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Window {
    /// Lowest |s|/2π, Hz.
    pub from_hz: f64,
    /// Highest |s|/2π, Hz.
    pub to_hz: f64,
}

/// Whether every finite root of a pencil with this B is found (QZ), rather than those in the
/// window.
pub fn finds_all(b: &Matrix) -> bool {
    schur::dynamic_unknowns(b).len() <= QZ_UP_TO
}

/// Finite eigenvalues s of det(A + sB) = 0, sorted by |s| then by imaginary part: all of them
/// when [`finds_all`], else those in `window`.
///
/// Unknowns whose row and column of B are empty are eliminated first by a Schur complement
/// (`schur.rs`): they carry only infinite eigenvalues, and QZ on the smaller pencil is both
/// faster and cleaner.
pub fn pencil_roots(a: &Matrix, b: &Matrix, window: Window) -> Option<Vec<Root>> {
    let n = a.size();
    if !finds_all(b) {
        return shift_invert_roots(a, b, window);
    }
    let zeros = vec![0.0; n];
    match schur::reduce(a, b, &zeros, &zeros) {
        Some(r) => qz_roots(&r.g, &r.c),
        None if n <= QZ_UP_TO => qz_roots(&a.dense(), &b.dense()),
        None => shift_invert_roots(a, b, window),
    }
}

/// Arnoldi vectors per shift.
const KRYLOV: usize = 30;

/// Shifts per decade of the window to begin with; more are put where neighbouring shifts'
/// converged discs leave a gap.
const SHIFTS_PER_DECADE: f64 = 2.0;

/// Most shifts for one pencil.
const MOST_SHIFTS: usize = 400;

/// The finite roots of det(A + sB) = 0 with |s|/2π in `window`, by shift-and-invert Arnoldi
/// (Saad, Numerical Methods for Large Eigenvalue Problems, 2nd ed., 2011, §§6.2, 8.1;
/// Ericsson & Ruhe, Math. Comp. 35, 1980): for a real shift σ, the eigenvalues θ of
/// (A + σB)⁻¹B are 1/(σ − s), so the roots nearest σ are the largest θ and converge first.
/// Shifts at σ = −2πf, two a decade across the window to begin with, one sparse LU each,
/// [`KRYLOV`] vectors orthogonalised twice (classical Gram–Schmidt with reorthogonalisation);
/// a Ritz value is kept when its residual estimate |h_{m+1,m} y_m| is under 1e-8 of |θ|.
/// Every root within the distance of the nearest unconverged Ritz value from σ counts as
/// found; where two neighbouring shifts' discs leave a gap on the axis, a shift is put
/// between them, until the window is covered (or [`MOST_SHIFTS`] are spent). A root repeated
/// exactly (identical isolated sections) is found once: one Krylov sequence sees one
/// eigenvector of a repeated eigenvalue.
pub fn shift_invert_roots(a: &Matrix, b: &Matrix, window: Window) -> Option<Vec<Root>> {
    let (lo, hi) = (2.0 * PI * window.from_hz, 2.0 * PI * window.to_hz);
    if !(lo > 0.0 && hi > lo && hi.is_finite()) {
        return None;
    }
    let count = ((hi / lo).log10() * SHIFTS_PER_DECADE).ceil().max(1.0) as usize;
    // (ω, roots, reach): the shift at σ = −ω, what it found, and how far from σ it vouches.
    let mut done: Vec<(f64, Vec<Candidate>, f64)> = Vec::new();
    let mut todo: Vec<f64> =
        (0..=count).map(|k| lo * (hi / lo).powf(k as f64 / count as f64)).collect();
    while !todo.is_empty() && done.len() < MOST_SHIFTS {
        for omega in std::mem::take(&mut todo) {
            // A shift that lands on a root makes A + σB singular: step off it a little.
            let (roots, reach) =
                [1.0, 1.013, 0.987].iter().find_map(|nudge| arnoldi_at(a, b, -omega * nudge))?;
            done.push((omega, roots, reach));
        }
        done.sort_by(|x, y| x.0.total_cmp(&y.0));
        for pair in done.windows(2) {
            let ((w1, _, r1), (w2, _, r2)) = (&pair[0], &pair[1]);
            if w1 + r1 < w2 - r2 && w2 / w1 > 1.01 {
                todo.push((w1 * w2).sqrt());
            }
        }
    }
    let mut found: Vec<Candidate> = done.into_iter().flat_map(|(_, roots, _)| roots).collect();
    // Roots at the origin (coupling capacitors' zeros) converge from the lowest shift and
    // are kept; others below the window may be incomplete and are left out.
    let inside = |s: &Root| {
        let size = s.norm();
        (size >= lo * (1.0 - 1e-9) || size <= 1e-6 * lo) && size <= hi * (1.0 + 1e-9)
    };
    found.retain(|c| inside(&c.s));
    // The same root found from several shifts: the copy from the nearest shift is kept, then
    // refined (a root at the origin is exact already).
    found.sort_by(|x, y| x.distance.total_cmp(&y.distance));
    let mut kept: Vec<Candidate> = Vec::new();
    for c in found {
        if !kept.iter().any(|k| (k.s - c.s).norm() <= 1e-5 * c.s.norm().max(k.s.norm())) {
            kept.push(c);
        }
    }
    let system = SparseSystem::new(a, b)?;
    let mut roots: Vec<Root> = Vec::new();
    for c in kept {
        let s = if c.s.norm() <= 1e-6 * lo { c.s } else { refine(&system, b, c.s, c.vector) };
        if inside(&s) && !roots.iter().any(|r| (r - s).norm() <= 1e-9 * s.norm()) {
            roots.push(s);
        }
    }
    tidy(&mut roots);
    Some(roots)
}

/// A converged Ritz value, its vector, and its distance from the shift relative to its size
/// (the nearer, the more accurate).
struct Candidate {
    s: Root,
    vector: Vec<c64>,
    distance: f64,
}

/// Inverse iteration at the root itself (Wilkinson, 1965, ch. 9; Saad, 2011, §4.1): from a
/// Ritz pair (s, z), solve (A + sB)w = Bz, and w ≈ z/(s − λ) gives λ = s − zᴴz/zᴴw; three
/// steps on the sparse complex LU take a Ritz value of a non-normal pencil (buffers, one-way
/// stages) from its residual's accuracy to rounding.
fn refine(system: &SparseSystem, b: &Matrix, mut s: Root, mut z: Vec<c64>) -> Root {
    let n = z.len();
    for _ in 0..3 {
        let mut bz = vec![c64::new(0.0, 0.0); n];
        for (i, j, v) in b.entries() {
            bz[i] += z[j] * v;
        }
        let Some(w) = system.solve(s, &bz) else { return s };
        let zz: c64 = z.iter().map(|v| v.conj() * v).sum();
        let zw: c64 = z.iter().zip(&w).map(|(p, q)| p.conj() * q).sum();
        if zw.norm() == 0.0 {
            return s;
        }
        let next = s - zz / zw;
        // A real root stays real; a step that leaves the root's neighbourhood is refused.
        let next = if s.im == 0.0 { c64::new(next.re, 0.0) } else { next };
        if !next.is_finite() || (next - s).norm() > 1e-3 * s.norm() {
            return s;
        }
        let size = w.iter().map(|v| v.norm_sqr()).sum::<f64>().sqrt();
        z = w.iter().map(|v| v / size).collect();
        let settled = (next - s).norm() <= 1e-14 * s.norm();
        s = next;
        if settled {
            break;
        }
    }
    s
}

/// The converged roots from one shift σ and the distance from σ within which they are all
/// the roots there are (that of the nearest unconverged Ritz value), or None when A + σB is
/// singular.
fn arnoldi_at(a: &Matrix, b: &Matrix, sigma: f64) -> Option<(Vec<Candidate>, f64)> {
    let n = a.size();
    let shifted = Matrix::from_stamps(
        n,
        a.entries().chain(b.entries().map(|(i, j, v)| (i, j, sigma * v))).collect(),
    );
    // Near a root the shifted matrix is nearly singular, and that is harmless here (the
    // root is then the largest θ, found at once); only an exactly singular one is refused,
    // by its solutions not being finite.
    let lu = Factor::new_unguarded(&shifted).ok()?;
    let apply = |v: &[f64]| -> Vec<f64> {
        let mut w = vec![0.0; n];
        for (i, j, x) in b.entries() {
            w[i] += x * v[j];
        }
        lu.solve(&w)
    };
    let norm = |v: &[f64]| v.iter().map(|x| x * x).sum::<f64>().sqrt();
    // A fixed start (same bits every run), passed once through the operator so it holds no
    // part along the infinite eigenvalues (B's null space).
    let start: Vec<f64> = (0..n).map(|i| 1.0 + ((i * 7919) % 101) as f64 / 101.0).collect();
    let mut v0 = apply(&start);
    let size = norm(&v0);
    if !(size > 0.0 && size.is_finite()) {
        return Some((Vec::new(), f64::INFINITY));
    }
    v0.iter_mut().for_each(|x| *x /= size);
    let m = KRYLOV.min(n);
    let mut basis = vec![v0];
    let mut h = Mat::<f64>::zeros(m + 1, m);
    let mut steps = m;
    for j in 0..m {
        let mut w = apply(&basis[j]);
        for _ in 0..2 {
            for (i, v) in basis.iter().enumerate() {
                let dot: f64 = v.iter().zip(&w).map(|(p, q)| p * q).sum();
                h[(i, j)] += dot;
                w.iter_mut().zip(v).for_each(|(q, p)| *q -= dot * p);
            }
        }
        let beta = norm(&w);
        h[(j + 1, j)] = beta;
        let scale = (0..=j).map(|i| h[(i, j)].abs()).fold(beta, f64::max);
        if beta <= 1e-13 * scale || j + 1 == m {
            // An invariant subspace (every root it holds is exact) or the last vector.
            steps = j + 1;
            break;
        }
        w.iter_mut().for_each(|x| *x /= beta);
        basis.push(w);
    }
    let hm = Mat::<f64>::from_fn(steps, steps, |i, j| h[(i, j)]);
    let beta = h[(steps, steps - 1)];
    let exhausted = beta <= 1e-13 * hm.norm_max();
    let eigen = hm.eigen().ok()?;
    let (theta, y) = (eigen.S(), eigen.U());
    let mut roots = Vec::new();
    let mut reach = f64::INFINITY;
    let to_root = |t: c64| c64::new(sigma, 0.0) - c64::new(1.0, 0.0) / t;
    for k in 0..steps {
        let t = theta[k];
        let y_norm = (0..steps).map(|i| y[(i, k)].norm_sqr()).sum::<f64>().sqrt();
        let residual = beta.abs() * y[(steps - 1, k)].norm() / y_norm;
        if t.norm() == 0.0 {
            continue;
        }
        let s = to_root(t);
        if exhausted || residual <= 1e-8 * t.norm() {
            if s.is_finite() {
                // The Ritz vector V y, for the refinement.
                let vector = (0..n)
                    .map(|r| {
                        (0..steps).fold(c64::new(0.0, 0.0), |acc, i| acc + basis[i][r] * y[(i, k)])
                    })
                    .collect();
                roots.push(Candidate {
                    s,
                    vector,
                    distance: (s - c64::new(sigma, 0.0)).norm() / s.norm(),
                });
            }
        } else {
            reach = reach.min((s - c64::new(sigma, 0.0)).norm());
        }
    }
    Some((roots, reach))
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

/// The poles of a network, rad/s: all of them, or those in `window` for a large one.
pub fn poles(m: &Mna, window: Window) -> Option<Vec<Root>> {
    pencil_roots(&m.g, &m.c, window)
}

/// The transmission zeros from the source to the output, rad/s: all of them, or those in
/// `window` for a large network.
pub fn zeros(m: &Mna, window: Window) -> Option<Vec<Root>> {
    let n = m.size();
    let a =
        m.g.entries()
            .chain((0..n).filter(|&i| m.b[i] != 0.0).map(|i| (i, n, -m.b[i])))
            .chain((0..n).filter(|&j| m.out[j] != 0.0).map(|j| (n, j, m.out[j])))
            .collect();
    let a = Matrix::from_stamps(n + 1, a);
    let b = Matrix::from_stamps(n + 1, m.c.entries().collect());
    pencil_roots(&a, &b, window)
}

#[cfg(test)]
mod tests {
    use super::*;

    const ANY: Window = Window { from_hz: 1e-3, to_hz: 1e15 };

    #[test]
    fn two_pole_pencil() {
        // diag(G) = (1e-3, 2e-3) S, diag(C) = (1 pF, 1 pF): poles at −1e9 and −2e9 rad/s.
        let g = Mat::<f64>::from_fn(2, 2, |i, j| if i == j { [1e-3, 2e-3][i] } else { 0.0 });
        let c = Mat::<f64>::from_fn(2, 2, |i, j| if i == j { 1e-12 } else { 0.0 });
        let p = pencil_roots(&Matrix::from_dense(&g), &Matrix::from_dense(&c), ANY).unwrap();
        assert_eq!(p.len(), 2);
        assert!((p[0].re + 1e9).abs() < 1e-3 && (p[1].re + 2e9).abs() < 1e-3, "{p:?}");
    }

    #[test]
    fn infinite_eigenvalues_are_dropped() {
        // Second unknown has no capacitance: one finite pole only.
        let g = Mat::<f64>::from_fn(2, 2, |i, j| [[2e-3, -1e-3], [-1e-3, 2e-3]][i][j]);
        let c = Mat::<f64>::from_fn(2, 2, |i, j| if i == 0 && j == 0 { 1e-12 } else { 0.0 });
        let p = pencil_roots(&Matrix::from_dense(&g), &Matrix::from_dense(&c), ANY).unwrap();
        assert_eq!(p.len(), 1, "{p:?}");
        assert!((p[0].re + 1.5e9).abs() < 1e-2, "{p:?}");
    }
}
