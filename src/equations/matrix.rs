//! The one matrix type the integrators see: assembled by stamping, factored once, solved many times.
//!
//! Storage is dense and row-major, with an LU factorization (partial pivoting) that skips zero
//! multipliers, so the banded matrices of ladders and chains factor in about O(n * bandwidth^2) work.
//! A sparse backend can replace this file without touching the integrators: they only call `zero`,
//! `add`, `factor` and `Lu::solve`.

/// A square matrix under assembly.
#[derive(Debug, Clone, PartialEq)]
pub struct Matrix {
    n: usize,
    a: Vec<f64>,
}

/// A factorization that found no usable pivot in `column`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Singular {
    pub column: usize,
}

impl Matrix {
    pub fn new(n: usize) -> Self {
        Matrix {
            n,
            a: vec![0.0; n * n],
        }
    }

    pub fn size(&self) -> usize {
        self.n
    }

    pub fn zero(&mut self) {
        self.a.fill(0.0);
    }

    #[inline]
    pub fn add(&mut self, row: usize, col: usize, v: f64) {
        self.a[row * self.n + col] += v;
    }

    #[inline]
    pub fn get(&self, row: usize, col: usize) -> f64 {
        self.a[row * self.n + col]
    }

    /// `self = alpha * c + g`, reusing the storage.
    pub fn set_combination(&mut self, alpha: f64, c: &Matrix, g: &Matrix) {
        for ((d, &cv), &gv) in self.a.iter_mut().zip(&c.a).zip(&g.a) {
            *d = alpha * cv + gv;
        }
    }

    /// `y = self * x`.
    pub fn mul_vec(&self, x: &[f64], y: &mut [f64]) {
        for (r, yr) in y.iter_mut().enumerate() {
            let row = &self.a[r * self.n..(r + 1) * self.n];
            *yr = row.iter().zip(x).map(|(a, b)| a * b).sum();
        }
    }

    /// Adds `self * x` to `y`, skipping zero entries (most of a circuit matrix).
    pub fn mul_vec_add(&self, x: &[f64], y: &mut [f64]) {
        for (r, yr) in y.iter_mut().enumerate() {
            let row = &self.a[r * self.n..(r + 1) * self.n];
            let mut s = 0.0;
            for (a, b) in row.iter().zip(x) {
                if *a != 0.0 {
                    s += a * b;
                }
            }
            *yr += s;
        }
    }

    /// True when row `r` has any nonzero entry.
    pub fn row_is_nonzero(&self, r: usize) -> bool {
        self.a[r * self.n..(r + 1) * self.n]
            .iter()
            .any(|&v| v != 0.0)
    }

    /// LU factorization with partial pivoting. A pivot below a few rounding errors of its column's
    /// largest entry counts as zero: the matrix is singular in that column's unknown.
    pub fn factor(&self) -> Result<Lu, Singular> {
        let n = self.n;
        let mut lu = self.a.clone();
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
        Ok(Lu { n, lu, perm })
    }
}

/// A factored matrix.
#[derive(Debug, Clone)]
pub struct Lu {
    n: usize,
    lu: Vec<f64>,
    perm: Vec<usize>,
}

impl Lu {
    /// Solves `A x = b`, overwriting `b` with `x`.
    pub fn solve(&self, b: &mut [f64]) {
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

    #[test]
    fn solves_a_pivoting_system() {
        // Needs a row swap: zero on the first diagonal entry.
        let mut m = Matrix::new(3);
        let rows = [[0.0, 2.0, 1.0], [1.0, 1.0, 0.0], [3.0, 0.0, 4.0]];
        for (r, row) in rows.iter().enumerate() {
            for (c, &v) in row.iter().enumerate() {
                m.add(r, c, v);
            }
        }
        let x = [1.0, -2.0, 0.5];
        let mut b = [0.0; 3];
        m.mul_vec(&x, &mut b);
        m.factor().unwrap().solve(&mut b);
        for (a, e) in b.iter().zip(x) {
            assert!((a - e).abs() < 1e-14, "{a} vs {e}");
        }
    }

    #[test]
    fn reports_the_singular_column() {
        let mut m = Matrix::new(2);
        m.add(0, 0, 1.0);
        m.add(0, 1, 1.0);
        m.add(1, 0, 2.0);
        m.add(1, 1, 2.0);
        assert_eq!(m.factor().unwrap_err(), Singular { column: 1 });
    }
}
