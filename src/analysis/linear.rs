//! The factorisations used by the analysis: real LU of G (one per network, reused for every
//! solve; dense for the small systems of amplifier stages, sparse for large mostly-zero ones)
//! and the sparse complex LU of G + sC for the frequency response of large networks (small
//! ones go through `pencil.rs`).
//!
//! In: faer matrices or [`Matrix`]. Out: solutions, or [`Singular`] when a pivot vanishes.
//! No netlist.

use faer::linalg::solvers::{PartialPivLu, Solve};
use faer::sparse::linalg::solvers::{Lu, SymbolicLu};
use faer::{Mat, c64};

use crate::analysis::matrix::Matrix;

/// The matrix is singular (to working precision).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Singular {
    /// The first unknown whose pivot vanished, when the factorisation can tell (the sparse
    /// one cannot: it sees only that the solution grows past any physical one).
    pub unknown: Option<usize>,
}

/// Unknowns above which a mostly-zero system is factorised in sparse form.
pub const SPARSE_FROM: usize = 60;

/// Whether a system of `n` unknowns with `nonzeros` entries is solved in sparse form: more
/// than [`SPARSE_FROM`] unknowns and at most a fifth of the entries non-zero. Below that a
/// dense LU is faster (and the cut-off searches of a stage solve it hundreds of times).
pub fn sparse_pays(n: usize, nonzeros: usize) -> bool {
    n > SPARSE_FROM && nonzeros * 5 <= n * n
}

/// A factorised real matrix.
pub struct Factor {
    lu: Kind,
    n: usize,
}

enum Kind {
    /// Up to [`SMALL`] unknowns: [`SmallLu`], without allocation per solve.
    Small(SmallLu),
    Dense(PartialPivLu<f64>),
    Sparse(Lu<usize, f64>),
}

/// Relative size below which a pivot counts as zero.
const PIVOT_TOLERANCE: f64 = 1e-13;

impl Factor {
    /// Factorises `a`, refusing a singular one: sparse when that pays ([`sparse_pays`]).
    pub fn new(a: &Matrix) -> Result<Factor, Singular> {
        let n = a.size();
        if n <= SMALL {
            let mut rows = vec![0.0; n * n];
            for (i, j, v) in a.entries() {
                rows[i * n + j] = v;
            }
            return SmallLu::new(rows, n).map(|lu| Factor { lu: Kind::Small(lu), n });
        }
        if !sparse_pays(n, a.nonzeros()) {
            return Factor::dense(&a.dense());
        }
        let factor = Factor::new_unguarded(a)?;
        // A numerically singular matrix factorises, and then amplifies: refused as the dense
        // LU refuses a pivot under PIVOT_TOLERANCE of the largest entry, when the solution
        // for a right-hand side of ones, times the largest entry, exceeds 1/PIVOT_TOLERANCE.
        let x = factor.solve(&vec![1.0; n]);
        let x_max = x
            .iter()
            .fold(0.0f64, |m, v| if v.is_finite() { m.max(v.abs()) } else { f64::INFINITY });
        if (x_max * a.max_abs() * PIVOT_TOLERANCE).partial_cmp(&1.0)
            != Some(std::cmp::Ordering::Less)
        {
            return Err(Singular { unknown: None });
        }
        Ok(factor)
    }

    /// Factorises `a` as [`Factor::new`] does, refusing it only when the factorisation itself
    /// fails (a zero pivot), not when it is merely near singular: for a shift-and-invert
    /// operator, whose shift may sit close to a root on purpose. Solutions may be infinite;
    /// the caller checks them.
    pub fn new_unguarded(a: &Matrix) -> Result<Factor, Singular> {
        let n = a.size();
        if !sparse_pays(n, a.nonzeros()) {
            let lu = a.dense().partial_piv_lu();
            return Ok(Factor { lu: Kind::Dense(lu), n });
        }
        let (col_ptr, rows, values) = a.parts();
        let refused = Singular { unknown: None };
        let pattern = faer::sparse::SymbolicSparseColMatRef::new_checked(n, n, col_ptr, None, rows);
        let symbolic = SymbolicLu::try_new(pattern).map_err(|_| refused)?;
        let matrix = faer::sparse::SparseColMatRef::new(pattern, values);
        let lu = Lu::try_new_with_symbolic(symbolic, matrix).map_err(|_| refused)?;
        Ok(Factor { lu: Kind::Sparse(lu), n })
    }

    /// Factorises a dense matrix, refusing a singular one.
    pub fn dense(a: &Mat<f64>) -> Result<Factor, Singular> {
        let n = a.nrows();
        if n <= SMALL {
            let rows = (0..n * n).map(|k| a[(k / n, k % n)]).collect();
            return SmallLu::new(rows, n).map(|lu| Factor { lu: Kind::Small(lu), n });
        }
        let scale = (0..n)
            .flat_map(|i| (0..n).map(move |j| (i, j)))
            .fold(0.0f64, |m, (i, j)| m.max(a[(i, j)].abs()));
        let lu = a.partial_piv_lu();
        let u = lu.U();
        for i in 0..n {
            if u[(i, i)].abs().partial_cmp(&(PIVOT_TOLERANCE * scale))
                != Some(std::cmp::Ordering::Greater)
            {
                return Err(Singular { unknown: Some(i) });
            }
        }
        Ok(Factor { lu: Kind::Dense(lu), n })
    }

    /// Solves a x = rhs.
    pub fn solve(&self, rhs: &[f64]) -> Vec<f64> {
        if let Kind::Small(lu) = &self.lu {
            let mut x = rhs.to_vec();
            lu.solve_in_place(&mut x);
            return x;
        }
        let r = Mat::<f64>::from_fn(self.n, 1, |i, _| rhs[i]);
        let x = self.solve_columns(&r);
        (0..self.n).map(|i| x[(i, 0)]).collect()
    }

    /// Solves a X = R for every column of R at once.
    pub fn solve_columns(&self, rhs: &Mat<f64>) -> Mat<f64> {
        match &self.lu {
            Kind::Small(lu) => lu.solve_columns(rhs, false),
            Kind::Dense(lu) => lu.solve(rhs),
            Kind::Sparse(lu) => lu.solve(rhs),
        }
    }

    /// Solves aᵀ X = R for every column of R at once.
    pub fn solve_transpose_columns(&self, rhs: &Mat<f64>) -> Mat<f64> {
        match &self.lu {
            Kind::Small(lu) => lu.solve_columns(rhs, true),
            Kind::Dense(lu) => lu.solve_transpose(rhs),
            Kind::Sparse(lu) => lu.solve_transpose(rhs),
        }
    }

    /// Unknowns.
    pub fn size(&self) -> usize {
        self.n
    }
}

/// Size up to which systems are solved by a plain in-place elimination ([`SmallLu`] and,
/// in the port analysis, `ports.rs`'s complex one): the systems of amplifier stages are this
/// small and are solved thousands of times in a tolerance study, where a general blocked LU
/// spends more on setting up and allocating than on arithmetic.
pub const SMALL: usize = 24;

/// LU with partial pivoting (the largest magnitude in the column; the first on a tie) of a
/// small dense matrix, row major, factorised in place: P·A = L·U with L unit lower
/// triangular (Golub & Van Loan, *Matrix Computations*, Gaussian elimination with partial
/// pivoting, from memory). A pivot at or under [`PIVOT_TOLERANCE`] of the largest entry of
/// A refuses the matrix as singular, naming that unknown.
pub struct SmallLu {
    n: usize,
    /// L below the diagonal (multipliers), U on and above it.
    lu: Vec<f64>,
    /// `row[k]`: the row of A that became row k.
    row: Vec<usize>,
}

impl SmallLu {
    /// Factorises the row-major n × n matrix `a`.
    pub fn new(mut a: Vec<f64>, n: usize) -> Result<SmallLu, Singular> {
        let scale = a.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        let mut row: Vec<usize> = (0..n).collect();
        for k in 0..n {
            let mut p = k;
            for i in k + 1..n {
                if a[i * n + k].abs() > a[p * n + k].abs() {
                    p = i;
                }
            }
            if a[p * n + k].abs().partial_cmp(&(PIVOT_TOLERANCE * scale))
                != Some(std::cmp::Ordering::Greater)
            {
                return Err(Singular { unknown: Some(k) });
            }
            if p != k {
                let (upper, lower) = a.split_at_mut(p * n);
                upper[k * n..(k + 1) * n].swap_with_slice(&mut lower[..n]);
                row.swap(k, p);
            }
            let (done, rest) = a.split_at_mut((k + 1) * n);
            let pivot_row = &done[k * n..];
            for r in rest.chunks_exact_mut(n) {
                let f = r[k] / pivot_row[k];
                r[k] = f;
                if f != 0.0 {
                    for (x, u) in r[k + 1..].iter_mut().zip(&pivot_row[k + 1..]) {
                        *x -= f * u;
                    }
                }
            }
        }
        Ok(SmallLu { n, lu: a, row })
    }

    /// Solves A x = b in place.
    pub fn solve_in_place(&self, b: &mut [f64]) {
        let n = self.n;
        let mut x = [0.0f64; SMALL];
        for (k, &r) in self.row.iter().enumerate() {
            x[k] = b[r];
        }
        let (lu, x) = (&self.lu, &mut x[..n]);
        for i in 1..n {
            let l = &lu[i * n..i * n + i];
            x[i] -= l.iter().zip(&x[..i]).map(|(a, b)| a * b).sum::<f64>();
        }
        for i in (0..n).rev() {
            let u = &lu[i * n + i + 1..(i + 1) * n];
            let sum = u.iter().zip(&x[i + 1..]).map(|(a, b)| a * b).sum::<f64>();
            x[i] = (x[i] - sum) / lu[i * n + i];
        }
        b.copy_from_slice(x);
    }

    /// Solves Aᵀ x = b in place: Uᵀ w = b, Lᵀ v = w, x = Pᵀ v.
    pub fn solve_transpose_in_place(&self, b: &mut [f64]) {
        let n = self.n;
        let lu = &self.lu;
        let mut w = [0.0f64; SMALL];
        for i in 0..n {
            let mut acc = b[i];
            for k in 0..i {
                acc -= lu[k * n + i] * w[k];
            }
            w[i] = acc / lu[i * n + i];
        }
        for i in (0..n).rev() {
            let mut acc = w[i];
            for k in i + 1..n {
                acc -= lu[k * n + i] * w[k];
            }
            w[i] = acc;
        }
        for (k, &r) in self.row.iter().enumerate() {
            b[r] = w[k];
        }
    }

    /// Solves A X = R (or Aᵀ X = R) column by column.
    fn solve_columns(&self, rhs: &Mat<f64>, transposed: bool) -> Mat<f64> {
        let mut out = rhs.clone();
        let mut b = [0.0f64; SMALL];
        for j in 0..rhs.ncols() {
            let b = &mut b[..self.n];
            for (i, v) in b.iter_mut().enumerate() {
                *v = rhs[(i, j)];
            }
            if transposed {
                self.solve_transpose_in_place(b);
            } else {
                self.solve_in_place(b);
            }
            for (i, v) in b.iter().enumerate() {
                out[(i, j)] = *v;
            }
        }
        out
    }
}

/// The row at or below `k` with the largest entry in column `k` of the n-row matrix `a`
/// (row major, `w` entries a row), magnitudes compared squared; None when even that is at or
/// under `floor_sq` (singular to the pivot tolerance).
pub(crate) fn pivot(a: &[c64], w: usize, n: usize, k: usize, floor_sq: f64) -> Option<usize> {
    let size_sq = |z: c64| z.re * z.re + z.im * z.im;
    let (mut p, mut best) = (k, size_sq(a[k * w + k]));
    for i in k + 1..n {
        let m = size_sq(a[i * w + k]);
        if m > best {
            p = i;
            best = m;
        }
    }
    (best.partial_cmp(&floor_sq) == Some(std::cmp::Ordering::Greater)).then_some(p)
}

/// Brent's method for a root of `f` in [a, b] with f(a), f(b) of opposite sign
/// (Brent, Algorithms for Minimization without Derivatives, 1973, ch. 4).
pub fn brent(mut f: impl FnMut(f64) -> f64, a: f64, b: f64, tol: f64) -> f64 {
    let (fa, fb) = (f(a), f(b));
    brent_bracketed(f, (a, fa), (b, fb), tol)
}

/// [`brent`] on a bracket whose ends are already evaluated: (a, f(a)) and (b, f(b)).
pub fn brent_bracketed(
    mut f: impl FnMut(f64) -> f64,
    (mut a, mut fa): (f64, f64),
    (mut b, mut fb): (f64, f64),
    tol: f64,
) -> f64 {
    if fa == 0.0 {
        return a;
    }
    if fb == 0.0 {
        return b;
    }
    let (mut c, mut fc) = (a, fa);
    let (mut d, mut e) = (b - a, b - a);
    for _ in 0..200 {
        if fb.signum() == fc.signum() {
            c = a;
            fc = fa;
            d = b - a;
            e = d;
        }
        if fc.abs() < fb.abs() {
            a = b;
            b = c;
            c = a;
            fa = fb;
            fb = fc;
            fc = fa;
        }
        let tol1 = 2.0 * f64::EPSILON * b.abs() + 0.5 * tol;
        let m = 0.5 * (c - b);
        if m.abs() <= tol1 || fb == 0.0 {
            return b;
        }
        if e.abs() >= tol1 && fa.abs() > fb.abs() {
            let s = fb / fa;
            let (mut p, mut q);
            if a == c {
                p = 2.0 * m * s;
                q = 1.0 - s;
            } else {
                let qa = fa / fc;
                let r = fb / fc;
                p = s * (2.0 * m * qa * (qa - r) - (b - a) * (r - 1.0));
                q = (qa - 1.0) * (r - 1.0) * (s - 1.0);
            }
            if p > 0.0 {
                q = -q;
            } else {
                p = -p;
            }
            if 2.0 * p < (3.0 * m * q - (tol1 * q).abs()).min((e * q).abs()) {
                e = d;
                d = p / q;
            } else {
                d = m;
                e = m;
            }
        } else {
            d = m;
            e = m;
        }
        a = b;
        fa = fb;
        b += if d.abs() > tol1 { d } else { tol1 * m.signum() };
        fb = f(b);
    }
    b
}

/// A real system stamped again and again at the same places with new values — the Newton
/// steps of a large bias network — factorised sparse on one symbolic analysis made once.
pub struct Restamped {
    n: usize,
    col_ptr: Vec<usize>,
    rows: Vec<usize>,
    /// The stored entry each stamp adds into, in stamp order.
    slot: Vec<usize>,
    symbolic: SymbolicLu<usize>,
}

impl Restamped {
    /// The pattern of stamps at `places` (row, column) in an n × n system, or None when the
    /// symbolic analysis fails.
    pub fn new(n: usize, places: &[(usize, usize)]) -> Option<Restamped> {
        let mut order: Vec<usize> = (0..places.len()).collect();
        order.sort_by_key(|&k| (places[k].1, places[k].0));
        let (mut col_ptr, mut rows) = (vec![0usize], Vec::new());
        let mut slot = vec![0; places.len()];
        let mut k = 0;
        for j in 0..n {
            while k < order.len() && places[order[k]].1 == j {
                let i = places[order[k]].0;
                if rows.len() == col_ptr[j] || rows.last() != Some(&i) {
                    rows.push(i);
                }
                slot[order[k]] = rows.len() - 1;
                k += 1;
            }
            col_ptr.push(rows.len());
        }
        let pattern =
            faer::sparse::SymbolicSparseColMatRef::new_checked(n, n, &col_ptr, None, &rows);
        let symbolic = SymbolicLu::try_new(pattern).ok()?;
        Some(Restamped { n, col_ptr, rows, slot, symbolic })
    }

    /// Entries stored.
    pub fn nonzeros(&self) -> usize {
        self.rows.len()
    }

    /// Solves the system whose stamps (at the places given to [`Restamped::new`], in the same
    /// order) have `values`, for `rhs`. Each stored entry sums its stamps in stamp order, so
    /// the same values give the same bits. None when a pivot is exactly zero; an answer
    /// amplified past any physical one is returned for the caller to judge.
    pub fn solve(&self, values: impl Iterator<Item = f64>, rhs: &[f64]) -> Option<Vec<f64>> {
        let mut entries = vec![0.0; self.rows.len()];
        for (slot, v) in self.slot.iter().zip(values) {
            entries[*slot] += v;
        }
        let pattern = faer::sparse::SymbolicSparseColMatRef::new_checked(
            self.n,
            self.n,
            &self.col_ptr,
            None,
            &self.rows,
        );
        let a = faer::sparse::SparseColMatRef::new(pattern, &entries);
        let lu = Lu::try_new_with_symbolic(self.symbolic.clone(), a).ok()?;
        let x = lu.solve(Mat::<f64>::from_fn(self.n, 1, |i, _| rhs[i]));
        Some((0..self.n).map(|i| x[(i, 0)]).collect())
    }
}

/// G + sC in sparse compressed-column form, with one symbolic LU (fill-reducing ordering and
/// elimination structure) shared by every frequency: above a few dozen unknowns, a network's
/// matrices are mostly zero, and a dense complex LU per frequency grows as n³ where the sparse
/// one grows about as the fill does (a ladder: as n).
pub struct SparseSystem {
    n: usize,
    col_ptr: Vec<usize>,
    row_idx: Vec<usize>,
    g: Vec<f64>,
    c: Vec<f64>,
    symbolic: SymbolicLu<usize>,
}

impl SparseSystem {
    /// The pattern of G and C together, or None when the symbolic analysis fails.
    pub fn new(g: &Matrix, c: &Matrix) -> Option<SparseSystem> {
        let n = g.size();
        let mut stamps: Vec<(usize, usize, f64, f64)> = g
            .entries()
            .map(|(i, j, v)| (i, j, v, 0.0))
            .chain(c.entries().map(|(i, j, v)| (i, j, 0.0, v)))
            .collect();
        stamps.sort_by_key(|s| (s.1, s.0));
        let (mut col_ptr, mut row_idx, mut gv, mut cv) =
            (vec![0usize], Vec::new(), Vec::<f64>::new(), Vec::<f64>::new());
        let mut k = 0;
        for j in 0..n {
            while k < stamps.len() && stamps[k].1 == j {
                let (i, _, a, b) = stamps[k];
                if row_idx.len() > col_ptr[j] && row_idx.last() == Some(&i) {
                    *gv.last_mut().expect("entry") += a;
                    *cv.last_mut().expect("entry") += b;
                } else {
                    row_idx.push(i);
                    gv.push(a);
                    cv.push(b);
                }
                k += 1;
            }
            col_ptr.push(row_idx.len());
        }
        let pattern =
            faer::sparse::SymbolicSparseColMatRef::new_checked(n, n, &col_ptr, None, &row_idx);
        let symbolic = SymbolicLu::try_new(pattern).ok()?;
        Some(SparseSystem { n, col_ptr, row_idx, g: gv, c: cv, symbolic })
    }

    /// The numeric LU of G + sC on the shared symbolic analysis, and the entries it
    /// factorised.
    fn factor(&self, s: c64) -> Option<(Lu<usize, c64>, Vec<c64>)> {
        let values: Vec<c64> =
            self.g.iter().zip(&self.c).map(|(g, c)| c64::new(*g, 0.0) + s * *c).collect();
        let pattern = faer::sparse::SymbolicSparseColMatRef::new_checked(
            self.n,
            self.n,
            &self.col_ptr,
            None,
            &self.row_idx,
        );
        let a = faer::sparse::SparseColMatRef::new(pattern, &values);
        let lu = Lu::try_new_with_symbolic(self.symbolic.clone(), a).ok()?;
        Some((lu, values))
    }

    /// x = (G + sC)⁻¹ rhs and λ = (G + sC)⁻ᵀ functional from one numeric factorisation, or
    /// None when singular there (the adjoint method's pair of solves).
    pub fn solve_pair(
        &self,
        s: c64,
        rhs: &[f64],
        functional: &[f64],
    ) -> Option<(Vec<c64>, Vec<c64>)> {
        let n = self.n;
        let (lu, _) = self.factor(s)?;
        let column = |v: &[f64]| Mat::<c64>::from_fn(n, 1, |i, _| c64::new(v[i], 0.0));
        let x = lu.solve(column(rhs));
        let lambda = lu.solve_transpose(column(functional));
        let x: Vec<c64> = (0..n).map(|i| x[(i, 0)]).collect();
        let lambda: Vec<c64> = (0..n).map(|i| lambda[(i, 0)]).collect();
        x.iter().chain(&lambda).all(|v| v.is_finite()).then_some((x, lambda))
    }

    /// x = (G + sC)⁻¹ rhs for a complex right-hand side, or None when singular there.
    pub fn solve(&self, s: c64, rhs: &[c64]) -> Option<Vec<c64>> {
        let (lu, _) = self.factor(s)?;
        let x = lu.solve(Mat::<c64>::from_fn(self.n, 1, |i, _| rhs[i]));
        let x: Vec<c64> = (0..self.n).map(|i| x[(i, 0)]).collect();
        x.iter().all(|v| v.is_finite()).then_some(x)
    }

    /// y = outᵀ (G + sC)⁻¹ b, or None when singular there.
    pub fn transfer(&self, b: &[f64], out: &[f64], s: c64) -> Option<c64> {
        let n = self.n;
        let (lu, values) = self.factor(s)?;
        let rhs = Mat::<c64>::from_fn(n, 1, |i, _| c64::new(b[i], 0.0));
        let x = lu.solve(&rhs);
        // The sparse LU fails only on a structurally singular matrix; a numerically singular
        // one gives an answer amplified past any physical one. Refused as the dense
        // elimination refuses a pivot under PIVOT_TOLERANCE of the largest entry: when the
        // solution's size times the largest entry exceeds the source's by 1/PIVOT_TOLERANCE.
        let size = |v: c64| v.re.abs().max(v.im.abs());
        let scale = values.iter().map(|v| size(*v)).fold(0.0, f64::max);
        let x_max = (0..n).map(|i| size(x[(i, 0)])).fold(0.0, f64::max);
        let b_max = b.iter().map(|v| v.abs()).fold(0.0, f64::max);
        let amplified = x_max * scale * PIVOT_TOLERANCE;
        if amplified.partial_cmp(&b_max) != Some(std::cmp::Ordering::Less)
            && amplified.partial_cmp(&b_max) != Some(std::cmp::Ordering::Equal)
        {
            return None;
        }
        let y = (0..n).map(|i| x[(i, 0)] * out[i]).fold(c64::new(0.0, 0.0), |acc, v| acc + v);
        y.is_finite().then_some(y)
    }
}

/// Solves the dense row-major n × n system `a`·x = `b` in place (x left in `b`) by LU with
/// partial pivoting; false when a pivot is exactly zero (a near-singular system gives
/// non-finite or huge entries, which the caller judges). For the Newton steps of a bias
/// point, solved thousands of times in a tolerance study.
pub(crate) fn solve_in_place(a: &mut [f64], b: &mut [f64], n: usize) -> bool {
    for k in 0..n {
        let mut p = k;
        for i in k + 1..n {
            if a[i * n + k].abs() > a[p * n + k].abs() {
                p = i;
            }
        }
        if a[p * n + k] == 0.0 {
            return false;
        }
        if p != k {
            for c in 0..n {
                a.swap(k * n + c, p * n + c);
            }
            b.swap(k, p);
        }
        let pivot = a[k * n + k];
        for i in k + 1..n {
            let f = a[i * n + k] / pivot;
            if f != 0.0 {
                for c in k + 1..n {
                    a[i * n + c] -= f * a[k * n + c];
                }
                b[i] -= f * b[k];
            }
        }
    }
    for k in (0..n).rev() {
        let mut sum = b[k];
        for c in k + 1..n {
            sum -= a[k * n + c] * b[c];
        }
        b[k] = sum / a[k * n + k];
    }
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn brent_finds_roots() {
        let r = brent(|x| x * x - 2.0, 0.0, 2.0, 1e-15);
        assert!((r - std::f64::consts::SQRT_2).abs() < 1e-14);
        let r = brent(|x| x.cos() - x, 0.0, 1.0, 1e-15);
        assert!((r - 0.739_085_133_215_160_6).abs() < 1e-14); // Dottie number (common knowledge)
    }

    #[test]
    fn singular_is_refused() {
        let a = Mat::<f64>::from_fn(2, 2, |i, j| [[1.0, 2.0], [2.0, 4.0]][i][j]);
        assert!(Factor::dense(&a).is_err());
        let a = Mat::<f64>::from_fn(2, 2, |i, j| [[2.0, 1.0], [1.0, 3.0]][i][j]);
        let x = Factor::dense(&a).unwrap().solve(&[3.0, 4.0]);
        assert!((x[0] - 1.0).abs() < 1e-15 && (x[1] - 1.0).abs() < 1e-15);
    }

    /// The in-place LU of small systems against faer's blocked partial-pivoting LU (a
    /// reference library): non-symmetric matrices of 1–24 unknowns with entries twelve
    /// decades apart and zero diagonals, solved plain and transposed with three right-hand
    /// sides, to 1e-10 of the solution's size; and `solve_in_place`, the Newton steps' solver,
    /// alike.
    #[test]
    fn the_small_lu_solves_as_faer_does() {
        let mut seed = 0x2545_f491_4f6c_dd1du64;
        let mut next = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64
        };
        for n in 1..=SMALL {
            let a = Mat::<f64>::from_fn(n, n, |i, j| {
                let v = if i == j && n > 1 && i % 3 == 1 { 0.0 } else { next() - 0.3 };
                v * 10f64.powi(((i + 2 * j) % 13) as i32 - 6)
            });
            let rhs = Mat::<f64>::from_fn(n, 3, |_, _| next() - 0.5);
            let lu = a.partial_piv_lu();
            let small = Factor::dense(&a).unwrap();
            for (got, want) in [
                (small.solve_columns(&rhs), lu.solve(&rhs)),
                (small.solve_transpose_columns(&rhs), lu.solve_transpose(&rhs)),
            ] {
                for j in 0..3 {
                    let size = (0..n).fold(0.0f64, |m, i| m.max(want[(i, j)].abs()));
                    for i in 0..n {
                        let gap = (got[(i, j)] - want[(i, j)]).abs();
                        assert!(
                            gap <= 1e-10 * size,
                            "n = {n}: {} vs {}",
                            got[(i, j)],
                            want[(i, j)]
                        );
                    }
                }
            }
            let mut rows: Vec<f64> = (0..n * n).map(|k| a[(k / n, k % n)]).collect();
            let mut x: Vec<f64> = (0..n).map(|i| rhs[(i, 0)]).collect();
            assert!(solve_in_place(&mut rows, &mut x, n));
            let want = lu.solve(&rhs);
            let size = (0..n).fold(0.0f64, |m, i| m.max(want[(i, 0)].abs()));
            assert!((0..n).all(|i| (x[i] - want[(i, 0)]).abs() <= 1e-10 * size), "n = {n}");
        }
    }

    /// The sparse real LU (above 60 unknowns) solves as the dense one does, and refuses a
    /// singular matrix as the dense one does: a 100-node resistor chain to ground, then the
    /// same with its one path to ground removed (every row sums to zero: singular).
    #[test]
    fn sparse_and_dense_factors_agree() {
        let n = 100;
        let chain = |grounded: bool| {
            let mut stamps = Vec::new();
            for i in 0..n - 1 {
                let g = 1e-3 * (1.0 + i as f64 / 10.0);
                stamps.extend([(i, i, g), (i + 1, i + 1, g), (i, i + 1, -g), (i + 1, i, -g)]);
            }
            if grounded {
                stamps.push((0, 0, 1e-2));
            }
            Matrix::from_stamps(n, stamps)
        };
        let a = chain(true);
        assert!(sparse_pays(n, a.nonzeros()));
        let rhs: Vec<f64> = (0..n).map(|i| (i as f64).sin()).collect();
        let (x, y) =
            (Factor::new(&a).unwrap().solve(&rhs), Factor::dense(&a.dense()).unwrap().solve(&rhs));
        let size = y.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        assert!(x.iter().zip(&y).all(|(p, q)| (p - q).abs() <= 1e-10 * size), "{x:?} {y:?}");
        assert!(Factor::dense(&chain(false).dense()).is_err());
        assert!(Factor::new(&chain(false)).is_err());
    }

    /// The sparse solve gives a dense LU's answer (an RC ladder of 150 sections, the
    /// response at three frequencies across its roll-off) to rounding.
    #[test]
    fn sparse_and_dense_transfers_agree() {
        let n = 150;
        // Node voltages 0..n: R = 1 kΩ between neighbours, 10 pF to ground, a 1 kΩ source
        // into node 0 as a Norton current (b), the output at the last node.
        let mut g = Mat::<f64>::zeros(n, n);
        let mut c = Mat::<f64>::zeros(n, n);
        let gr = 1e-3;
        for i in 0..n {
            c[(i, i)] = 10e-12;
            if i + 1 < n {
                g[(i, i)] += gr;
                g[(i + 1, i + 1)] += gr;
                g[(i, i + 1)] -= gr;
                g[(i + 1, i)] -= gr;
            }
        }
        g[(0, 0)] += gr;
        let mut b = vec![0.0; n];
        b[0] = gr;
        let mut out = vec![0.0; n];
        out[n - 1] = 1.0;
        let sparse = SparseSystem::new(&Matrix::from_dense(&g), &Matrix::from_dense(&c)).unwrap();
        for f in [1e3, 1e5, 1e6] {
            let s = c64::new(0.0, 2.0 * std::f64::consts::PI * f);
            // The reference: faer's dense complex LU.
            let a_dense =
                Mat::<c64>::from_fn(n, n, |i, j| c64::new(g[(i, j)], 0.0) + s * c[(i, j)]);
            let x = a_dense
                .partial_piv_lu()
                .solve(Mat::<c64>::from_fn(n, 1, |i, _| c64::new(b[i], 0.0)));
            let d = x[(n - 1, 0)];
            let a = sparse.transfer(&b, &out, s).unwrap();
            assert!((a - d).norm() <= 1e-9 * d.norm(), "{f} Hz: sparse {a} dense {d}");
        }
    }
}
