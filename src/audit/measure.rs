//! How far a run is from its reference, measured at the run's own time points.

use crate::integrate::Trajectory;

/// The error of one watched signal of one cell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SignalError {
    /// max |cell - reference| / peak |reference|.
    pub max_error: f64,
    /// max |cell - reference|, in the signal's unit.
    pub max_abs_error: f64,
    /// The time-weighted root mean square of cell - reference over the run, in the signal's unit.
    pub rms_error: f64,
    /// Where the largest error occurs.
    pub worst_time: f64,
}

/// Measures each watched signal of `run` against `reference` (the reference evaluated at the run's own
/// times, `reference[k][j]` for signal k at time j), each normalized by `peaks[k]`.
pub fn signal_errors(run: &Trajectory, reference: &[Vec<f64>], peaks: &[f64]) -> Vec<SignalError> {
    let t = &run.times;
    run.values
        .iter()
        .zip(reference)
        .zip(peaks)
        .map(|((cell, refv), &peak)| {
            let mut max_abs = 0.0f64;
            let mut worst_time = 0.0;
            let mut integral = 0.0;
            for j in 0..t.len() {
                let e = (cell[j] - refv[j]).abs();
                if e > max_abs || e.is_nan() {
                    max_abs = if e.is_nan() { f64::INFINITY } else { e };
                    worst_time = t[j];
                }
                if j > 0 {
                    let e0 = cell[j - 1] - refv[j - 1];
                    let e1 = cell[j] - refv[j];
                    integral += 0.5 * (e0 * e0 + e1 * e1) * (t[j] - t[j - 1]);
                }
            }
            let span = t.last().copied().unwrap_or(0.0) - t.first().copied().unwrap_or(0.0);
            let rms = if span > 0.0 {
                (integral / span).sqrt()
            } else {
                max_abs
            };
            SignalError {
                max_error: max_abs / peak.max(f64::MIN_POSITIVE),
                max_abs_error: max_abs,
                rms_error: if rms.is_finite() { rms } else { f64::INFINITY },
                worst_time,
            }
        })
        .collect()
}

/// The least-squares slope of log(error) against log(steps): minus the observed order of accuracy.
/// Returns `None` with fewer than two usable points (positive, finite errors and distinct step counts).
pub fn log_log_slope(points: &[(f64, f64)]) -> Option<f64> {
    let pts: Vec<(f64, f64)> = points
        .iter()
        .filter(|(s, e)| *s > 0.0 && *e > 0.0 && s.is_finite() && e.is_finite())
        .map(|(s, e)| (s.ln(), e.ln()))
        .collect();
    if pts.len() < 2 {
        return None;
    }
    let n = pts.len() as f64;
    let (mx, my) = pts
        .iter()
        .fold((0.0, 0.0), |(a, b), (x, y)| (a + x / n, b + y / n));
    let sxx: f64 = pts.iter().map(|(x, _)| (x - mx) * (x - mx)).sum();
    let sxy: f64 = pts.iter().map(|(x, y)| (x - mx) * (y - my)).sum();
    (sxx > 0.0).then(|| sxy / sxx)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn errors_are_normalized_and_time_weighted() {
        let run = Trajectory {
            labels: vec!["a".into()],
            times: vec![0.0, 1.0, 3.0],
            values: vec![vec![0.0, 2.0, 2.0]],
        };
        let reference = vec![vec![0.0, 1.0, 2.0]];
        let e = signal_errors(&run, &reference, &[4.0])[0];
        assert_eq!(e.max_abs_error, 1.0);
        assert_eq!(e.max_error, 0.25);
        assert_eq!(e.worst_time, 1.0);
        // integral of e^2 by the trapezoidal rule: 0.5 * 1 * 1 + 0.5 * 1 * 2 = 1.5 over 3 s
        assert!((e.rms_error - (0.5f64).sqrt()).abs() < 1e-15);
    }

    #[test]
    fn slope_of_a_power_law() {
        let pts: Vec<(f64, f64)> = [10.0, 20.0, 40.0]
            .iter()
            .map(|&s: &f64| (s, 3.0 * s.powf(-2.0)))
            .collect();
        assert!((log_log_slope(&pts).unwrap() + 2.0).abs() < 1e-12);
        assert_eq!(log_log_slope(&pts[..1]), None);
    }
}
