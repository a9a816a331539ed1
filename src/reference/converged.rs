//! The converged reference for circuits without an exact solution: TR-BDF2 (L-stable, second order,
//! embedded error estimate) run down a tolerance ladder from rtol 1e-8, each rung a decade tighter, with
//! a step limit of a two-thousandth of the run, until two successive rungs agree to 3e-8 of each
//! signal's peak (or rtol reaches 1e-13). The difference between the last two rungs bounds the error of
//! the last (whose own error is several times smaller when the rungs converge); the reference refuses to
//! call itself converged when the differences stop shrinking well above that.
//!
//! Between its points the last rung is interpolated by a cubic through the four nearest points that lie
//! between the same two breakpoints (never across one, where a signal may jump); the interpolation error,
//! estimated as the largest difference between that cubic and the quadratic through three of the points
//! at every interval's midpoint, is added to the bound.

use super::ReferenceError;
use crate::circuit::Circuit;
use crate::integrate::resample::{interpolate, lagrange, piece, stencil};
use crate::integrate::{self, Trajectory};
use crate::settings::{MethodName, Restart, Scale, Settings};

/// The first rung's rtol; each next rung is a decade tighter.
pub const FIRST_RTOL: f64 = 1e-8;
/// The tightest rung tried: below it rounding dominates double precision.
pub const LAST_RTOL: f64 = 1e-13;
/// The ladder stops once successive rungs agree to this fraction of each signal's peak.
pub const TARGET: f64 = 3e-8;

/// A difference between rungs below this fraction of the peak is rounding, not a failure to converge.
const ROUNDING_FLOOR: f64 = 1e-11;

pub struct Converged {
    pub error_bound: f64,
    pub warning: Option<String>,
    /// Differences between successive rungs, relative to each signal's peak (the worst signal).
    pub rung_differences: Vec<f64>,
    /// The interpolation error estimate included in `error_bound`.
    pub interpolation_error: f64,
    finest: Trajectory,
    breakpoints: Vec<f64>,
}

/// The rtol of the pilot run that measures the circuit's voltage and current magnitudes.
const PILOT_RTOL: f64 = 1e-5;

/// The settings of one rung. `peaks` are the largest |voltage| and |current| of the circuit (from a
/// pilot run): the absolute tolerances are a hundredth of rtol times them, so that a signal still near
/// zero early in the run is held to the accuracy the bound claims relative to its peak, not to an
/// absolute tolerance far below it.
pub fn rung_settings(circuit: &Circuit, base: &Settings, rtol: f64, peaks: (f64, f64)) -> Settings {
    let mut s = Settings::new(MethodName::TrBdf2);
    s.start = base.start;
    s.tolerances.rtol = rtol;
    s.tolerances.atol_v = (1e-2 * rtol * peaks.0).max(1e-15);
    s.tolerances.atol_i = (1e-2 * rtol * peaks.1).max(1e-18);
    s.tolerances.lte_factor = 1.0;
    s.tolerances.scale = Scale::SignalPeak;
    let limit = circuit.run.stop / 2000.0;
    s.steps.max_step = Some(base.steps.max_step.map_or(limit, |m| m.min(limit)));
    s.steps.fixed_step = None;
    s.steps.restart = Restart::BackwardEuler;
    // The rungs need many more steps than a run; a larger budget set for the circuit still counts.
    s.steps.step_budget = base.steps.step_budget.max(RUNG_STEP_BUDGET);
    s
}

/// The least step budget of each rung (a file's `run.step_budget` above it is used instead).
pub const RUNG_STEP_BUDGET: u64 = 20_000_000;

impl Converged {
    pub fn new(circuit: &Circuit, settings: &Settings) -> Result<Converged, ReferenceError> {
        let pilot_settings = rung_settings(circuit, settings, PILOT_RTOL, (1.0, 1e-3));
        let pilot = integrate::simulate(circuit, &pilot_settings).map_err(|error| {
            ReferenceError::ConvergedRun {
                rtol: PILOT_RTOL,
                error,
            }
        })?;
        let peaks = (pilot.peak_voltage.max(1e-12), pilot.peak_current.max(1e-15));
        let breakpoints = circuit.breakpoints();
        let run = |rtol: f64| {
            let s = rung_settings(circuit, settings, rtol, peaks);
            integrate::simulate(circuit, &s)
                .map(|r| r.trajectory)
                .map_err(|error| ReferenceError::ConvergedRun { rtol, error })
        };
        let mut rung = 0;
        let mut rtol = FIRST_RTOL;
        let mut previous = run(rtol)?;
        let mut diffs: Vec<f64> = Vec::new();
        let mut warning = None;
        let (finest, last_diff) = loop {
            rung += 1;
            rtol = FIRST_RTOL * 10f64.powi(-rung);
            let next = run(rtol)?;
            let peaks = signal_peaks(&next);
            let (d, worst) = difference(&previous, &next, &breakpoints, &peaks);
            let prior = diffs.last().copied();
            diffs.push(d);
            if let Some(p) = prior {
                if d > ROUNDING_FLOOR && d >= p {
                    // No longer converging: rounding has taken over (or the circuit defeats the method).
                    // Keep the previous rung, whose error the last two differences both bound.
                    if p > 10.0 * TARGET {
                        return Err(ReferenceError::NotConverged {
                            signal: next.labels.get(worst).cloned().unwrap_or_default(),
                            previous: p,
                            last: d,
                        });
                    }
                    warning = Some(format!(
                        "the converged reference stopped improving at rtol {:.0e} (rung differences {p:.2e} then {d:.2e} of the peak of {}); rounding limits it",
                        rtol,
                        next.labels.get(worst).cloned().unwrap_or_default()
                    ));
                    break (previous, d.max(p));
                }
                if d > ROUNDING_FLOOR && d > 0.7 * p && warning.is_none() {
                    warning = Some(format!(
                        "the converged reference converges slowly: rung differences {p:.2e} then {d:.2e} of the peak of {}; its error bound is less certain",
                        next.labels.get(worst).cloned().unwrap_or_default()
                    ));
                }
            }
            if d <= TARGET || rtol <= LAST_RTOL * 1.0001 {
                break (next, d);
            }
            previous = next;
        };
        let peaks = signal_peaks(&finest);
        let interpolation_error = interpolation_estimate(&finest, &breakpoints, &peaks);
        Ok(Converged {
            error_bound: last_diff.max(ROUNDING_FLOOR) + interpolation_error,
            warning,
            rung_differences: diffs,
            interpolation_error,
            finest,
            breakpoints,
        })
    }

    pub fn labels(&self) -> Vec<String> {
        self.finest.labels.clone()
    }

    pub fn signals(&self, times: &[f64]) -> Vec<Vec<f64>> {
        interpolate(&self.finest, &self.breakpoints, times)
    }

    /// Number of points of the finest rung.
    pub fn points(&self) -> usize {
        self.finest.times.len()
    }
}

fn signal_peaks(t: &Trajectory) -> Vec<f64> {
    t.values
        .iter()
        .map(|v| v.iter().fold(0.0f64, |a, x| a.max(x.abs())).max(1e-300))
        .collect()
}

/// The largest difference between two rungs at the coarser one's points, relative to each signal's
/// peak, and the signal where it occurs.
fn difference(
    coarse: &Trajectory,
    fine: &Trajectory,
    breakpoints: &[f64],
    peaks: &[f64],
) -> (f64, usize) {
    let at_fine = interpolate(fine, breakpoints, &coarse.times);
    let mut worst = (0.0f64, 0usize);
    for (k, (c, f)) in coarse.values.iter().zip(&at_fine).enumerate() {
        let d = c
            .iter()
            .zip(f)
            .fold(0.0f64, |a, (x, y)| a.max((x - y).abs()))
            / peaks[k];
        if d > worst.0 {
            worst = (d, k);
        }
    }
    worst
}

/// The largest difference between the cubic and the quadratic interpolant at interval midpoints,
/// relative to each signal's peak.
fn interpolation_estimate(traj: &Trajectory, breakpoints: &[f64], peaks: &[f64]) -> f64 {
    let mut worst: f64 = 0.0;
    for w in traj.times.windows(2) {
        let t = 0.5 * (w[0] + w[1]);
        let (lo, hi) = piece(&traj.times, breakpoints, t);
        let cubic = stencil(&traj.times, lo, hi, t, 4);
        let quad = stencil(&traj.times, lo, hi, t, 3);
        if cubic.len() < 4 {
            continue;
        }
        for (k, v) in traj.values.iter().enumerate() {
            let d =
                (lagrange(&traj.times, v, &cubic, t) - lagrange(&traj.times, v, &quad, t)).abs();
            worst = worst.max(d / peaks[k]);
        }
    }
    worst
}
