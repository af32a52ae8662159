//! The frequency response of a small dense network at many frequencies from one reduction:
//! the pencil (G, C) brought to Hessenberg–triangular form, Qᵀ G Z = H (upper Hessenberg)
//! and Qᵀ C Z = T (upper triangular), with Q and Z orthogonal. Then at any s,
//! G + sC = Q (H + sT) Zᵀ, and H + sT is upper Hessenberg: its LU costs O(n²) instead of
//! O(n³). The reduction is the first step of the QZ algorithm (Moler & Stewart, SIAM J.
//! Numer. Anal. 10(2), 1973; Golub & Van Loan, *Matrix Computations*, Hessenberg–triangular
//! reduction, from memory); its use for frequency responses is Laub's (IEEE Trans.
//! Automatic Control 26(2), 1981, from memory).
//!
//! In: dense real G and C, the input columns b_k and an output row c. Out: each input's
//! transfer cᵀ(G + sC)⁻¹b_k, all from one transposed solve, μ = (H + sT)⁻ᵀZᵀc, and one dot
//! product (Qᵀb_k)ᵀμ an input — what the cut-off searches and the noise integral ask for a
//! few hundred times per network. A pivot is refused (the network called singular at s)
//! below a fixed fraction of max|H| + |s|·max|T|, a bound on the largest entry of H + sT.

use std::cell::RefCell;

use faer::{Mat, c64};

/// Relative size below which a pivot counts as zero (as in `linear.rs`).
const PIVOT_TOLERANCE: f64 = 1e-13;

/// A real pencil in Hessenberg–triangular form, with its inputs and output carried along.
#[derive(Clone, Debug)]
pub struct Pencil {
    n: usize,
    /// H, upper Hessenberg, row major.
    h: Vec<f64>,
    /// T, upper triangular, row major.
    t: Vec<f64>,
    /// Qᵀb_k, input after input.
    inputs: Vec<f64>,
    /// Zᵀc.
    out: Vec<f64>,
    /// The largest |entry| of H and of T: |H + sT|'s entries are at most
    /// `h_max + |s|·t_max`, the scale pivots are judged against.
    h_max: f64,
    t_max: f64,
}

/// A plane rotation [c s; −s c].
#[derive(Clone, Copy)]
struct Rotation {
    c: f64,
    s: f64,
}

impl Rotation {
    /// The rotation taking (x, y) to (r, 0): None when y is already zero.
    fn zeroing(x: f64, y: f64) -> Option<Rotation> {
        if y == 0.0 {
            return None;
        }
        let r = x.hypot(y);
        Some(Rotation { c: x / r, s: y / r })
    }

    /// (u, v) ← (c·u + s·v, −s·u + c·v).
    fn apply(self, u: &mut f64, v: &mut f64) {
        let (a, b) = (*u, *v);
        *u = self.c * a + self.s * b;
        *v = -self.s * a + self.c * b;
    }
}

/// Rotates rows `i - 1` and `i` of the n-column row-major matrix `m`, from column `from`.
fn rotate_rows(m: &mut [f64], n: usize, i: usize, from: usize, r: Rotation) {
    let (upper, lower) = m.split_at_mut(i * n);
    let upper = &mut upper[(i - 1) * n..];
    for j in from..n {
        r.apply(&mut upper[j], &mut lower[j]);
    }
}

/// Rotates entries `i - 1` and `i` of every length-n vector stored one after another in `v`.
fn rotate_entries(v: &mut [f64], n: usize, i: usize, r: Rotation) {
    for x in v.chunks_exact_mut(n) {
        let (u, w) = x.split_at_mut(i);
        r.apply(&mut u[i - 1], &mut w[0]);
    }
}

/// Rotates columns `j - 1` and `j` of the n-column row-major matrix `m` in rows `..rows` by
/// `z` as [`Rotation::zeroing`] computed it from (M[i][j], M[i][j - 1]).
fn rotate_columns(m: &mut [f64], n: usize, j: usize, rows: usize, z: Rotation) {
    for row in m.chunks_exact_mut(n).take(rows) {
        let (left, right) = row.split_at_mut(j);
        z.apply(&mut right[0], &mut left[j - 1]);
    }
}

impl Pencil {
    /// Reduces (g, c) with the input columns of `b` and the output row `out`.
    pub fn new(g: &Mat<f64>, c: &Mat<f64>, b: &Mat<f64>, out: &[f64]) -> Pencil {
        let n = g.nrows();
        let mut h: Vec<f64> = (0..n * n).map(|k| g[(k / n, k % n)]).collect();
        let mut t: Vec<f64> = (0..n * n).map(|k| c[(k / n, k % n)]).collect();
        let mut inputs: Vec<f64> =
            (0..b.ncols()).flat_map(|j| (0..n).map(move |i| b[(i, j)])).collect();
        let mut out = out.to_vec();
        // T upper triangular by rotations of neighbouring rows from the bottom of each column
        // (an MNA's C is mostly zero: a zero entry costs nothing).
        for k in 0..n {
            for i in (k + 1..n).rev() {
                let Some(r) = Rotation::zeroing(t[(i - 1) * n + k], t[i * n + k]) else {
                    continue;
                };
                rotate_rows(&mut t, n, i, k, r);
                rotate_rows(&mut h, n, i, 0, r);
                rotate_entries(&mut inputs, n, i, r);
                t[i * n + k] = 0.0;
            }
        }
        // H upper Hessenberg: each entry below the subdiagonal zeroed by a row rotation,
        // which fills T in below its diagonal; a column rotation clears that again.
        for j in 0..n.saturating_sub(2) {
            for i in (j + 2..n).rev() {
                let Some(r) = Rotation::zeroing(h[(i - 1) * n + j], h[i * n + j]) else {
                    continue;
                };
                rotate_rows(&mut h, n, i, j, r);
                rotate_rows(&mut t, n, i, i - 1, r);
                rotate_entries(&mut inputs, n, i, r);
                h[i * n + j] = 0.0;
                // The fill T[i][i-1], zeroed on columns (i-1, i): col_{i-1} ← c·col_{i-1} −
                // s·col_i, col_i ← s·col_{i-1} + c·col_i, and Zᵀc alike.
                let Some(z) = Rotation::zeroing(t[i * n + i], t[i * n + i - 1]) else {
                    continue;
                };
                rotate_columns(&mut t, n, i, i + 1, z);
                rotate_columns(&mut h, n, i, n, z);
                let (u, v) = out.split_at_mut(i);
                z.apply(&mut v[0], &mut u[i - 1]);
                t[i * n + i - 1] = 0.0;
            }
        }
        let largest = |m: &[f64]| m.iter().fold(0.0f64, |a, v| a.max(v.abs()));
        let (h_max, t_max) = (largest(&h), largest(&t));
        Pencil { n, h, t, inputs, out, h_max, t_max }
    }

    /// Unknowns.
    pub fn size(&self) -> usize {
        self.n
    }

    /// cᵀ(G + sC)⁻¹b for the first input, or None when G + sC is singular at `s` or the
    /// result is not finite.
    pub fn transfer(&self, s: c64) -> Option<c64> {
        WORK.with(|work| {
            let work = &mut *work.borrow_mut();
            self.adjoint(s, work)?;
            let y = dot(&self.inputs[..self.n], &work.y);
            y.is_finite().then_some(y)
        })
    }

    /// Every input's cᵀ(G + sC)⁻¹b_k into `into`, in order; None when G + sC is singular at
    /// `s` or a result is not finite.
    pub fn transfers(&self, s: c64, into: &mut Vec<c64>) -> Option<()> {
        WORK.with(|work| {
            let work = &mut *work.borrow_mut();
            self.adjoint(s, work)?;
            into.clear();
            into.extend(self.inputs.chunks_exact(self.n.max(1)).map(|b| dot(b, &work.y)));
            into.iter().all(|v| v.is_finite()).then_some(())
        })
    }

    /// μ = (H + sT)⁻ᵀZᵀc into `work.y`: LU of H + sT with partial pivoting between
    /// neighbouring rows, Uᵀw = Zᵀc, then the eliminations transposed in reverse.
    fn adjoint(&self, s: c64, work: &mut Work) -> Option<()> {
        let n = self.n;
        let a = &mut work.a;
        a.clear();
        a.resize(n * n, c64::new(0.0, 0.0));
        for i in 0..n {
            for j in i.saturating_sub(1)..n {
                let (h, t) = (self.h[i * n + j], self.t[i * n + j]);
                a[i * n + j] = c64::new(h + t * s.re, t * s.im);
            }
        }
        // |s| without `hypot` (a library call, and exact alike for the s = jω asked here).
        let size = (s.re * s.re + s.im * s.im).sqrt();
        let floor = PIVOT_TOLERANCE * (self.h_max + size * self.t_max);
        let floor_sq = floor * floor;
        let (multipliers, swapped) = (&mut work.multipliers, &mut work.swapped);
        multipliers.clear();
        swapped.clear();
        for k in 0..n {
            if k + 1 < n {
                let swap = a[(k + 1) * n + k].norm_sqr() > a[k * n + k].norm_sqr();
                if swap {
                    for j in k..n {
                        a.swap(k * n + j, (k + 1) * n + j);
                    }
                }
                swapped.push(swap);
            }
            let pivot = a[k * n + k];
            if pivot.norm_sqr().partial_cmp(&floor_sq) != Some(std::cmp::Ordering::Greater) {
                return None;
            }
            if k + 1 < n {
                let m = a[(k + 1) * n + k] / pivot;
                a[(k + 1) * n + k] = c64::new(0.0, 0.0);
                for j in k + 1..n {
                    let u = a[k * n + j];
                    a[(k + 1) * n + j] -= m * u;
                }
                multipliers.push(m);
            }
        }
        let mu = &mut work.y;
        mu.clear();
        mu.extend(self.out.iter().map(|&v| c64::new(v, 0.0)));
        for i in 0..n {
            let mut acc = mu[i];
            for k in 0..i {
                acc -= a[k * n + i] * mu[k];
            }
            mu[i] = acc / a[i * n + i];
        }
        for k in (0..n.saturating_sub(1)).rev() {
            let next = mu[k + 1];
            mu[k] -= multipliers[k] * next;
            if swapped[k] {
                mu.swap(k, k + 1);
            }
        }
        Some(())
    }
}

/// bᵀμ for real b.
fn dot(b: &[f64], mu: &[c64]) -> c64 {
    b.iter().zip(mu).fold(c64::new(0.0, 0.0), |acc, (b, m)| acc + m * *b)
}

/// The working storage of the solves at one frequency.
#[derive(Default)]
struct Work {
    a: Vec<c64>,
    y: Vec<c64>,
    multipliers: Vec<c64>,
    swapped: Vec<bool>,
}

thread_local! {
    /// One [`Work`] per thread, reused from call to call: a cut-off search or a noise
    /// integral solves the same small system a hundred times.
    static WORK: RefCell<Work> = RefCell::new(Work::default());
}

#[cfg(test)]
mod tests {
    use super::*;
    use faer::linalg::solvers::Solve;

    fn random(seed: &mut u64) -> f64 {
        *seed = seed.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        ((*seed >> 11) as f64 / (1u64 << 53) as f64) - 0.5
    }

    /// A pseudo-random pencil of size n with C singular (rows and columns without any
    /// capacitance, as an MNA's static unknowns and branch rows have), some of G's diagonal
    /// zero (row exchanges needed), and three inputs.
    fn pencil(n: usize, seed: &mut u64) -> (Mat<f64>, Mat<f64>, Mat<f64>, Vec<f64>) {
        let g = Mat::<f64>::from_fn(n, n, |i, j| {
            let v = random(seed);
            if i == j && i % 3 == 0 { 0.0 } else { v * 1e-3 }
        });
        let c = Mat::<f64>::from_fn(n, n, |i, j| {
            let v = random(seed);
            if i % 4 == 1 || j % 5 == 2 { 0.0 } else { v * 1e-9 }
        });
        let b = Mat::<f64>::from_fn(n, 3, |_, _| random(seed));
        let out = (0..n).map(|_| random(seed)).collect();
        (g, c, b, out)
    }

    /// Every input's transfer against faer's dense complex LU (a general-purpose library,
    /// the reference here) on pencils of 1 to 30 unknowns whose C is singular, over six
    /// decades of frequency, to 1e-10 of the solution's size.
    #[test]
    fn agrees_with_a_library_lu() {
        let mut seed = 2024u64;
        let mut h = Vec::new();
        for n in [1usize, 2, 3, 5, 7, 9, 16, 30] {
            let (g, c, b, out) = pencil(n, &mut seed);
            let p = Pencil::new(&g, &c, &b, &out);
            for f in [1e3, 1e5, 3e6, 1e8, 1e9] {
                let s = c64::new(0.0, 2.0 * std::f64::consts::PI * f);
                let a = Mat::<c64>::from_fn(n, n, |i, j| c64::new(g[(i, j)], 0.0) + s * c[(i, j)]);
                let x = a
                    .partial_piv_lu()
                    .solve(Mat::<c64>::from_fn(n, 3, |i, j| c64::new(b[(i, j)], 0.0)));
                p.transfers(s, &mut h).expect("regular");
                for k in 0..3 {
                    let h_ref = (0..n).fold(c64::new(0.0, 0.0), |acc, i| acc + x[(i, k)] * out[i]);
                    let size = (0..n).fold(h_ref.norm(), |m, i| m.max(x[(i, k)].norm()));
                    assert!(
                        (h[k] - h_ref).norm() <= 1e-10 * size,
                        "n {n} f {f} input {k}: {} vs {h_ref}",
                        h[k]
                    );
                }
                assert_eq!(p.transfer(s), Some(h[0]));
            }
        }
    }

    /// The reduction's own invariants: H upper Hessenberg, T upper triangular, and the
    /// inputs and output keep their lengths (Q and Z are orthogonal).
    #[test]
    fn the_form_holds() {
        let mut seed = 7u64;
        let n = 12;
        let (g, c, b, out) = pencil(n, &mut seed);
        let p = Pencil::new(&g, &c, &b, &out);
        for i in 0..n {
            for j in 0..n {
                if i > j + 1 {
                    assert_eq!(p.h[i * n + j], 0.0);
                }
                if i > j {
                    assert_eq!(p.t[i * n + j], 0.0);
                }
            }
        }
        let length = |v: &[f64]| v.iter().map(|x| x * x).sum::<f64>().sqrt();
        assert!((length(&p.out) - length(&out)).abs() < 1e-14);
        for k in 0..3 {
            let column: Vec<f64> = (0..n).map(|i| b[(i, k)]).collect();
            assert!((length(&p.inputs[k * n..(k + 1) * n]) - length(&column)).abs() < 1e-14);
        }
    }

    /// A singular pencil (G and C sharing a zero row) is refused at every frequency.
    #[test]
    fn singular_is_refused() {
        let mut seed = 99u64;
        let (mut g, mut c, b, out) = pencil(6, &mut seed);
        for j in 0..6 {
            g[(2, j)] = 0.0;
            c[(2, j)] = 0.0;
        }
        let p = Pencil::new(&g, &c, &b, &out);
        for f in [1.0, 1e6] {
            let s = c64::new(0.0, 2.0 * std::f64::consts::PI * f);
            assert_eq!(p.transfer(s), None);
        }
    }
}
