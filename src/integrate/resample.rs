//! Values of a run between its accepted points: a cubic through the four nearest points of the same
//! piece between breakpoints, never across one (a waveform may have a corner there). Used by the
//! converged reference and by `simulate --points`; its error is O(h^4), far below the O(h^2) error of
//! the second-order methods it resamples.

use super::Trajectory;

/// The index range of the points of `times` in the piece (previous breakpoint, next breakpoint] that
/// holds `t`.
pub fn piece(times: &[f64], breakpoints: &[f64], t: f64) -> (usize, usize) {
    let b = breakpoints.partition_point(|&bp| bp < t);
    let lo_t = if b == 0 {
        f64::NEG_INFINITY
    } else {
        breakpoints[b - 1]
    };
    let hi_t = breakpoints.get(b).copied().unwrap_or(f64::INFINITY);
    // points strictly after the previous breakpoint (t = 0 belongs to the first piece)
    let lo = if lo_t == f64::NEG_INFINITY {
        0
    } else {
        times.partition_point(|&x| x <= lo_t)
    };
    let hi = times.partition_point(|&x| x <= hi_t);
    (lo, hi.max(lo + 1).min(times.len()))
}

/// Lagrange interpolation through the points `idx` of signal `v` at `t`.
pub fn lagrange(times: &[f64], v: &[f64], idx: &[usize], t: f64) -> f64 {
    let mut sum = 0.0;
    for (a, &i) in idx.iter().enumerate() {
        let mut w = 1.0;
        for (b, &j) in idx.iter().enumerate() {
            if a != b {
                w *= (t - times[j]) / (times[i] - times[j]);
            }
        }
        sum += w * v[i];
    }
    sum
}

/// The `count` points of the piece [lo, hi) nearest to `t`.
pub fn stencil(times: &[f64], lo: usize, hi: usize, t: f64, count: usize) -> Vec<usize> {
    let n = hi - lo;
    if n <= count {
        return (lo..hi).collect();
    }
    // first index in the piece with time >= t
    let j = lo + times[lo..hi].partition_point(|&x| x < t);
    let start = j.saturating_sub(count / 2).max(lo).min(hi - count);
    (start..start + count).collect()
}

pub fn interpolate(traj: &Trajectory, breakpoints: &[f64], times: &[f64]) -> Vec<Vec<f64>> {
    let mut out = vec![Vec::with_capacity(times.len()); traj.values.len()];
    for &t in times {
        let (lo, hi) = piece(&traj.times, breakpoints, t);
        let idx = stencil(&traj.times, lo, hi, t, 4);
        for (k, v) in traj.values.iter().enumerate() {
            // exact hits need no interpolation
            let val = match idx.iter().find(|&&i| traj.times[i] == t) {
                Some(&i) => v[i],
                None => lagrange(&traj.times, v, &idx, t),
            };
            out[k].push(val);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::integrate::Trajectory;

    #[test]
    fn cubic_interpolation_is_exact_on_cubics_and_never_crosses_a_breakpoint() {
        let times: Vec<f64> = (0..=10).map(|k| k as f64 * 0.1).collect();
        let f = |t: f64| if t <= 0.5 { 1.0 + t * t * t } else { -3.0 + t };
        let traj = Trajectory {
            labels: vec!["s".into()],
            times: times.clone(),
            values: vec![times.iter().map(|&t| f(t)).collect()],
        };
        let bps = [0.5, 1.0];
        let at = [0.05, 0.23, 0.47, 0.5, 0.52, 0.77, 0.99];
        let got = interpolate(&traj, &bps, &at);
        for (t, g) in at.iter().zip(&got[0]) {
            assert!((g - f(*t)).abs() < 1e-12, "t = {t}: {g} vs {}", f(*t));
        }
    }
}
