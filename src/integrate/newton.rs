//! Newton's method for the circuit equations, with damping, a convergence test on both the update and
//! the residual, and reuse of the factorization when the Jacobian cannot have changed.

use crate::equations::matrix::{Lu, Matrix, Packed, Singular};
use crate::equations::{System, UnknownKind};

/// A set of equations F(x) = 0 that Newton can solve.
pub trait Equations {
    fn size(&self) -> usize;
    /// F(x) into `f`; the magnitude of the largest term of each row into `scale` (for the residual test);
    /// the Jacobian into `jac` when asked.
    fn evaluate(&self, x: &[f64], f: &mut [f64], scale: &mut [f64], jac: Option<&mut Matrix>);
    /// A factor in (0, 1] by which to shorten the update `dx` from `x`.
    fn damping(&self, _x: &[f64], _dx: &[f64]) -> f64 {
        1.0
    }
    /// `Some(key)` when the Jacobian is constant for a given key (a linear circuit at a given step).
    fn jacobian_key(&self) -> Option<u64> {
        None
    }
    /// A constant Jacobian of the form alpha C + G, given as (alpha, C, G), which Newton then factors
    /// without evaluating F (`Matrix::factor_combination`); None to assemble it through `evaluate`.
    fn combination(&self) -> Option<(f64, &Packed, &Packed)> {
        None
    }
    /// Whether unknown `i` is a voltage or a current (for absolute tolerances).
    fn unknown_kind(&self, i: usize) -> UnknownKind;
    /// Whether row `r` balances currents or voltages.
    fn row_kind(&self, r: usize) -> UnknownKind;
}

/// Whether every entry is finite: v * 0 is NaN exactly for an infinite or NaN v, and a sum holding a
/// NaN is NaN. Four lanes without an early exit vectorise, where a search stopping at the first bad
/// entry would not (the vectors are finite on all but failing steps).
pub fn all_finite(x: &[f64]) -> bool {
    let mut acc = [0.0f64; 4];
    let chunks = x.chunks_exact(4);
    let rest = chunks.remainder();
    for c in chunks {
        for k in 0..4 {
            acc[k] += c[k] * 0.0;
        }
    }
    for v in rest {
        acc[0] += v * 0.0;
    }
    (acc[0] + acc[1] + acc[2] + acc[3]) == 0.0
}

/// When Newton has converged.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NewtonTolerances {
    pub rtol: f64,
    pub atol_v: f64,
    pub atol_i: f64,
    pub max_iterations: usize,
}

impl NewtonTolerances {
    /// Newton tolerances a hundred times tighter than the step-control tolerances, so that the
    /// iteration error never competes with the truncation error (common practice).
    pub fn from_step_tolerances(t: &crate::settings::Tolerances, max_iterations: usize) -> Self {
        NewtonTolerances {
            rtol: (t.rtol * 1e-2).max(1e-14),
            atol_v: t.atol_v * 1e-2,
            atol_i: t.atol_i * 1e-2,
            max_iterations,
        }
    }
}

/// Why Newton stopped without converging.
#[derive(Debug, Clone, PartialEq)]
pub enum NewtonFailure {
    /// The iteration limit was reached; `worst_row` had the largest scaled residual.
    NoConvergence { worst_row: usize, residual: f64 },
    /// The Jacobian was singular in the column of `unknown`.
    Singular { unknown: usize },
    /// The iterate stopped being finite.
    NotFinite,
}

/// Counters that a run reports.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Work {
    pub newton_iterations: u64,
    pub factorizations: u64,
}

/// A few dozen units of double-precision rounding: residuals and updates this small relative to the
/// terms they come from are noise.
const ROUNDING: f64 = 64.0 * f64::EPSILON;

/// How many constant-Jacobian factorizations are kept (TR-BDF2's two stages and step doubling's two
/// step sizes alternate).
const CACHE_SLOTS: usize = 4;
/// Sparse factorizations of large circuits hold most of a run's memory: two slots cover the two step
/// sizes of step doubling and the single coefficient of every method's stages.
const SPARSE_CACHE_SLOTS: usize = 2;

/// Newton's reusable storage and its cached factorization.
#[derive(Debug, Clone)]
pub struct Newton {
    f: Vec<f64>,
    scale: Vec<f64>,
    dx: Vec<f64>,
    jac: Matrix,
    /// Factorizations of constant Jacobians by key, most recent last (a few steps alternate).
    cache: Vec<(u64, Lu)>,
    /// Which factorization the last iteration used: an index into `cache`, or `usize::MAX` for `last_lu`.
    last_used: usize,
    last_lu: Option<Lu>,
    pub work: Work,
}

impl Newton {
    pub fn new(n: usize) -> Self {
        Newton {
            f: vec![0.0; n],
            scale: vec![0.0; n],
            dx: vec![0.0; n],
            jac: Matrix::with_diagonal(n),
            cache: Vec::new(),
            last_used: usize::MAX,
            last_lu: None,
            work: Work::default(),
        }
    }

    /// Storage for the equations of `sys`, starting from its Jacobian pattern and symbolic analysis.
    pub fn for_system(sys: &System) -> Self {
        Newton {
            jac: sys.jacobian.clone(),
            ..Newton::new(sys.size())
        }
    }

    /// Chooses the dense or sparse LU (and forgets cached factorizations).
    pub fn set_backend(&mut self, backend: crate::equations::matrix::Backend) {
        self.jac.set_backend(backend);
        self.forget();
    }

    pub fn backend(&self) -> crate::equations::matrix::Backend {
        self.jac.backend()
    }

    /// The factorization used by the last iteration (for error estimates that need the Jacobian).
    pub fn last_factorization(&self) -> Option<&Lu> {
        if self.last_used == usize::MAX {
            self.last_lu.as_ref()
        } else {
            self.cache.get(self.last_used).map(|(_, lu)| lu)
        }
    }

    /// Solves J v = (v on entry) in place with the last iteration's factorization, if any, working in
    /// the update vector (`Lu::solve_with`).
    pub fn solve_with_last(&mut self, v: &mut [f64]) {
        let mut scratch = std::mem::take(&mut self.dx);
        if let Some(lu) = self.last_factorization() {
            lu.solve_with(v, &mut scratch);
        }
        self.dx = scratch;
    }

    /// Solves `eq` from the guess in `x`. A linear problem (one with a Jacobian key) is solved by one
    /// exact step.
    pub fn solve<E: Equations>(
        &mut self,
        eq: &E,
        x: &mut [f64],
        tol: &NewtonTolerances,
    ) -> Result<(), NewtonFailure> {
        let n = eq.size();
        if self.f.len() != n {
            self.resize(n);
        }
        let key = eq.jacobian_key();
        let mut update_ok = false;
        for k in 0..=tol.max_iterations {
            let slot = key.and_then(|kk| self.cache.iter().position(|(ck, _)| *ck == kk));
            let cached = slot.is_some();
            if let Some(i) = slot {
                self.last_used = i;
            }
            if cached {
                eq.evaluate(x, &mut self.f, &mut self.scale, None);
            } else {
                self.jac.zero();
                eq.evaluate(x, &mut self.f, &mut self.scale, Some(&mut self.jac));
            }
            if !all_finite(&self.f) {
                return Err(NewtonFailure::NotFinite);
            }
            if k > 0 && ((update_ok && self.residual_ok(eq, tol)) || self.residual_at_rounding()) {
                return Ok(());
            }
            if k == tol.max_iterations {
                break;
            }
            if !cached {
                self.factor_jacobian(key)?;
            }
            for (d, f) in self.dx.iter_mut().zip(&self.f) {
                *d = -f;
            }
            let mut dx = std::mem::take(&mut self.dx);
            self.last_factorization()
                .expect("factored above")
                .solve(&mut dx);
            self.dx = dx;
            self.work.newton_iterations += 1;
            let lambda = eq.damping(x, &self.dx);
            update_ok = lambda == 1.0;
            for (i, (xi, di)) in x.iter_mut().zip(&self.dx).enumerate() {
                let step = lambda * di;
                let atol = match eq.unknown_kind(i) {
                    UnknownKind::Voltage => tol.atol_v,
                    UnknownKind::Current => tol.atol_i,
                };
                let size = xi.abs().max((*xi + step).abs());
                if step.abs() > tol.rtol * size + atol && step.abs() > ROUNDING * size {
                    update_ok = false;
                }
                *xi += step;
            }
            if !all_finite(x) {
                return Err(NewtonFailure::NotFinite);
            }
            if key.is_some() {
                // One exact step solves a linear problem.
                return Ok(());
            }
        }
        let (worst_row, residual) = self.worst_residual(eq, tol);
        Err(NewtonFailure::NoConvergence {
            worst_row,
            residual,
        })
    }

    /// Solves a linear problem, F(x) = J x - k with J constant for `key` (its `Equations::jacobian_key`),
    /// by one solve of J: `x` holds k on entry and the solution on return. Beside Newton's single exact
    /// step from a guess, this skips the evaluation of F; the two agree to rounding.
    pub fn solve_linear<E: Equations>(
        &mut self,
        eq: &E,
        key: u64,
        x: &mut [f64],
    ) -> Result<(), NewtonFailure> {
        let n = eq.size();
        if self.f.len() != n {
            self.resize(n);
        }
        if !all_finite(x) {
            return Err(NewtonFailure::NotFinite);
        }
        match self.cache.iter().position(|(ck, _)| *ck == key) {
            Some(i) => self.last_used = i,
            None => match eq.combination() {
                Some((alpha, c, g)) => self.factor_combination(key, alpha, c, g)?,
                None => {
                    // The Jacobian of a linear problem is the same at any point: assemble it at k.
                    self.jac.zero();
                    eq.evaluate(x, &mut self.f, &mut self.scale, Some(&mut self.jac));
                    self.factor_jacobian(Some(key))?;
                }
            },
        }
        // The update vector, unused by a linear solve, is the LU's working vector.
        self.solve_with_last(x);
        self.work.newton_iterations += 1;
        if !all_finite(x) {
            return Err(NewtonFailure::NotFinite);
        }
        Ok(())
    }

    /// Fresh storage for `n` unknowns, keeping the counters and the LU choice.
    fn resize(&mut self, n: usize) {
        let backend = self.jac.backend();
        *self = Newton {
            work: self.work,
            ..Newton::new(n)
        };
        self.jac.set_backend(backend);
    }

    /// Factors the assembled Jacobian and keeps it: in the cache under `key` (a constant Jacobian),
    /// else as the last factorization.
    fn factor_jacobian(&mut self, key: Option<u64>) -> Result<(), NewtonFailure> {
        let spare = self.spare(key);
        let lu = self.jac.factor_reusing(spare);
        self.keep(key, lu)
    }

    /// Factors the constant Jacobian alpha C + G and keeps it in the cache under `key`.
    fn factor_combination(
        &mut self,
        key: u64,
        alpha: f64,
        c: &Packed,
        g: &Packed,
    ) -> Result<(), NewtonFailure> {
        let spare = self.spare(Some(key));
        let lu = self.jac.factor_combination(alpha, c, g, spare);
        self.keep(Some(key), lu)
    }

    /// The factorization a new one under `key` replaces, which lends it its storage.
    fn spare(&mut self, key: Option<u64>) -> Option<Lu> {
        let slots = if self.jac.uses_sparse() {
            SPARSE_CACHE_SLOTS
        } else {
            CACHE_SLOTS
        };
        match key {
            Some(_) if self.cache.len() >= slots => {
                self.last_used = usize::MAX;
                Some(self.cache.remove(0).1)
            }
            Some(_) => None,
            None => self.last_lu.take(),
        }
    }

    /// Counts and keeps a new factorization: in the cache under `key`, else as the last one.
    fn keep(&mut self, key: Option<u64>, lu: Result<Lu, Singular>) -> Result<(), NewtonFailure> {
        let lu = lu.map_err(|Singular { column }| NewtonFailure::Singular { unknown: column })?;
        self.work.factorizations += 1;
        match key {
            Some(kk) => {
                self.cache.push((kk, lu));
                self.last_used = self.cache.len() - 1;
            }
            None => {
                self.last_lu = Some(lu);
                self.last_used = usize::MAX;
            }
        }
        Ok(())
    }

    /// Every row's residual is within a few rounding errors of the terms that make it up: no iteration
    /// can do better in floating point.
    fn residual_at_rounding(&self) -> bool {
        self.f
            .iter()
            .zip(&self.scale)
            .all(|(f, s)| f.abs() <= ROUNDING * s)
    }

    fn residual_ok<E: Equations>(&self, eq: &E, tol: &NewtonTolerances) -> bool {
        self.f
            .iter()
            .zip(&self.scale)
            .enumerate()
            .all(|(r, (f, s))| {
                let atol = match eq.row_kind(r) {
                    UnknownKind::Voltage => tol.atol_v,
                    UnknownKind::Current => tol.atol_i,
                };
                f.abs() <= tol.rtol * s + atol
            })
    }

    fn worst_residual<E: Equations>(&self, eq: &E, tol: &NewtonTolerances) -> (usize, f64) {
        let mut worst = (0, 0.0);
        let mut worst_ratio = -1.0;
        for (r, (f, s)) in self.f.iter().zip(&self.scale).enumerate() {
            let atol = match eq.row_kind(r) {
                UnknownKind::Voltage => tol.atol_v,
                UnknownKind::Current => tol.atol_i,
            };
            let ratio = f.abs() / (tol.rtol * s + atol);
            if ratio > worst_ratio {
                worst_ratio = ratio;
                worst = (r, *f);
            }
        }
        worst
    }

    /// Forgets the cached factorization (for example when the problem changes).
    pub fn forget(&mut self) {
        self.cache.clear();
        self.last_lu = None;
        self.last_used = usize::MAX;
    }
}

/// One implicit stage of any method: alpha q(x) + i(x, t) - b(t) - r = 0, optionally with a shunt
/// conductance from every node to ground and the sources scaled (for operating-point homotopies).
pub struct Stage<'a> {
    pub sys: &'a System,
    pub alpha: f64,
    pub r: &'a [f64],
    pub t: f64,
    pub source_factor: f64,
    pub shunt: f64,
}

impl Equations for Stage<'_> {
    fn size(&self) -> usize {
        self.sys.size()
    }

    fn evaluate(&self, x: &[f64], f: &mut [f64], scale: &mut [f64], jac: Option<&mut Matrix>) {
        let n = self.size();
        let mut q = vec![0.0; n];
        let mut b = vec![0.0; n];
        let mut jac = jac;
        if let Some(j) = jac.as_deref_mut() {
            j.set_combination(self.alpha, self.sys.c(), self.sys.g());
            self.sys.add_charge_jacobian(x, self.alpha, j);
            if self.shunt > 0.0 {
                for r in 0..self.sys.node_count {
                    j.add(r, r, self.shunt);
                }
            }
        }
        self.sys.current_into(x, self.t, f, jac);
        self.sys.sources_into(self.t, self.source_factor, &mut b);
        if self.alpha != 0.0 {
            self.sys.charge_into(x, &mut q);
        }
        // The term magnitudes serve only the residual test, which a linear problem (solved by one
        // exact step) never reaches: skip the extra pass over the matrices on that hot path.
        if self.jacobian_key().is_some() {
            scale.fill(0.0);
        } else {
            self.sys.term_magnitudes(x, self.t, self.alpha, scale);
        }
        for r in 0..n {
            let aq = self.alpha * q[r];
            let shunt = if r < self.sys.node_count {
                self.shunt * x[r]
            } else {
                0.0
            };
            f[r] = aq + f[r] + shunt - b[r] - self.r[r];
            scale[r] += shunt.abs() + b[r].abs() + self.r[r].abs();
        }
    }

    fn damping(&self, x: &[f64], dx: &[f64]) -> f64 {
        self.sys.junction_damping(x, dx)
    }

    fn jacobian_key(&self) -> Option<u64> {
        (self.sys.linear && self.shunt == 0.0).then(|| self.alpha.to_bits())
    }

    /// A linear circuit's step matrix is alpha C + G: no diode or switch stamps, no shunt.
    fn combination(&self) -> Option<(f64, &Packed, &Packed)> {
        self.jacobian_key().map(|_| {
            let (g, c) = self.sys.packed_g_c();
            (self.alpha, c, g)
        })
    }

    fn unknown_kind(&self, i: usize) -> UnknownKind {
        self.sys.unknowns[i].kind
    }

    fn row_kind(&self, r: usize) -> UnknownKind {
        self.sys.row_kinds[r]
    }
}

#[cfg(test)]
mod tests {
    use super::all_finite;

    /// Every position of a bad entry, in the lanes and in the remainder, for each kind of bad value.
    #[test]
    fn all_finite_finds_any_infinite_or_nan_entry() {
        assert!(all_finite(&[]));
        for n in [1, 3, 4, 7, 9] {
            let ok: Vec<f64> = (0..n)
                .map(|i| f64::MAX * if i % 2 == 0 { 1.0 } else { -1.0 })
                .collect();
            assert!(all_finite(&ok), "n = {n}");
            for bad in [f64::INFINITY, f64::NEG_INFINITY, f64::NAN] {
                for at in 0..n {
                    let mut v = ok.clone();
                    v[at] = bad;
                    assert!(!all_finite(&v), "n = {n}, {bad} at {at}");
                }
            }
        }
    }
}
