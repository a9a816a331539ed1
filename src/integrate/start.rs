//! The state at t = 0: the DC operating point (with shunt stepping and source stepping when plain
//! Newton fails), or the consistent state with capacitor voltages and inductor currents held.

use super::error::RunError;
use super::newton::{Equations, Newton, NewtonFailure, NewtonTolerances, Stage};
use crate::equations::matrix::Matrix;
use crate::equations::{System, UnknownKind};

/// The operating point with the sources at their t = 0 values.
pub fn operating_point(
    sys: &System,
    tol: &NewtonTolerances,
    newton: &mut Newton,
) -> Result<Vec<f64>, RunError> {
    let n = sys.size();
    let zero = vec![0.0; n];
    let stage = |shunt: f64, factor: f64| Stage {
        sys,
        alpha: 0.0,
        r: &zero,
        t: 0.0,
        source_factor: factor,
        shunt,
    };
    let mut x = vec![0.0; n];
    let first = match newton.solve(&stage(0.0, 1.0), &mut x, tol) {
        Ok(()) => return Ok(x),
        Err(e) => e,
    };
    if let NewtonFailure::Singular { unknown } = first {
        return Err(RunError::Singular {
            time: 0.0,
            unknown: sys.describe_unknown(unknown),
        });
    }

    // Shunt stepping: a conductance from every node to ground, relaxed a decade at a time.
    let mut x = vec![0.0; n];
    let mut ok = true;
    let mut shunt = 1e-2;
    while shunt > 1e-13 {
        if newton.solve(&stage(shunt, 1.0), &mut x, tol).is_err() {
            ok = false;
            break;
        }
        shunt /= 10.0;
    }
    if ok && newton.solve(&stage(0.0, 1.0), &mut x, tol).is_ok() {
        return Ok(x);
    }

    // Source stepping: the sources raised from zero to their full values.
    let mut x = vec![0.0; n];
    let mut factor: f64 = 0.0;
    let mut step: f64 = 0.1;
    while factor < 1.0 {
        let next = (factor + step).min(1.0);
        let mut trial = x.clone();
        if newton.solve(&stage(0.0, next), &mut trial, tol).is_ok() {
            x = trial;
            factor = next;
            step = (step * 2.0).min(0.5);
        } else {
            step /= 4.0;
            if step < 1e-6 {
                break;
            }
        }
    }
    if factor >= 1.0 {
        return Ok(x);
    }
    let (worst, residual) = match first {
        NewtonFailure::NoConvergence {
            worst_row,
            residual,
        } => (worst_row, residual),
        _ => (0, f64::NAN),
    };
    Err(RunError::OperatingPoint {
        worst: sys.describe_unknown(worst),
        residual: if residual.is_finite() { residual } else { 0.0 },
    })
}

/// The DC equations at t = 0 with capacitor voltages and inductor currents held. Held capacitors carry
/// an extra unknown, their current at t = 0, appended after the circuit's unknowns.
struct Held<'a> {
    sys: &'a System,
    /// (held-voltage index, extra unknown index)
    caps: Vec<(usize, usize)>,
    /// Rows of inductors whose current is held.
    held_rows: Vec<bool>,
}

impl Equations for Held<'_> {
    fn size(&self) -> usize {
        self.sys.size() + self.caps.len()
    }

    fn evaluate(&self, x: &[f64], f: &mut [f64], scale: &mut [f64], jac: Option<&mut Matrix>) {
        let n = self.sys.size();
        let (xs, f_sys) = (&x[..n], &mut f[..n]);
        let mut b = vec![0.0; n];
        let mut jsys = jac.is_some().then(|| self.sys.jacobian.clone());
        if let Some(j) = jsys.as_mut() {
            j.set_combination(0.0, self.sys.c(), self.sys.g());
        }
        self.sys.current_into(xs, 0.0, f_sys, jsys.as_mut());
        self.sys.sources_into(0.0, 1.0, &mut b);
        for r in 0..n {
            scale[r] = f_sys[r].abs().max(b[r].abs());
            f_sys[r] -= b[r];
        }
        let mut jac = jac;
        if let (Some(j), Some(js)) = (jac.as_deref_mut(), jsys.as_ref()) {
            for r in 0..n {
                for (c, v) in js.row(r) {
                    if v != 0.0 {
                        j.add(r, c, v);
                    }
                }
            }
        }
        // Inductor rows: the current is held.
        for h in &self.sys.held_currents {
            let k = h.unknown;
            f[k] = x[k] - h.current;
            scale[k] = x[k].abs().max(h.current.abs());
            if let Some(j) = jac.as_deref_mut() {
                let entries: Vec<(usize, f64)> = j.row(k).collect();
                for (c, v) in entries {
                    if v != 0.0 {
                        j.add(k, c, -v);
                    }
                }
                j.add(k, k, 1.0);
            }
        }
        // Held capacitors: their current enters the node balances; their voltage is fixed.
        for &(hi, extra) in &self.caps {
            let h = &self.sys.held_voltages[hi];
            let lam = x[extra];
            if let Some(a) = h.a {
                f[a] += lam;
            }
            if let Some(b) = h.b {
                f[b] -= lam;
            }
            let v = h.a.map_or(0.0, |a| x[a]) - h.b.map_or(0.0, |b| x[b]);
            f[extra] = v - h.voltage;
            scale[extra] = v.abs().max(h.voltage.abs());
            if let Some(j) = jac.as_deref_mut() {
                if let Some(a) = h.a {
                    j.add(a, extra, 1.0);
                    j.add(extra, a, 1.0);
                }
                if let Some(b) = h.b {
                    j.add(b, extra, -1.0);
                    j.add(extra, b, -1.0);
                }
            }
        }
    }

    fn damping(&self, x: &[f64], dx: &[f64]) -> f64 {
        let n = self.sys.size();
        self.sys.junction_damping(&x[..n], &dx[..n])
    }

    fn unknown_kind(&self, i: usize) -> UnknownKind {
        self.sys
            .unknowns
            .get(i)
            .map_or(UnknownKind::Current, |u| u.kind)
    }

    fn row_kind(&self, r: usize) -> UnknownKind {
        if r < self.sys.size() {
            if self.held_rows[r] {
                UnknownKind::Current
            } else {
                self.sys.row_kinds[r]
            }
        } else {
            UnknownKind::Voltage
        }
    }
}

/// The consistent state at t = 0 with capacitors and inductors holding their initial values.
pub fn initial_conditions(
    sys: &System,
    tol: &NewtonTolerances,
    newton: &mut Newton,
) -> Result<Vec<f64>, RunError> {
    let n = sys.size();
    let caps: Vec<(usize, usize)> = sys
        .held_voltages
        .iter()
        .enumerate()
        .filter(|(_, h)| h.held)
        .enumerate()
        .map(|(j, (i, _))| (i, n + j))
        .collect();
    let mut held_rows = vec![false; n];
    for h in &sys.held_currents {
        held_rows[h.unknown] = true;
    }
    let eq = Held {
        sys,
        caps,
        held_rows,
    };
    let mut x = vec![0.0; eq.size()];
    for h in &sys.held_currents {
        x[h.unknown] = h.current;
    }
    let mut local = Newton::new(eq.size());
    local.set_backend(newton.backend());
    let result = local.solve(&eq, &mut x, tol);
    newton.work.newton_iterations += local.work.newton_iterations;
    newton.work.factorizations += local.work.factorizations;
    match result {
        Ok(()) => {}
        Err(NewtonFailure::Singular { unknown }) => {
            return Err(RunError::Singular {
                time: 0.0,
                unknown: if unknown < n {
                    sys.describe_unknown(unknown)
                } else {
                    format!(
                        "the current of capacitor {}",
                        sys.held_voltages[eq.caps[unknown - n].0].element
                    )
                },
            })
        }
        Err(NewtonFailure::NoConvergence { worst_row, .. }) => {
            return Err(RunError::InitialConditions {
                worst: if worst_row < n {
                    sys.describe_unknown(worst_row)
                } else {
                    format!(
                        "capacitor {}",
                        sys.held_voltages[eq.caps[worst_row - n].0].element
                    )
                },
            })
        }
        Err(NewtonFailure::NotFinite) => {
            return Err(RunError::InitialConditions {
                worst: "a value that overflowed".into(),
            })
        }
    }
    x.truncate(n);
    for h in sys.held_voltages.iter().filter(|h| !h.held && h.given) {
        let v = h.a.map_or(0.0, |a| x[a]) - h.b.map_or(0.0, |b| x[b]);
        if (v - h.voltage).abs() > 1e-9 * v.abs().max(h.voltage.abs()).max(1.0) {
            return Err(RunError::InitialConditionConflict {
                element: h.element.clone(),
                given: h.voltage,
                implied: v,
            });
        }
    }
    Ok(x)
}
