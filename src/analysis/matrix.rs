//! The real square matrices of a network (G and C) in compressed-column form.
//!
//! In: stamps (row, column, value) in any order. Out: a [`Matrix`] holding only the entries
//! that are not zero, column by column, rows ascending — the form faer's sparse LU takes, and
//! small enough that a network of thousands of nodes costs memory in proportion to its parts
//! rather than to the square of its nodes. Dense copies are made only for the small systems
//! the dense solvers and QZ take. No solving here.

use faer::Mat;

/// A real n × n matrix by its non-zero entries, column-compressed.
#[derive(Clone, Debug, PartialEq)]
pub struct Matrix {
    n: usize,
    /// Start of each column in `rows`/`values`; n + 1 entries.
    col_ptr: Vec<usize>,
    /// Row of each entry, ascending within a column.
    rows: Vec<usize>,
    values: Vec<f64>,
}

impl Matrix {
    /// The n × n matrix with the sum of the stamps at each place (exact zeros dropped).
    pub fn from_stamps(n: usize, mut stamps: Vec<(usize, usize, f64)>) -> Matrix {
        stamps.sort_by_key(|s| (s.1, s.0));
        let mut col_ptr = Vec::with_capacity(n + 1);
        let (mut rows, mut values) =
            (Vec::with_capacity(stamps.len()), Vec::with_capacity(stamps.len()));
        let mut k = 0;
        col_ptr.push(0);
        for j in 0..n {
            while k < stamps.len() && stamps[k].1 == j {
                let i = stamps[k].0;
                let mut v = 0.0;
                // Stamps are summed in their given order for each place: the same bits
                // whatever the sort did with equal keys (the sort is stable).
                while k < stamps.len() && stamps[k].1 == j && stamps[k].0 == i {
                    v += stamps[k].2;
                    k += 1;
                }
                if v != 0.0 {
                    rows.push(i);
                    values.push(v);
                }
            }
            col_ptr.push(rows.len());
        }
        Matrix { n, col_ptr, rows, values }
    }

    /// The matrix whose entries are those of a dense one that are not zero.
    pub fn from_dense(a: &Mat<f64>) -> Matrix {
        let n = a.nrows();
        let mut stamps = Vec::new();
        for j in 0..n {
            for i in 0..n {
                if a[(i, j)] != 0.0 {
                    stamps.push((i, j, a[(i, j)]));
                }
            }
        }
        Matrix::from_stamps(n, stamps)
    }

    /// Rows (and columns).
    pub fn size(&self) -> usize {
        self.n
    }

    /// Entries stored (those not zero).
    pub fn nonzeros(&self) -> usize {
        self.values.len()
    }

    /// The entry at row `i`, column `j`.
    pub fn get(&self, i: usize, j: usize) -> f64 {
        let (lo, hi) = (self.col_ptr[j], self.col_ptr[j + 1]);
        match self.rows[lo..hi].binary_search(&i) {
            Ok(k) => self.values[lo + k],
            Err(_) => 0.0,
        }
    }

    /// Every stored entry as (row, column, value), column by column.
    pub fn entries(&self) -> impl Iterator<Item = (usize, usize, f64)> + '_ {
        (0..self.n).flat_map(move |j| {
            (self.col_ptr[j]..self.col_ptr[j + 1]).map(move |k| (self.rows[k], j, self.values[k]))
        })
    }

    /// A dense copy.
    pub fn dense(&self) -> Mat<f64> {
        let mut a = Mat::<f64>::zeros(self.n, self.n);
        for (i, j, v) in self.entries() {
            a[(i, j)] = v;
        }
        a
    }

    /// Whether row or column `i` holds any entry.
    pub fn touches(&self) -> Vec<bool> {
        let mut t = vec![false; self.n];
        for (i, j, _) in self.entries() {
            t[i] = true;
            t[j] = true;
        }
        t
    }

    /// The largest magnitude of any entry.
    pub fn max_abs(&self) -> f64 {
        self.values.iter().fold(0.0, |m, v| m.max(v.abs()))
    }

    /// The submatrix of rows `r` and columns `c` (each a list of indices into this one), with
    /// the sizes of those lists: rows of the result follow `r`, columns follow `c`.
    pub fn select(&self, r: &[usize], c: &[usize]) -> Sub {
        let mut row_of = vec![usize::MAX; self.n];
        for (k, &i) in r.iter().enumerate() {
            row_of[i] = k;
        }
        let mut entries = Vec::new();
        for (kc, &j) in c.iter().enumerate() {
            for k in self.col_ptr[j]..self.col_ptr[j + 1] {
                let kr = row_of[self.rows[k]];
                if kr != usize::MAX {
                    entries.push((kr, kc, self.values[k]));
                }
            }
        }
        Sub { rows: r.len(), cols: c.len(), entries }
    }

    /// The column-compressed arrays: column starts, rows, values.
    pub fn parts(&self) -> (&[usize], &[usize], &[f64]) {
        (&self.col_ptr, &self.rows, &self.values)
    }
}

/// A rectangular piece of a [`Matrix`] as (row, column, value) entries, column by column.
#[derive(Clone, Debug)]
pub struct Sub {
    /// Rows.
    pub rows: usize,
    /// Columns.
    pub cols: usize,
    /// (row, column, value), column by column.
    pub entries: Vec<(usize, usize, f64)>,
}

impl Sub {
    /// A dense copy.
    pub fn dense(&self) -> Mat<f64> {
        let mut a = Mat::<f64>::zeros(self.rows, self.cols);
        for &(i, j, v) in &self.entries {
            a[(i, j)] = v;
        }
        a
    }

    /// The square piece as a [`Matrix`].
    pub fn square(self) -> Matrix {
        debug_assert_eq!(self.rows, self.cols);
        Matrix::from_stamps(self.rows, self.entries)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stamps_sum_and_read_back() {
        let m = Matrix::from_stamps(
            3,
            vec![(0, 0, 1.0), (2, 1, 4.0), (0, 0, 2.0), (1, 2, -1.0), (1, 1, 1.0), (1, 1, -1.0)],
        );
        assert_eq!(m.get(0, 0), 3.0);
        assert_eq!(m.get(2, 1), 4.0);
        assert_eq!(m.get(1, 2), -1.0);
        assert_eq!(m.get(1, 1), 0.0);
        assert_eq!(m.nonzeros(), 3, "an entry summing to zero is not stored");
        let d = m.dense();
        assert_eq!(Matrix::from_dense(&d), m);
        assert_eq!(m.touches(), vec![true, true, true]);
        let s = m.select(&[2, 0], &[1, 0]).dense();
        assert_eq!((s[(0, 0)], s[(1, 1)], s[(0, 1)]), (4.0, 3.0, 0.0));
    }
}
