//! The one matrix type the integrators see: assembled by stamping, factored, solved many times.
//!
//! Storage is sparse by rows (sorted column indices), so assembly, products and the term magnitudes of
//! the residual test cost O(nonzeros) at any size; the products of every step run on a packed copy
//! (`Packed`). Zeroing keeps the pattern, so once a Jacobian has been
//! stamped its pattern is fixed and re-stamping allocates nothing.
//!
//! Two factorizations sit behind `factor`, chosen by size:
//! - up to `DENSE_LIMIT` unknowns, a dense LU with partial pivoting that skips zero multipliers (fast for
//!   the small circuits most audits run, and with an exact singular-column report);
//! - above it, the sparse LU of `sparse_lu` (fill-reducing column order, threshold partial pivoting).
//!   The column order is computed once per pattern and shared by every clone of the matrix. A matrix
//!   learns its pivot sequence at its first sparse factorization and each later `factor` only
//!   refactors with it (no graph search, no pivot search), pivoting anew when a reused pivot is small.

use super::sparse_lu::{self, Csc, Factors, Failure, Structure};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex, OnceLock};

/// Matrices with more unknowns than this are factored by the sparse LU. Measured with `ringtrue
/// simulate --linear-solver dense|sparse` (trapezoidal, rtol 1e-4, median of 15 runs) on generated
/// RC ladders: at 6 unknowns dense took 96 us and sparse 108 us, at 10 they were equal (155 and 152
/// us), at 14 sparse was faster (195 against 218 us), and at 66 sparse took a third of dense's time.
pub const DENSE_LIMIT: usize = 12;

/// Which factorization `factor` uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Backend {
    /// Dense up to `DENSE_LIMIT` unknowns, sparse above.
    Auto,
    Dense,
    Sparse,
}

impl Backend {
    pub const ALL: [Backend; 3] = [Backend::Auto, Backend::Dense, Backend::Sparse];
    pub fn as_str(self) -> &'static str {
        match self {
            Backend::Auto => "auto",
            Backend::Dense => "dense",
            Backend::Sparse => "sparse",
        }
    }
}

#[derive(Debug, Clone, Default, PartialEq)]
struct Row {
    cols: Vec<usize>,
    vals: Vec<f64>,
}

/// A square matrix under assembly.
#[derive(Debug, Clone)]
pub struct Matrix {
    n: usize,
    rows: Vec<Row>,
    backend: Backend,
    /// The sparse symbolic analysis of the present pattern; reset when an entry is added to the pattern.
    plan: OnceLock<Arc<SparsePlan>>,
    /// The pivot sequence this matrix's last sparse factorization used (never shared between clones, so
    /// that each matrix's factors depend only on its own history).
    learned: Learned,
    /// The last pair of packed matrices `factor_combination` laid out in this pattern's compressed
    /// columns; reset with the plan.
    combination: Option<Arc<Combination>>,
}

/// Two packed matrices C and G scattered into a pattern's compressed columns, so that alpha C + G is one
/// pass over the pattern's entries.
#[derive(Debug)]
struct Combination {
    c_id: u64,
    g_id: u64,
    c: Vec<f64>,
    g: Vec<f64>,
}

/// The pivot sequence of a matrix's last sparse factorization; a clone starts without one.
#[derive(Debug, Default)]
struct Learned(Mutex<Option<Arc<Structure>>>);

impl Clone for Learned {
    fn clone(&self) -> Self {
        Learned::default()
    }
}

impl PartialEq for Matrix {
    fn eq(&self, other: &Self) -> bool {
        self.n == other.n && self.rows == other.rows
    }
}

/// A finished matrix's entries packed row after row in three flat arrays, for the products that run
/// every step: a large circuit's rows, each in its own allocation, scatter over memory, and the
/// products then wait on cache misses.
#[derive(Debug, Clone)]
pub struct Packed {
    row_ptr: Vec<usize>,
    cols: Vec<usize>,
    vals: Vec<f64>,
    /// Unique to each packing (a clone keeps it, as it keeps the entries), so that a matrix can tell a
    /// packed matrix it has already laid out (`Matrix::factor_combination`).
    id: u64,
    /// The diagonal, when no entry lies off it (a circuit's C when every capacitor is grounded and no
    /// inductors are coupled): its products are then one vectorised pass.
    diagonal: Option<Vec<f64>>,
}

impl PartialEq for Packed {
    fn eq(&self, other: &Self) -> bool {
        self.row_ptr == other.row_ptr && self.cols == other.cols && self.vals == other.vals
    }
}

/// The source of `Packed::id`.
static NEXT_PACKED_ID: AtomicU64 = AtomicU64::new(0);

impl Packed {
    /// Adds `self * x` to `y`. (A diagonal matrix multiplies its empty rows' zeros too, which differs
    /// only where x is not finite; `0.0 +` keeps the row sums' signed zeros.)
    pub fn mul_vec_add(&self, x: &[f64], y: &mut [f64]) {
        if let Some(d) = &self.diagonal {
            for ((yr, d), x) in y.iter_mut().zip(d).zip(x) {
                *yr += 0.0 + d * x;
            }
            return;
        }
        for (w, yr) in self.row_ptr.windows(2).zip(y.iter_mut()) {
            let mut s = 0.0;
            for (&c, &a) in self.cols[w[0]..w[1]].iter().zip(&self.vals[w[0]..w[1]]) {
                s += a * x[c];
            }
            *yr += s;
        }
    }

    /// The stored entries as (row, column, value), row after row.
    fn entries(&self) -> impl Iterator<Item = (usize, usize, f64)> + '_ {
        self.row_ptr.windows(2).enumerate().flat_map(move |(r, w)| {
            self.cols[w[0]..w[1]]
                .iter()
                .zip(&self.vals[w[0]..w[1]])
                .map(move |(&c, &v)| (r, c, v))
        })
    }

    /// Adds |self_rj x_j| * factor over each row to `out` (the magnitudes of the terms of `self * x`).
    pub fn abs_terms_add(&self, x: &[f64], factor: f64, out: &mut [f64]) {
        for (w, o) in self.row_ptr.windows(2).zip(out.iter_mut()) {
            let mut s = 0.0;
            for (&c, &a) in self.cols[w[0]..w[1]].iter().zip(&self.vals[w[0]..w[1]]) {
                s += (a * x[c]).abs();
            }
            *o += factor.abs() * s;
        }
    }
}

/// A factorization that found no usable pivot in `column`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Singular {
    pub column: usize,
}

/// The compressed-column pattern of a matrix and its symbolic LU.
#[derive(Debug)]
struct SparsePlan {
    col_ptr: Vec<usize>,
    row_idx: Vec<usize>,
    /// For row r's j-th stored entry, its place in the compressed-column values: `to_csc[row_start[r] + j]`.
    row_start: Vec<usize>,
    to_csc: Vec<usize>,
    /// The fill-reducing column order (the natural order when the ordering failed).
    order: Vec<usize>,
}

impl Matrix {
    pub fn new(n: usize) -> Self {
        Matrix {
            n,
            rows: vec![Row::default(); n],
            backend: Backend::Auto,
            plan: OnceLock::new(),
            learned: Learned::default(),
            combination: None,
        }
    }

    /// An n x n matrix whose pattern already holds the whole diagonal (as zeros).
    pub fn with_diagonal(n: usize) -> Self {
        let mut m = Matrix::new(n);
        for (r, row) in m.rows.iter_mut().enumerate() {
            row.cols.push(r);
            row.vals.push(0.0);
        }
        m
    }

    /// Chooses the factorization (tests compare the two; `Auto` is the default).
    pub fn set_backend(&mut self, backend: Backend) {
        self.backend = backend;
    }

    pub fn backend(&self) -> Backend {
        self.backend
    }

    /// True when `factor` will use the sparse LU.
    pub fn uses_sparse(&self) -> bool {
        match self.backend {
            Backend::Auto => self.n > DENSE_LIMIT,
            Backend::Dense => false,
            Backend::Sparse => true,
        }
    }

    pub fn size(&self) -> usize {
        self.n
    }

    /// Stored entries (explicit zeros included).
    pub fn stored(&self) -> usize {
        self.rows.iter().map(|r| r.cols.len()).sum()
    }

    /// Sets every value to zero and keeps the pattern.
    pub fn zero(&mut self) {
        for r in &mut self.rows {
            r.vals.fill(0.0);
        }
    }

    #[inline]
    pub fn add(&mut self, row: usize, col: usize, v: f64) {
        let r = &mut self.rows[row];
        match r.cols.binary_search(&col) {
            Ok(j) => r.vals[j] += v,
            Err(j) => {
                r.cols.insert(j, col);
                r.vals.insert(j, v);
                self.plan = OnceLock::new();
                self.learned = Learned::default();
                self.combination = None;
            }
        }
    }

    #[inline]
    pub fn get(&self, row: usize, col: usize) -> f64 {
        let r = &self.rows[row];
        r.cols.binary_search(&col).map_or(0.0, |j| r.vals[j])
    }

    /// The stored entries of row `r` as (column, value), in column order.
    pub fn row(&self, r: usize) -> impl Iterator<Item = (usize, f64)> + '_ {
        let row = &self.rows[r];
        row.cols.iter().copied().zip(row.vals.iter().copied())
    }

    /// `self = alpha * c + g`, keeping this matrix's pattern and adding theirs.
    pub fn set_combination(&mut self, alpha: f64, c: &Matrix, g: &Matrix) {
        self.zero();
        for r in 0..self.n.min(c.n) {
            self.add_row_scaled(r, &c.rows[r], alpha);
        }
        for r in 0..self.n.min(g.n) {
            self.add_row_scaled(r, &g.rows[r], 1.0);
        }
    }

    /// Adds `factor * other` to row `r`, walking the two sorted column lists together (the same sums,
    /// in the same order, as `add` entry by entry, without a search per entry).
    fn add_row_scaled(&mut self, r: usize, other: &Row, factor: f64) {
        let mut p = 0;
        for (&col, &v) in other.cols.iter().zip(&other.vals) {
            let cols = &self.rows[r].cols;
            while p < cols.len() && cols[p] < col {
                p += 1;
            }
            if p < cols.len() && cols[p] == col {
                self.rows[r].vals[p] += factor * v;
            } else {
                self.add(r, col, factor * v);
            }
        }
    }

    /// `y = self * x` (through a packed copy; the per-step products keep theirs, see `Packed`).
    pub fn mul_vec(&self, x: &[f64], y: &mut [f64]) {
        y.fill(0.0);
        self.packed().mul_vec_add(x, y);
    }

    /// The entries as they stand, packed for fast products.
    pub fn packed(&self) -> Packed {
        let mut row_ptr = Vec::with_capacity(self.n + 1);
        row_ptr.push(0);
        let mut cols = Vec::with_capacity(self.stored());
        let mut vals = Vec::with_capacity(self.stored());
        for row in &self.rows {
            cols.extend_from_slice(&row.cols);
            vals.extend_from_slice(&row.vals);
            row_ptr.push(cols.len());
        }
        let on_diagonal = self
            .rows
            .iter()
            .enumerate()
            .all(|(r, row)| row.cols.iter().all(|&c| c == r));
        let diagonal = on_diagonal.then(|| (0..self.n).map(|r| self.get(r, r)).collect());
        Packed {
            row_ptr,
            cols,
            vals,
            id: NEXT_PACKED_ID.fetch_add(1, Ordering::Relaxed),
            diagonal,
        }
    }

    /// True when row `r` has any nonzero entry.
    pub fn row_is_nonzero(&self, r: usize) -> bool {
        self.rows[r].vals.iter().any(|&v| v != 0.0)
    }

    /// The matrix as a dense column-major array (for the small dense computations of the references).
    pub fn to_dense(&self) -> nalgebra::DMatrix<f64> {
        let mut d = nalgebra::DMatrix::zeros(self.n, self.n);
        for r in 0..self.n {
            for (c, v) in self.row(r) {
                d[(r, c)] = v;
            }
        }
        d
    }

    /// Computes the sparse symbolic analysis now, so that clones share it.
    pub fn prepare(&self) {
        if self.uses_sparse() {
            self.plan();
        }
    }

    fn plan(&self) -> &Arc<SparsePlan> {
        self.plan.get_or_init(|| Arc::new(SparsePlan::new(self)))
    }

    /// LU factorization. A matrix singular in some unknown reports that unknown's column.
    pub fn factor(&self) -> Result<Lu, Singular> {
        self.factor_reusing(None)
    }

    /// `factor`, reusing the storage of `spare`, a factorization no longer needed (the result is the
    /// same as `factor`'s).
    pub fn factor_reusing(&self, spare: Option<Lu>) -> Result<Lu, Singular> {
        if self.uses_sparse() {
            self.factor_sparse(Lu::sparse_storage(spare))
                .map(|s| Lu::Sparse(Box::new(s)))
        } else {
            self.factor_dense().map(Lu::Dense)
        }
    }

    /// Dense LU with partial pivoting. A pivot below a few rounding errors of its column's largest entry
    /// counts as zero: the matrix is singular in that column's unknown.
    fn factor_dense(&self) -> Result<DenseLu, Singular> {
        let n = self.n;
        let mut lu = vec![0.0; n * n];
        for (r, row) in self.rows.iter().enumerate() {
            for (&c, &v) in row.cols.iter().zip(&row.vals) {
                lu[r * n + c] = v;
            }
        }
        let mut perm: Vec<usize> = (0..n).collect();
        let mut col_max = vec![0.0f64; n];
        for r in 0..n {
            for (c, m) in col_max.iter_mut().enumerate() {
                *m = m.max(lu[r * n + c].abs());
            }
        }
        // last nonzero column of each row, to bound the update loops
        let mut row_end: Vec<usize> = (0..n)
            .map(|r| {
                (0..n)
                    .rev()
                    .find(|&c| lu[r * n + c] != 0.0)
                    .map_or(0, |c| c + 1)
            })
            .collect();
        for k in 0..n {
            let mut p = k;
            let mut best = lu[k * n + k].abs();
            for i in k + 1..n {
                let v = lu[i * n + k].abs();
                if v > best {
                    best = v;
                    p = i;
                }
            }
            let tiny = col_max[k] * (n as f64) * 4.0 * f64::EPSILON;
            if best == 0.0 || best <= tiny || !best.is_finite() {
                return Err(Singular { column: k });
            }
            if p != k {
                for c in 0..n {
                    lu.swap(k * n + c, p * n + c);
                }
                perm.swap(k, p);
                row_end.swap(k, p);
            }
            let pivot = lu[k * n + k];
            let end_k = row_end[k];
            for i in k + 1..n {
                let lik = lu[i * n + k];
                if lik == 0.0 {
                    continue;
                }
                let l = lik / pivot;
                lu[i * n + k] = l;
                let (top, bottom) = lu.split_at_mut(i * n);
                let rk = &top[k * n..k * n + end_k];
                let ri = &mut bottom[..end_k];
                for j in k + 1..end_k {
                    ri[j] -= l * rk[j];
                }
                row_end[i] = row_end[i].max(end_k);
            }
        }
        Ok(DenseLu { n, lu, perm })
    }

    fn factor_sparse(&self, spare: Option<Factors>) -> Result<Factors, Singular> {
        let plan = Arc::clone(self.plan());
        let mut values = vec![0.0; plan.row_idx.len()];
        for (r, row) in self.rows.iter().enumerate() {
            let start = plan.row_start[r];
            for (j, &v) in row.vals.iter().enumerate() {
                values[plan.to_csc[start + j]] = v;
            }
        }
        self.factor_sparse_values(&plan, &values, spare)
    }

    /// The sparse LU of this pattern with `values` in its compressed columns.
    fn factor_sparse_values(
        &self,
        plan: &SparsePlan,
        values: &[f64],
        spare: Option<Factors>,
    ) -> Result<Factors, Singular> {
        let a = Csc {
            n: self.n,
            col_ptr: &plan.col_ptr,
            row_idx: &plan.row_idx,
            values,
        };
        let mut learned = self.learned.0.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(structure) = learned.as_ref() {
            if let Ok(f) = sparse_lu::refactor_reusing(&a, structure, spare) {
                return Ok(f);
            }
        }
        match sparse_lu::factor_pivoting(&a, &plan.order) {
            Ok(f) => {
                *learned = Some(Arc::clone(&f.structure));
                Ok(f)
            }
            Err(Failure::Singular { column }) => Err(Singular { column }),
            Err(Failure::PivotTooSmall) => Err(Singular { column: 0 }),
        }
    }

    /// Factors `alpha c + g` without assembling it into this matrix, whose pattern must hold theirs (as a
    /// constant step matrix's does): the sparse LU reads the sum straight into its compressed columns, C
    /// and G having been laid out there once (the same sums, (0 + alpha c) + g, as `set_combination`,
    /// signed zeros included: an entry C lacks gives (0 + alpha 0) + g = g for a finite alpha). The
    /// dense LU, a non-finite alpha and a pattern that lacks an entry of theirs assemble this matrix
    /// first. `spare` is as for `factor_reusing`.
    pub fn factor_combination(
        &mut self,
        alpha: f64,
        c: &Packed,
        g: &Packed,
        spare: Option<Lu>,
    ) -> Result<Lu, Singular> {
        if self.uses_sparse() && alpha.is_finite() {
            let plan = Arc::clone(self.plan());
            let known = self
                .combination
                .as_ref()
                .is_some_and(|m| m.c_id == c.id && m.g_id == g.id);
            if !known {
                self.combination = self.lay_out(&plan, c, g).map(Arc::new);
            }
            if let Some(m) = &self.combination {
                let values: Vec<f64> =
                    m.c.iter()
                        .zip(&m.g)
                        .map(|(c, g)| (0.0 + alpha * c) + g)
                        .collect();
                return self
                    .factor_sparse_values(&plan, &values, Lu::sparse_storage(spare))
                    .map(|f| Lu::Sparse(Box::new(f)));
            }
        }
        // Entries outside this matrix (C and G of another size) are left out, as `set_combination`
        // leaves out their rows.
        let n = self.n;
        self.zero();
        for (r, col, v) in c.entries().filter(|&(r, col, _)| r < n && col < n) {
            self.add(r, col, alpha * v);
        }
        for (r, col, v) in g.entries().filter(|&(r, col, _)| r < n && col < n) {
            self.add(r, col, v);
        }
        self.factor_reusing(spare)
    }

    /// C and G scattered into `plan`'s compressed columns; None when this pattern lacks one of their
    /// entries (a row of a packed matrix holds each column once).
    fn lay_out(&self, plan: &SparsePlan, c: &Packed, g: &Packed) -> Option<Combination> {
        let scatter = |m: &Packed| -> Option<Vec<f64>> {
            let mut out = vec![0.0; plan.row_idx.len()];
            for (r, col, v) in m.entries() {
                let j = self.rows.get(r)?.cols.binary_search(&col).ok()?;
                out[plan.to_csc[plan.row_start[r] + j]] = v;
            }
            Some(out)
        };
        Some(Combination {
            c_id: c.id,
            g_id: g.id,
            c: scatter(c)?,
            g: scatter(g)?,
        })
    }
}

impl SparsePlan {
    fn new(m: &Matrix) -> SparsePlan {
        let n = m.n;
        let mut counts = vec![0usize; n];
        for row in &m.rows {
            for &c in &row.cols {
                counts[c] += 1;
            }
        }
        let mut col_ptr = vec![0usize; n + 1];
        for c in 0..n {
            col_ptr[c + 1] = col_ptr[c] + counts[c];
        }
        let nnz = col_ptr[n];
        let mut next = col_ptr[..n].to_vec();
        let mut row_idx = vec![0usize; nnz];
        let mut row_start = Vec::with_capacity(n);
        let mut to_csc = Vec::with_capacity(nnz);
        // Rows in increasing order: each column's row indices come out sorted.
        for (r, row) in m.rows.iter().enumerate() {
            row_start.push(to_csc.len());
            for &c in &row.cols {
                let p = next[c];
                next[c] += 1;
                row_idx[p] = r;
                to_csc.push(p);
            }
        }
        let order =
            sparse_lu::column_order(n, &col_ptr, &row_idx).unwrap_or_else(|| (0..n).collect());
        SparsePlan {
            col_ptr,
            row_idx,
            row_start,
            to_csc,
            order,
        }
    }
}

/// A factored matrix.
#[derive(Debug, Clone)]
pub enum Lu {
    Dense(DenseLu),
    Sparse(Box<Factors>),
}

impl Lu {
    /// Floating-point operations of one refactorization of this pattern and of one solve, for the step
    /// controller's cost model (deterministic, unlike a timing). None for the dense LU: small circuits
    /// spend their steps on fixed costs, and a dense count (n^3 for a banded pattern whose zeros the LU
    /// skips) would only mislead, so the step sequence does not depend on the choice of LU there.
    pub fn flops(&self) -> Option<(f64, f64)> {
        match self {
            Lu::Dense(_) => None,
            Lu::Sparse(s) => Some(s.flops()),
        }
    }

    /// Solves `A x = b`, overwriting `b` with `x`.
    pub fn solve(&self, b: &mut [f64]) {
        match self {
            Lu::Dense(d) => d.solve(b),
            Lu::Sparse(s) => s.solve(b),
        }
    }

    /// The sparse factors of a spare factorization, whose storage a new sparse one may reuse.
    fn sparse_storage(spare: Option<Lu>) -> Option<Factors> {
        match spare {
            Some(Lu::Sparse(f)) => Some(*f),
            _ => None,
        }
    }

    /// `solve`, with `scratch` as the sparse LU's working vector (see `Factors::solve_with`).
    pub fn solve_with(&self, b: &mut [f64], scratch: &mut Vec<f64>) {
        match self {
            Lu::Dense(d) => d.solve(b),
            Lu::Sparse(s) => s.solve_with(b, scratch),
        }
    }
}

#[derive(Debug, Clone)]
pub struct DenseLu {
    n: usize,
    lu: Vec<f64>,
    perm: Vec<usize>,
}

impl DenseLu {
    fn solve(&self, b: &mut [f64]) {
        let n = self.n;
        let mut y: Vec<f64> = self.perm.iter().map(|&p| b[p]).collect();
        for i in 0..n {
            let row = &self.lu[i * n..i * n + i];
            let mut s = y[i];
            for (j, &l) in row.iter().enumerate() {
                if l != 0.0 {
                    s -= l * y[j];
                }
            }
            y[i] = s;
        }
        for i in (0..n).rev() {
            let row = &self.lu[i * n..(i + 1) * n];
            let mut s = y[i];
            for j in i + 1..n {
                let u = row[j];
                if u != 0.0 {
                    s -= u * y[j];
                }
            }
            y[i] = s / row[i];
        }
        b.copy_from_slice(&y);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pivoting_matrix(backend: Backend) -> Matrix {
        // Needs a row swap: zero on the first diagonal entry.
        let mut m = Matrix::new(3);
        m.set_backend(backend);
        let rows = [[0.0, 2.0, 1.0], [1.0, 1.0, 0.0], [3.0, 0.0, 4.0]];
        for (r, row) in rows.iter().enumerate() {
            for (c, &v) in row.iter().enumerate() {
                if v != 0.0 {
                    m.add(r, c, v);
                }
            }
        }
        m
    }

    #[test]
    fn solves_a_pivoting_system_on_both_backends() {
        for backend in [Backend::Dense, Backend::Sparse] {
            let m = pivoting_matrix(backend);
            let x = [1.0, -2.0, 0.5];
            let mut b = [0.0; 3];
            m.mul_vec(&x, &mut b);
            m.factor().unwrap().solve(&mut b);
            for (a, e) in b.iter().zip(x) {
                assert!((a - e).abs() < 1e-14, "{backend:?}: {a} vs {e}");
            }
        }
    }

    /// The diagonal fast path of the packed product gives the row sums of the general one, empty rows
    /// included, and a single off-diagonal entry takes the general path.
    #[test]
    fn packed_products_of_diagonal_and_general_matrices() {
        let mut m = Matrix::new(3);
        m.add(0, 0, 2.0);
        m.add(2, 2, -3.0);
        let x = [1.5, 7.0, 0.25];
        let mut y = [1.0; 3];
        m.packed().mul_vec_add(&x, &mut y);
        assert!(m.packed().diagonal.is_some());
        assert_eq!(y, [1.0 + 3.0, 1.0, 1.0 - 0.75]);
        m.add(1, 0, 4.0);
        assert!(m.packed().diagonal.is_none());
        let mut y = [0.0; 3];
        m.mul_vec(&x, &mut y);
        assert_eq!(y, [3.0, 6.0, -0.75]);
    }

    #[test]
    fn reports_the_singular_column() {
        let mut m = Matrix::new(2);
        m.add(0, 0, 1.0);
        m.add(0, 1, 1.0);
        m.add(1, 0, 2.0);
        m.add(1, 1, 2.0);
        assert_eq!(m.factor().unwrap_err(), Singular { column: 1 });
        m.set_backend(Backend::Sparse);
        assert!(m.factor().is_err());
    }

    #[test]
    fn zero_keeps_the_pattern_and_the_symbolic_analysis() {
        let mut m = pivoting_matrix(Backend::Sparse);
        m.prepare();
        let before = Arc::clone(m.plan());
        m.zero();
        m.add(0, 1, 2.0);
        assert!(Arc::ptr_eq(m.plan(), &before));
        m.add(0, 0, 1.0); // a new entry: a new pattern
        assert!(!Arc::ptr_eq(m.plan(), &before));
    }
}
