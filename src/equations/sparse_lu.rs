//! A sparse LU that learns its pivot sequence once and then only refactors.
//!
//! A transient run factors matrices with one fixed pattern hundreds of times, and their values change
//! smoothly (a step coefficient, a diode's conductance). So the first factorization of a pattern is a
//! left-looking LU with threshold partial pivoting (Gilbert and Peierls, "Sparse partial pivoting in
//! time proportional to arithmetic operations", SIAM J. Sci. Stat. Comput. 9, 1988; as laid out in
//! T. A. Davis, "Direct Methods for Sparse Linear Systems", SIAM 2006, ch. 6), with the column order
//! from an approximate minimum degree ordering of A + A^T and a preference for the diagonal pivot. Its
//! pivot sequence and the patterns of L and U are kept; later factorizations reuse them with no graph
//! search and no pivot search, and fall back to a new pivoting factorization when a reused pivot has
//! become small against its column (threshold below). Keeping a pivot order while the values change is
//! common practice for circuit matrices.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::sparse::linalg::amd;
use faer::sparse::SymbolicSparseColMatRef;

const NONE: usize = usize::MAX;

/// The most unknowns the factors can number (rows are stored as `u32`).
pub const MAX_UNKNOWNS: usize = u32::MAX as usize;
const _: () = assert!(crate::circuit::MAX_ELEMENTS * 5 <= MAX_UNKNOWNS);

/// A diagonal pivot is taken while it is at least this fraction u of its column's largest candidate.
/// Threshold pivoting bounds the growth of an entry per elimination step by 1 + 1/u (Duff, Erisman and
/// Reid, "Direct Methods for Sparse Matrices", ch. 5; u = 0.1 is their usual choice, from memory): 11
/// here, against 1001 at u = 0.001, which on random unsymmetric test matrices lost four digits of
/// backward error.
const DIAGONAL_PREFERENCE: f64 = 0.1;

/// A reused pivot below this fraction of its column's largest candidate forces a new pivoting
/// factorization: the same rule a fresh diagonal pivot must pass.
const REUSE_THRESHOLD: f64 = DIAGONAL_PREFERENCE;

/// A matrix in compressed columns (sorted row indices), borrowed.
#[derive(Clone, Copy)]
pub struct Csc<'a> {
    pub n: usize,
    pub col_ptr: &'a [usize],
    pub row_idx: &'a [usize],
    pub values: &'a [f64],
}

impl Csc<'_> {
    fn col(&self, c: usize) -> impl Iterator<Item = (usize, f64)> + '_ {
        let r = self.col_ptr[c]..self.col_ptr[c + 1];
        self.row_idx[r.clone()]
            .iter()
            .copied()
            .zip(self.values[r].iter().copied())
    }
}

/// The approximate minimum degree order of the pattern of A + A^T (faer's AMD); `None` if it fails.
pub fn column_order(n: usize, col_ptr: &[usize], row_idx: &[usize]) -> Option<Vec<usize>> {
    let pattern = SymbolicSparseColMatRef::new_checked(n, n, col_ptr, None, row_idx);
    let mut perm = vec![0usize; n];
    let mut perm_inv = vec![0usize; n];
    let mut buf = MemBuffer::try_new(amd::order_scratch::<usize>(n, row_idx.len())).ok()?;
    amd::order(
        &mut perm,
        &mut perm_inv,
        pattern,
        amd::Control::default(),
        MemStack::new(&mut buf),
    )
    .ok()?;
    Some(perm)
}

/// The pivot sequence and the patterns of L and U, in pivot order: step k factors column `q[k]` and
/// takes its pivot from row `p[k]` (`pinv` is the inverse). L is unit lower triangular (diagonal not
/// stored); the entries of L below and of U above the diagonal are stored by column in increasing row
/// order. Row numbers are kept in 32 bits: after the values they are the factors' largest arrays, and
/// the solve streams both (on a 317 x 317 mesh, 6 million entries, 12 instead of 16 bytes per entry
/// made the solve 6.9 -> 4.6 ms). A circuit has at most `MAX_UNKNOWNS` unknowns (`circuit::MAX_ELEMENTS`
/// keeps it there).
#[derive(Debug)]
pub struct Structure {
    n: usize,
    q: Vec<usize>,
    pinv: Vec<usize>,
    l_ptr: Vec<usize>,
    l_idx: Vec<u32>,
    u_ptr: Vec<usize>,
    u_idx: Vec<u32>,
    /// Floating-point operations of one refactorization (multiply-adds count two).
    refactor_flops: f64,
}

/// The numeric factors over a shared `Structure`.
#[derive(Debug, Clone)]
pub struct Factors {
    pub structure: std::sync::Arc<Structure>,
    l_val: Vec<f64>,
    /// U's entries above the diagonal, each divided by its row's pivot (U = D V, V unit upper
    /// triangular; only the solve reads them).
    u_val: Vec<f64>,
    /// Reciprocals of U's diagonal: back substitution multiplies, since a division's latency would
    /// chain from one unknown to the next (on a ladder it was half the solve's time).
    u_inv: Vec<f64>,
}

/// Why a factorization stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Failure {
    /// No usable pivot for this column (an unknown of the circuit).
    Singular { column: usize },
    /// A reused pivot became too small: factor again with pivoting.
    PivotTooSmall,
}

/// Row numbers in 32 bits; an unknown past `MAX_UNKNOWNS` (which circuit checking rules out) is
/// reported as a singular column rather than truncated.
fn rows_u32(rows: &[usize]) -> Result<Vec<u32>, Failure> {
    rows.iter()
        .map(|&i| u32::try_from(i).map_err(|_| Failure::Singular { column: i }))
        .collect()
}

/// The largest magnitude in column `c` of A (the scale for "a pivot of zero").
fn column_scale(a: &Csc<'_>, c: usize) -> f64 {
    a.col(c).fold(0.0f64, |m, (_, v)| m.max(v.abs()))
}

fn too_small(pivot: f64, scale: f64, n: usize) -> bool {
    let tiny = scale * (n as f64) * 4.0 * f64::EPSILON;
    !pivot.is_finite() || pivot == 0.0 || pivot.abs() <= tiny
}

/// A new factorization with threshold partial pivoting, in the column order `q`.
pub fn factor_pivoting(a: &Csc<'_>, q: &[usize]) -> Result<Factors, Failure> {
    let n = a.n;
    let mut pinv = vec![NONE; n];
    let mut x = vec![0.0; n];
    let mut mark = vec![NONE; n]; // mark[i] == k: row i is in the reach of step k
    let mut reach = vec![0usize; n];
    let mut stack: Vec<(usize, usize)> = Vec::new();
    // L with original row indices while factoring (the pivot row first, value 1).
    let (mut l_ptr, mut l_idx, mut l_val) = (vec![0usize], Vec::new(), Vec::new());
    let (mut u_ptr, mut u_idx, mut u_val) = (vec![0usize], Vec::new(), Vec::new());
    let mut u_inv = vec![0.0; n];
    let mut u_col: Vec<(usize, f64)> = Vec::new();
    for (k, &col) in q.iter().enumerate() {
        // The rows reached from A(:, col) through the columns of L done so far, in topological order.
        let mut top = n;
        for (i0, _) in a.col(col) {
            if mark[i0] == k {
                continue;
            }
            mark[i0] = k;
            stack.push((i0, 0));
            while let Some(&mut (j, ref mut pos)) = stack.last_mut() {
                let jj = pinv[j];
                let (start, end) = if jj == NONE {
                    (0, 0)
                } else {
                    (l_ptr[jj] + 1, l_ptr[jj + 1])
                };
                let below = &l_idx[start..end];
                let mut child = None;
                let mut p = *pos;
                while p < below.len() {
                    let i = below[p];
                    p += 1;
                    if mark[i] != k {
                        child = Some(i);
                        break;
                    }
                }
                *pos = p;
                match child {
                    Some(i) => {
                        mark[i] = k;
                        stack.push((i, 0));
                    }
                    None => {
                        stack.pop();
                        top -= 1;
                        reach[top] = j;
                    }
                }
            }
        }
        // x = L \ A(:, col) on the reach.
        for (i, v) in a.col(col) {
            x[i] = v;
        }
        for &j in &reach[top..] {
            let jj = pinv[j];
            if jj == NONE {
                continue;
            }
            let xj = x[j];
            let lr = l_ptr[jj] + 1..l_ptr[jj + 1];
            for (&i, &l) in l_idx[lr.clone()].iter().zip(&l_val[lr]) {
                x[i] -= l * xj;
            }
        }
        // The pivot: the largest candidate, or the diagonal when it is large enough.
        let mut ipiv = NONE;
        let mut best = -1.0f64;
        u_col.clear();
        for &i in &reach[top..] {
            if pinv[i] == NONE {
                if x[i].abs() > best {
                    best = x[i].abs();
                    ipiv = i;
                }
            } else {
                u_col.push((pinv[i], x[i]));
            }
        }
        if pinv[col] == NONE && mark[col] == k && x[col].abs() >= DIAGONAL_PREFERENCE * best {
            ipiv = col;
        }
        if ipiv == NONE || too_small(x[ipiv], column_scale(a, col), n) {
            return Err(Failure::Singular { column: col });
        }
        let pivot = x[ipiv];
        u_inv[k] = 1.0 / pivot;
        pinv[ipiv] = k;
        u_col.sort_unstable_by_key(|e| e.0);
        for &(r, v) in &u_col {
            u_idx.push(r);
            u_val.push(v * u_inv[r]);
        }
        u_ptr.push(u_idx.len());
        l_idx.push(ipiv);
        l_val.push(1.0);
        for &i in &reach[top..] {
            if pinv[i] == NONE {
                l_idx.push(i);
                l_val.push(x[i] / pivot);
            }
            x[i] = 0.0;
        }
        l_ptr.push(l_idx.len());
    }
    // Drop L's unit diagonal and renumber its rows in pivot order.
    let mut s_ptr = Vec::with_capacity(n + 1);
    let mut s_idx = Vec::with_capacity(l_idx.len() - n);
    let mut s_val = Vec::with_capacity(l_idx.len() - n);
    s_ptr.push(0);
    // Each column's rows in increasing order, so that a column that updates the next unknown holds it
    // first (see `solve_with`). The entries of a column update distinct rows, so their order does not
    // change any sum.
    let mut column: Vec<(usize, f64)> = Vec::new();
    for k in 0..n {
        column.clear();
        column.extend((l_ptr[k] + 1..l_ptr[k + 1]).map(|p| (pinv[l_idx[p]], l_val[p])));
        column.sort_unstable_by_key(|e| e.0);
        for &(i, v) in &column {
            s_idx.push(i);
            s_val.push(v);
        }
        s_ptr.push(s_idx.len());
    }
    let mut refactor_flops = 0.0;
    for k in 0..n {
        for &j in &u_idx[u_ptr[k]..u_ptr[k + 1]] {
            refactor_flops += 2.0 * (s_ptr[j + 1] - s_ptr[j]) as f64;
        }
        refactor_flops += (s_ptr[k + 1] - s_ptr[k]) as f64;
    }
    let structure = Structure {
        n,
        q: q.to_vec(),
        pinv,
        l_ptr: s_ptr,
        l_idx: rows_u32(&s_idx)?,
        u_ptr,
        u_idx: rows_u32(&u_idx)?,
        refactor_flops,
    };
    Ok(Factors {
        structure: std::sync::Arc::new(structure),
        l_val: s_val,
        u_val,
        u_inv,
    })
}

/// A factorization that reuses `structure`'s pivots and patterns (the matrix must have the pattern the
/// structure was learned on).
pub fn refactor(a: &Csc<'_>, structure: &std::sync::Arc<Structure>) -> Result<Factors, Failure> {
    refactor_reusing(a, structure, None)
}

/// `refactor`, writing into the value arrays of `spare` (factors no longer needed) where given: a large
/// circuit's L and U are megabytes, and fresh arrays cost their page faults at every factorization.
/// Every value is overwritten, so the result does not depend on what `spare` held.
pub fn refactor_reusing(
    a: &Csc<'_>,
    structure: &std::sync::Arc<Structure>,
    spare: Option<Factors>,
) -> Result<Factors, Failure> {
    let s = structure;
    let n = s.n;
    let mut x = vec![0.0; n];
    let (mut l_val, mut u_val, mut u_inv) = match spare {
        Some(f) => (f.l_val, f.u_val, f.u_inv),
        None => (Vec::new(), Vec::new(), Vec::new()),
    };
    l_val.resize(s.l_idx.len(), 0.0);
    u_val.resize(s.u_idx.len(), 0.0);
    u_inv.resize(n, 0.0);
    for (k, &col) in s.q.iter().enumerate() {
        let mut scale = 0.0f64;
        for (i, v) in a.col(col) {
            x[s.pinv[i]] = v;
            scale = scale.max(v.abs());
        }
        let ur = s.u_ptr[k]..s.u_ptr[k + 1];
        for (&j, u) in s.u_idx[ur.clone()].iter().zip(&mut u_val[ur]) {
            let j = j as usize;
            let xj = x[j];
            x[j] = 0.0;
            *u = xj * u_inv[j];
            if xj != 0.0 {
                let lr = s.l_ptr[j]..s.l_ptr[j + 1];
                for (&i, &l) in s.l_idx[lr.clone()].iter().zip(&l_val[lr]) {
                    x[i as usize] -= l * xj;
                }
            }
        }
        let pivot = x[k];
        x[k] = 0.0;
        let lr = s.l_ptr[k]..s.l_ptr[k + 1];
        let largest = s.l_idx[lr.clone()]
            .iter()
            .fold(pivot.abs(), |m, &r| m.max(x[r as usize].abs()));
        if too_small(pivot, scale, n) {
            // Singular with this pivot order; a pivoting factorization decides.
            return Err(Failure::PivotTooSmall);
        }
        if pivot.abs() < REUSE_THRESHOLD * largest || !largest.is_finite() {
            return Err(Failure::PivotTooSmall);
        }
        u_inv[k] = 1.0 / pivot;
        let inv = 1.0 / pivot;
        for p in lr {
            let r = s.l_idx[p] as usize;
            l_val[p] = x[r] * inv;
            x[r] = 0.0;
        }
    }
    Ok(Factors {
        structure: std::sync::Arc::clone(structure),
        l_val,
        u_val,
        u_inv,
    })
}

impl Factors {
    /// Solves `A x = b`, overwriting `b` with `x`.
    pub fn solve(&self, b: &mut [f64]) {
        self.solve_with(b, &mut Vec::new());
    }

    /// `solve`, working in `y` (resized; what it held does not matter, since every entry is written
    /// before it is read), so that a caller solving every step allocates nothing.
    pub fn solve_with(&self, b: &mut [f64], y: &mut Vec<f64>) {
        let s = &*self.structure;
        let n = s.n;
        if n == 0 {
            return;
        }
        y.resize(n, 0.0);
        for (&p, &bi) in s.pinv.iter().zip(b.iter()) {
            y[p] = bi;
        }
        // A chain of eliminations (each column updating the next, as along a ladder or a line) makes
        // both substitutions one long dependency chain. The update of the next unknown is the last one
        // it receives, so it is applied in a register and carried to the next column instead of going
        // through memory: the same operations in the same order, without a store and reload on the
        // chain. Rows are sorted within each column of L and U, so the next unknown is the first entry
        // of L's column and the last of U's.
        let mut yj = y[0];
        for j in 0..n {
            y[j] = yj;
            let (mut lo, hi) = (s.l_ptr[j], s.l_ptr[j + 1]);
            let mut next = None;
            if yj != 0.0 {
                if lo < hi && s.l_idx[lo] as usize == j + 1 {
                    next = Some(self.l_val[lo]);
                    lo += 1;
                }
                for (&i, &l) in s.l_idx[lo..hi].iter().zip(&self.l_val[lo..hi]) {
                    y[i as usize] -= l * yj;
                }
            }
            if j + 1 < n {
                yj = match next {
                    Some(l) => y[j + 1] - l * yj,
                    None => y[j + 1],
                };
            }
        }
        // U = D V with V unit upper triangular (U's entries are kept divided by their row's pivot), so
        // back substitution divides by the pivots in one pass off the chain and the chain itself is a
        // multiply and a subtract per unknown.
        for (v, d) in y.iter_mut().zip(&self.u_inv) {
            *v *= d;
        }
        let mut carried = y[n - 1];
        for k in (0..n).rev() {
            let yk = carried;
            y[k] = yk;
            let (lo, mut hi) = (s.u_ptr[k], s.u_ptr[k + 1]);
            let mut prev = None;
            if yk != 0.0 {
                if lo < hi && s.u_idx[hi - 1] as usize + 1 == k {
                    prev = Some(self.u_val[hi - 1]);
                    hi -= 1;
                }
                for (&i, &u) in s.u_idx[lo..hi].iter().zip(&self.u_val[lo..hi]) {
                    y[i as usize] -= u * yk;
                }
            }
            if k > 0 {
                carried = match prev {
                    Some(u) => y[k - 1] - u * yk,
                    None => y[k - 1],
                };
            }
        }
        for (&c, &yk) in s.q.iter().zip(y.iter()) {
            b[c] = yk;
        }
    }

    /// Floating-point operations of one refactorization and of one solve.
    pub fn flops(&self) -> (f64, f64) {
        let s = &*self.structure;
        let solve = 2.0 * (s.l_idx.len() + s.u_idx.len()) as f64 + s.n as f64;
        (s.refactor_flops, solve)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A deterministic sparse matrix in compressed columns: a random pattern with `per_col` entries per
    /// column, every other diagonal entry left structurally zero (so pivoting is needed), plus a chain
    /// that keeps it nonsingular.
    fn matrix(n: usize, per_col: usize, seed: u64) -> (Vec<usize>, Vec<usize>, Vec<f64>) {
        let mut state = seed;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        };
        let mut cols: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n];
        for (c, col) in cols.iter_mut().enumerate() {
            let mut rows: Vec<usize> = (0..per_col).map(|_| (next() % n as u64) as usize).collect();
            rows.push((c + 1) % n);
            if c % 2 == 1 {
                rows.push(c);
            }
            rows.sort_unstable();
            rows.dedup();
            for r in rows {
                if r == c && c % 2 == 0 {
                    continue;
                }
                let v = (next() % 2000) as f64 / 1000.0 - 1.0
                    + if r == (c + 1) % n { 3.0 } else { 0.0 };
                col.push((r, v));
            }
        }
        let mut ptr = vec![0];
        let (mut idx, mut val) = (Vec::new(), Vec::new());
        for col in cols {
            for (r, v) in col {
                idx.push(r);
                val.push(v);
            }
            ptr.push(idx.len());
        }
        (ptr, idx, val)
    }

    /// The solution by nalgebra's dense LU, a general-purpose reference.
    fn dense_solution(n: usize, ptr: &[usize], idx: &[usize], val: &[f64], b: &[f64]) -> Vec<f64> {
        let mut d = nalgebra::DMatrix::zeros(n, n);
        for c in 0..n {
            for p in ptr[c]..ptr[c + 1] {
                d[(idx[p], c)] = val[p];
            }
        }
        let x = d
            .lu()
            .solve(&nalgebra::DVector::from_column_slice(b))
            .expect("the test matrix is nonsingular");
        x.iter().copied().collect()
    }

    /// The normwise backward error |b - A x|_inf / (|A|_inf |x|_inf + |b|_inf) (Rigal and Gaches 1967;
    /// Higham, "Accuracy and Stability of Numerical Algorithms", 2nd ed., Thm 7.1): a stable LU gives a
    /// small multiple of the unit roundoff times the pivot growth, whatever the condition number.
    fn backward_error(
        n: usize,
        ptr: &[usize],
        idx: &[usize],
        val: &[f64],
        x: &[f64],
        b: &[f64],
    ) -> f64 {
        let mut r = b.to_vec();
        let mut row_abs = vec![0.0; n];
        for c in 0..n {
            for p in ptr[c]..ptr[c + 1] {
                r[idx[p]] -= val[p] * x[c];
                row_abs[idx[p]] += val[p].abs();
            }
        }
        let norm = |v: &[f64]| v.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        norm(&r) / (norm(&row_abs) * norm(x) + norm(b))
    }

    fn max_diff(a: &[f64], b: &[f64]) -> f64 {
        a.iter()
            .zip(b)
            .map(|(x, y)| (x - y).abs())
            .fold(0.0, f64::max)
    }

    #[test]
    fn pivoting_factorization_and_refactor_match_a_dense_lu() {
        for (n, per_col, seed) in [(7, 2, 1), (40, 3, 7), (150, 2, 11), (300, 4, 5)] {
            let (ptr, idx, mut val) = matrix(n, per_col, seed);
            let order = column_order(n, &ptr, &idx).expect("AMD orders the pattern");
            let b: Vec<f64> = (0..n).map(|i| (i as f64 * 0.37).sin()).collect();
            let a = Csc {
                n,
                col_ptr: &ptr,
                row_idx: &idx,
                values: &val,
            };
            let f = factor_pivoting(&a, &order).expect("nonsingular");
            let mut x = b.clone();
            f.solve(&mut x);
            let want = dense_solution(n, &ptr, &idx, &val, &b);
            let scale = want.iter().fold(1.0f64, |m, v| m.max(v.abs()));
            let be = backward_error(n, &ptr, &idx, &val, &x, &b);
            assert!(be < 1e-13, "n {n}: backward error {be}");
            assert!(max_diff(&x, &want) < 1e-8 * scale, "n {n}");
            // New values on the same pattern: the refactor reuses the pivots (or asks to pivot anew).
            for v in val.iter_mut() {
                *v *= 1.0 + 0.1 * v.signum();
            }
            let a = Csc {
                n,
                col_ptr: &ptr,
                row_idx: &idx,
                values: &val,
            };
            let g = match refactor(&a, &f.structure) {
                Ok(g) => g,
                Err(Failure::PivotTooSmall) => factor_pivoting(&a, &order).expect("nonsingular"),
                Err(e) => panic!("{e:?}"),
            };
            let mut x = b.clone();
            g.solve(&mut x);
            let want = dense_solution(n, &ptr, &idx, &val, &b);
            let scale = want.iter().fold(1.0f64, |m, v| m.max(v.abs()));
            assert!(max_diff(&x, &want) < 1e-8 * scale, "refactor n {n}");
            let be = backward_error(n, &ptr, &idx, &val, &x, &b);
            assert!(be < 1e-13, "refactor n {n}: backward error {be}");
        }
    }

    #[test]
    fn a_reused_pivot_that_vanishes_asks_for_pivoting() {
        // [[2, 1], [1, 1]] pivots on the diagonal; with A(0,0) = 0 that pivot order fails, while the
        // matrix [[0, 1], [1, 1]] is nonsingular and factors with a row swap.
        let ptr = [0, 2, 4];
        let idx = [0, 1, 0, 1];
        let order = [0, 1];
        let a = Csc {
            n: 2,
            col_ptr: &ptr,
            row_idx: &idx,
            values: &[2.0, 1.0, 1.0, 1.0],
        };
        let f = factor_pivoting(&a, &order).unwrap();
        let swapped = Csc {
            n: 2,
            col_ptr: &ptr,
            row_idx: &idx,
            values: &[0.0, 1.0, 1.0, 1.0],
        };
        assert_eq!(
            refactor(&swapped, &f.structure).unwrap_err(),
            Failure::PivotTooSmall
        );
        let g = factor_pivoting(&swapped, &order).unwrap();
        let mut x = [1.0, 2.0]; // x = [1, 1]
        g.solve(&mut x);
        assert!(max_diff(&x, &[1.0, 1.0]) < 1e-15);
    }

    #[test]
    fn a_singular_column_is_named() {
        // Column 1 equals column 0.
        let ptr = [0, 2, 4, 5];
        let idx = [0, 1, 0, 1, 2];
        let a = Csc {
            n: 3,
            col_ptr: &ptr,
            row_idx: &idx,
            values: &[1.0, 2.0, 1.0, 2.0, 5.0],
        };
        let err = factor_pivoting(&a, &[0, 1, 2]).unwrap_err();
        assert_eq!(err, Failure::Singular { column: 1 });
    }

    /// Row numbers are stored in 32 bits: one past `MAX_UNKNOWNS` is refused, never truncated.
    #[test]
    fn row_numbers_past_32_bits_are_refused() {
        let last = MAX_UNKNOWNS;
        assert_eq!(rows_u32(&[0, 7, last]).unwrap(), vec![0, 7, u32::MAX]);
        if let Some(past) = last.checked_add(1) {
            assert_eq!(
                rows_u32(&[3, past]).unwrap_err(),
                Failure::Singular { column: past }
            );
        }
    }
}
