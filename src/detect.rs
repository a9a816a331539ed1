//! Detectors that tell the integrator's artefacts from the circuit's behaviour. Pure functions of a
//! waveform (its times and values), the reference at the same times when there is one, and the
//! circuit's poles; each finding becomes a flag with the figures that support it.
//!
//! - Numerical ringing: the step-to-step oscillation of a method that is not L-stable on a stiff mode
//!   (the trapezoidal rule's R(z) -> -1 as z -> -inf): successive differences alternate in sign over many
//!   consecutive steps, at the implied frequency 1/(2h), which sits near no pole of the circuit.
//! - Artificial damping: an oscillation whose amplitude the method loses period after period (|R(i w h)|
//!   < 1 for backward Euler, BDF2 and TR-BDF2), measured as the decay of the run's amplitude against the
//!   reference's with a 95% confidence interval.
//! - Phase error: the run's oscillation drifting in time against the reference's.

use crate::audit::{EvidenceValue, Flag, FlagKind};
use crate::poles::{nearest_pole, Pole};
use crate::settings::MethodName;
use statrs::distribution::{ContinuousCDF, StudentsT};
use std::f64::consts::PI;

/// Fewest consecutive alternating differences that count as step-synchronous oscillation.
pub const MIN_ALTERNATIONS: usize = 8;
/// An alternation this close (relative) to a pole's frequency may be the circuit's own.
const POLE_MATCH: f64 = 0.2;

fn num(name: &str, v: f64) -> (String, EvidenceValue) {
    (name.to_string(), EvidenceValue::Number(v))
}

fn text(name: &str, v: &str) -> (String, EvidenceValue) {
    (name.to_string(), EvidenceValue::Text(v.to_string()))
}

/// A run of consecutive sample indices [start, end] whose successive differences alternate in sign.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Alternation {
    pub start: usize,
    pub end: usize,
}

impl Alternation {
    /// Number of alternating differences in the run.
    pub fn differences(&self) -> usize {
        self.end - self.start
    }
}

/// Runs of at least `min` consecutive differences alternating in sign. Differences smaller than `floor`
/// count as no change and break a run.
pub fn alternations(v: &[f64], floor: f64, min: usize) -> Vec<Alternation> {
    let mut out = Vec::new();
    if v.len() < 3 {
        return out;
    }
    let d: Vec<f64> = v.windows(2).map(|w| w[1] - w[0]).collect();
    let mut start = 0;
    for j in 1..=d.len() {
        let continues =
            j < d.len() && d[j].abs() > floor && d[j - 1].abs() > floor && d[j] * d[j - 1] < 0.0;
        if !continues {
            // differences start..j alternate: samples start..=j
            if j - start >= min {
                out.push(Alternation { start, end: j });
            }
            start = j;
        }
    }
    out
}

/// The amplitude of the step-to-step alternating component over samples [a, b], from the half distance
/// of each interior sample from the line through its neighbours (exact for a smooth signal plus
/// A (-1)^j with locally linear smooth part): the largest value sustained over four consecutive
/// samples. Sustained, because one corner of the waveform also leaves a sample off the line; the
/// largest, because the alternation of a method that is not L-stable decays from where it was excited.
pub fn alternating_amplitude(t: &[f64], v: &[f64], a: usize, b: usize) -> f64 {
    let devs: Vec<f64> = (a.max(1)..b.min(v.len() - 1))
        .map(|j| {
            let (h1, h2) = (t[j] - t[j - 1], t[j + 1] - t[j]);
            let line = (v[j - 1] * h2 + v[j + 1] * h1) / (h1 + h2);
            0.5 * (v[j] - line).abs()
        })
        .collect();
    devs.windows(4.min(devs.len()).max(1))
        .map(|w| w.iter().fold(f64::INFINITY, |m: f64, &d| m.min(d)))
        .fold(0.0, f64::max)
}

fn median(mut v: Vec<f64>) -> f64 {
    if v.is_empty() {
        return 0.0;
    }
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Step-synchronous oscillation in a waveform. With a reference (at the same times) the amplitude is
/// measured on the error and the reference must not alternate there; without one (a waveform from
/// elsewhere) on the samples alone. Flags when the amplitude is at least a quarter of `target * peak`.
pub fn numerical_ringing(
    signal: &str,
    t: &[f64],
    v: &[f64],
    reference: Option<&[f64]>,
    peak: f64,
    target: f64,
    poles: &[Pole],
) -> Vec<Flag> {
    let mut flags = Vec::new();
    let floor = 1e-12 * peak;
    for run in alternations(v, floor, MIN_ALTERNATIONS) {
        let (a, b) = (run.start, run.end);
        let amplitude = match reference {
            Some(r) => {
                // the reference alternating at the same samples would make this the circuit's own
                let ref_alt = alternations(&r[a..=b], floor, MIN_ALTERNATIONS)
                    .iter()
                    .map(|x| x.differences())
                    .sum::<usize>();
                if 2 * ref_alt > run.differences() {
                    continue;
                }
                let err: Vec<f64> = v.iter().zip(r).map(|(x, y)| x - y).collect();
                alternating_amplitude(t, &err, a, b)
            }
            None => alternating_amplitude(t, v, a, b),
        };
        if amplitude < 0.25 * target * peak {
            continue;
        }
        let h = median(t[a..=b].windows(2).map(|w| w[1] - w[0]).collect());
        let implied = 1.0 / (2.0 * h);
        let near = nearest_pole(poles, implied);
        if let Some((_, dist)) = near {
            if dist < POLE_MATCH {
                continue;
            }
        }
        let mut evidence = vec![
            num("alternating_steps", run.differences() as f64),
            num("amplitude", amplitude),
            num("amplitude_over_peak", amplitude / peak),
            num("local_step", h),
            num("implied_frequency_hz", implied),
        ];
        match near {
            Some((p, dist)) => {
                evidence.push(num("nearest_pole_hz", p.frequency_hz()));
                evidence.push(num("nearest_pole_distance", dist));
            }
            None => evidence.push(text("nearest_pole_hz", "none")),
        }
        flags.push(Flag {
            kind: FlagKind::NumericalRinging,
            signal: signal.to_string(),
            t_start: t[a],
            t_end: t[b],
            severity: amplitude / (target * peak),
            evidence,
        });
    }
    flags
}

/// The complex stability function R(z) of a method (for BDF2 the principal root of its characteristic
/// equation (3 - 2z) zeta^2 - 4 zeta + 1 = 0), as (re, im).
pub fn stability_function(method: MethodName, zr: f64, zi: f64) -> (f64, f64) {
    let div = |a: (f64, f64), b: (f64, f64)| {
        let d = b.0 * b.0 + b.1 * b.1;
        ((a.0 * b.0 + a.1 * b.1) / d, (a.1 * b.0 - a.0 * b.1) / d)
    };
    let mul = |a: (f64, f64), b: (f64, f64)| (a.0 * b.0 - a.1 * b.1, a.0 * b.1 + a.1 * b.0);
    match method {
        MethodName::BackwardEuler => div((1.0, 0.0), (1.0 - zr, -zi)),
        MethodName::Trapezoidal => div((1.0 + zr / 2.0, zi / 2.0), (1.0 - zr / 2.0, -zi / 2.0)),
        MethodName::TrBdf2 => {
            let g = 2.0 - 2f64.sqrt();
            let yg = div(
                (1.0 + g * zr / 2.0, g * zi / 2.0),
                (1.0 - g * zr / 2.0, -g * zi / 2.0),
            );
            let num = (
                (yg.0 - (1.0 - g).powi(2)) / (g * (2.0 - g)),
                yg.1 / (g * (2.0 - g)),
            );
            let k = (1.0 - g) / (2.0 - g);
            div(num, (1.0 - k * zr, -k * zi))
        }
        MethodName::Bdf2 => {
            // roots of a zeta^2 + b zeta + c with a = 3 - 2z, b = -4, c = 1
            let a = (3.0 - 2.0 * zr, -2.0 * zi);
            let disc = (16.0 - 4.0 * a.0, -4.0 * a.1); // b^2 - 4ac
            let r = disc.0.hypot(disc.1).sqrt();
            let th = disc.1.atan2(disc.0) / 2.0;
            let s = (r * th.cos(), r * th.sin());
            let two_a = (2.0 * a.0, 2.0 * a.1);
            let r1 = div((4.0 + s.0, s.1), two_a);
            let r2 = div((4.0 - s.0, -s.1), two_a);
            // the principal root is the one nearer e^z
            let ez = mul((zr.exp(), 0.0), (zi.cos(), zi.sin()));
            let d1 = (r1.0 - ez.0).hypot(r1.1 - ez.1);
            let d2 = (r2.0 - ez.0).hypot(r2.1 - ez.1);
            if d1 <= d2 {
                r1
            } else {
                r2
            }
        }
    }
}

/// The amplitude a method loses per period on a mode s = re + j im with step h, beyond the mode's own
/// decay: 1 - |R(s h)|^(T / h) / exp(re T), T = 2 pi / im.
pub fn theoretical_loss_per_period(method: MethodName, pole: Pole, h: f64) -> f64 {
    let period = 2.0 * PI / pole.im.abs();
    let (r, i) = stability_function(method, pole.re * h, pole.im.abs() * h);
    let per_step = r.hypot(i);
    1.0 - (per_step.ln() * period / h - pole.re * period).exp()
}

/// Time-weighted RMS of v minus its mean over [t0, t1], from the samples inside (None with fewer than 4).
fn window_rms(t: &[f64], v: &[f64], t0: f64, t1: f64) -> Option<f64> {
    let a = t.partition_point(|&x| x < t0);
    let b = t.partition_point(|&x| x <= t1);
    if b < a + 4 {
        return None;
    }
    let (ts, vs) = (&t[a..b], &v[a..b]);
    let span = ts[ts.len() - 1] - ts[0];
    if span <= 0.0 {
        return None;
    }
    let integ = |f: &dyn Fn(f64) -> f64| -> f64 {
        ts.windows(2)
            .zip(vs.windows(2))
            .map(|(tw, vw)| 0.5 * (f(vw[0]) + f(vw[1])) * (tw[1] - tw[0]))
            .sum::<f64>()
    };
    let mean = integ(&|x| x) / span;
    let ms = integ(&|x| (x - mean) * (x - mean)) / span;
    Some(ms.max(0.0).sqrt())
}

/// The amplitude of v over [t0, t1] as a sinusoid of angular frequency `omega`: the least-squares fit
/// of a cos(w t) + b sin(w t) + c to the samples inside, sqrt(a^2 + b^2). Far less sensitive to where the
/// samples fall than a peak or an RMS (None with fewer than 5 samples or a singular fit).
fn window_amplitude(t: &[f64], v: &[f64], t0: f64, t1: f64, omega: f64) -> Option<f64> {
    let a = t.partition_point(|&x| x < t0);
    let b = t.partition_point(|&x| x <= t1);
    if b < a + 5 {
        return None;
    }
    let tm = 0.5 * (t0 + t1);
    let mut m = nalgebra::Matrix3::<f64>::zeros();
    let mut r = nalgebra::Vector3::<f64>::zeros();
    for j in a..b {
        let ph = omega * (t[j] - tm);
        let f = nalgebra::Vector3::new(ph.cos(), ph.sin(), 1.0);
        m += f * f.transpose();
        r += f * v[j];
    }
    let sol = m.lu().solve(&r)?;
    let amp = sol[0].hypot(sol[1]);
    amp.is_finite().then_some(amp)
}

/// Least-squares slope of y against x with its standard error (None with fewer than 3 points).
fn slope_with_error(x: &[f64], y: &[f64]) -> Option<(f64, f64)> {
    let n = x.len();
    if n < 3 {
        return None;
    }
    let nf = n as f64;
    let mx = x.iter().sum::<f64>() / nf;
    let my = y.iter().sum::<f64>() / nf;
    let sxx: f64 = x.iter().map(|a| (a - mx) * (a - mx)).sum();
    if sxx <= 0.0 {
        return None;
    }
    let b = x
        .iter()
        .zip(y)
        .map(|(a, c)| (a - mx) * (c - my))
        .sum::<f64>()
        / sxx;
    let a0 = my - b * mx;
    let ss: f64 = x
        .iter()
        .zip(y)
        .map(|(a, c)| (c - a0 - b * a) * (c - a0 - b * a))
        .sum();
    let se = (ss / (nf - 2.0) / sxx).sqrt();
    Some((b, se))
}

/// The dominant oscillation: the complex pole with the highest Q above 2, if any.
pub fn oscillating_pole(poles: &[Pole]) -> Option<Pole> {
    poles
        .iter()
        .filter(|p| p.im > 0.0 && p.q().is_none_or(|q| q > 2.0))
        .max_by(|a, b| {
            let qa = a.q().unwrap_or(f64::INFINITY);
            let qb = b.q().unwrap_or(f64::INFINITY);
            qa.total_cmp(&qb)
        })
        .copied()
}

/// Measured amplitude decay of a run against its reference, period by period.
#[derive(Debug, Clone, PartialEq)]
pub struct Decay {
    pub period: f64,
    /// Run amplitude / reference amplitude in each period window.
    pub ratios: Vec<f64>,
    /// Fitted extra loss per period, 1 - exp(b T), and its 95% interval (from the slope's interval).
    pub loss_per_period: f64,
    pub loss_interval: (f64, f64),
    pub points_per_period: f64,
    /// The first and last cycle boundaries of the reference that were compared.
    pub first: f64,
    pub last: f64,
}

/// Upward crossings of `level` by v, linearly interpolated.
fn crossings_of(t: &[f64], v: &[f64], level: f64) -> Vec<f64> {
    let mut out = Vec::new();
    for j in 1..v.len() {
        let (a, b) = (v[j - 1] - level, v[j] - level);
        if a < 0.0 && b >= 0.0 {
            out.push(t[j - 1] + (t[j] - t[j - 1]) * (-a) / (b - a));
        }
    }
    out
}

/// Time-weighted mean of v over [t0, t1] (the samples inside).
fn window_mean(t: &[f64], v: &[f64], t0: f64, t1: f64) -> Option<f64> {
    let a = t.partition_point(|&x| x < t0);
    let b = t.partition_point(|&x| x <= t1);
    let (ts, vs) = (&t[a..b], &v[a..b]);
    let span = ts.last()? - ts.first()?;
    (span > 0.0).then(|| {
        ts.windows(2)
            .zip(vs.windows(2))
            .map(|(tw, vw)| 0.5 * (vw[0] + vw[1]) * (tw[1] - tw[0]))
            .sum::<f64>()
            / span
    })
}

/// The level an oscillation swings about: the reference's mean over the whole cycles of the second half
/// of the record, where the start-up transient has faded.
fn centre(t: &[f64], reference: &[f64]) -> f64 {
    let (Some(&t0), Some(&t1)) = (t.first(), t.last()) else {
        return 0.0;
    };
    let mid = 0.5 * (t0 + t1);
    let rough = window_mean(t, reference, mid, t1).unwrap_or(0.0);
    let c: Vec<f64> = crossings_of(t, reference, rough)
        .into_iter()
        .filter(|&x| x >= mid)
        .collect();
    match (c.first(), c.last()) {
        (Some(&a), Some(&b)) if b > a => window_mean(t, reference, a, b).unwrap_or(rough),
        _ => rough,
    }
}

/// The run's amplitude against the reference's, cycle by cycle: each one's RMS over its own cycles
/// (between successive upward zero crossings), matched by cycle number, so a phase or frequency error
/// does not bias the comparison. `period` is the oscillation's period (for the per-period loss).
pub fn measure_decay(
    t: &[f64],
    v: &[f64],
    reference: &[f64],
    period: f64,
    peak: f64,
) -> Option<Decay> {
    let level = centre(t, reference);
    let (cv, cr) = (crossings_of(t, v, level), crossings_of(t, reference, level));
    let n = cv.len().min(cr.len());
    if n < 5 {
        return None;
    }
    // Each one's amplitude (a sinusoid fitted over each of its own cycles) at the cycle's centre time; the first
    // cycle holds the start-up transient (a multistep method's parasitic roots, a restart) and is skipped.
    let amplitudes = |c: &[f64], w: &[f64]| -> Vec<(f64, f64)> {
        let omega = 2.0 * PI * (c.len() - 1) as f64 / (c[c.len() - 1] - c[0]);
        (1..c.len() - 1)
            .filter_map(|k| {
                window_amplitude(t, w, c[k], c[k + 1], omega).map(|a| (0.5 * (c[k] + c[k + 1]), a))
            })
            .filter(|&(_, a)| a > 1e-9 * peak)
            .collect()
    };
    let (run_amp, ref_amp) = (amplitudes(&cv, v), amplitudes(&cr, reference));
    if ref_amp.len() < 2 {
        return None;
    }
    // The reference's amplitude at any time, log-linear between its cycle centres.
    let ref_at = |x: f64| -> f64 {
        let j = ref_amp
            .partition_point(|p| p.0 < x)
            .clamp(1, ref_amp.len() - 1);
        let ((x0, a0), (x1, a1)) = (ref_amp[j - 1], ref_amp[j]);
        (a0.ln() + (a1.ln() - a0.ln()) * (x - x0) / (x1 - x0)).exp()
    };
    let last_ref = ref_amp[ref_amp.len() - 1].0;
    let mut x = Vec::new();
    let mut y = Vec::new();
    let mut ratios = Vec::new();
    for &(xc, a) in run_amp.iter().filter(|p| p.0 <= last_ref) {
        let r = ref_at(xc);
        ratios.push(a / r);
        x.push(xc);
        y.push((a / r).ln());
    }
    let (b, se) = slope_with_error(&x, &y)?;
    let dof = (x.len() - 2) as f64;
    let tq = StudentsT::new(0.0, 1.0, dof).ok()?.inverse_cdf(0.975);
    let loss = |rate: f64| 1.0 - (rate * period).exp();
    let a0 = t.partition_point(|&q| q < cr[0]);
    let b0 = t.partition_point(|&q| q <= cr[n - 1]);
    let h = median(
        t[a0..b0.max(a0 + 2).min(t.len())]
            .windows(2)
            .map(|w| w[1] - w[0])
            .collect(),
    );
    Some(Decay {
        period,
        loss_per_period: loss(b),
        loss_interval: (loss(b + tq * se), loss(b - tq * se)),
        ratios,
        points_per_period: period / h,
        first: cr[0],
        last: cr[n - 1],
    })
}

/// Artificial damping of an oscillating signal: flags when the amplitude lost by the last full period
/// exceeds the target (relative to the peak) and the 95% interval of the extra loss excludes zero.
#[allow(clippy::too_many_arguments)]
pub fn artificial_damping(
    signal: &str,
    t: &[f64],
    v: &[f64],
    reference: &[f64],
    peak: f64,
    target: f64,
    poles: &[Pole],
    method: MethodName,
) -> Vec<Flag> {
    let Some(pole) = oscillating_pole(poles) else {
        return Vec::new();
    };
    let period = 2.0 * PI / pole.im;
    let Some(d) = measure_decay(t, v, reference, period, peak) else {
        return Vec::new();
    };
    let last_ratio = *d.ratios.last().unwrap_or(&1.0);
    // the amplitude missing in the last compared cycle, relative to the peak
    let ref_amp = window_rms(t, reference, d.last - period, d.last).unwrap_or(0.0) * 2f64.sqrt();
    let deficit = (1.0 - last_ratio) * ref_amp / peak;
    if !(deficit > target && d.loss_interval.0 > 0.0) {
        return Vec::new();
    }
    let (start, end) = (d.first, d.last);
    let n = d.ratios.len();
    let h = period / d.points_per_period;
    vec![Flag {
        kind: FlagKind::ArtificialDamping,
        signal: signal.to_string(),
        t_start: start,
        t_end: end,
        severity: deficit / target,
        evidence: vec![
            num("amplitude_ratio_last_period", last_ratio),
            num("amplitude_deficit_over_peak", deficit),
            num("extra_loss_per_period", d.loss_per_period),
            num("extra_loss_per_period_low", d.loss_interval.0),
            num("extra_loss_per_period_high", d.loss_interval.1),
            num("points_per_period", d.points_per_period),
            num(
                "theoretical_loss_per_period",
                theoretical_loss_per_period(method, pole, h),
            ),
            num("period", period),
            num("periods_measured", n as f64),
            text("method", method.as_str()),
        ],
    }]
}

/// Phase drift of an oscillating signal against its reference: the time shift of the last matched
/// upward zero crossing. Flags when the error the drift causes, 2 pi (shift / period) times the
/// oscillation's amplitude over the peak, exceeds the target.
pub fn phase_error(
    signal: &str,
    t: &[f64],
    v: &[f64],
    reference: &[f64],
    peak: f64,
    target: f64,
    poles: &[Pole],
) -> Vec<Flag> {
    let Some(pole) = oscillating_pole(poles) else {
        return Vec::new();
    };
    let period = 2.0 * PI / pole.im;
    let level = centre(t, reference);
    let (cv, cr) = (crossings_of(t, v, level), crossings_of(t, reference, level));
    if cv.len() < 3 || cr.len() < 3 || cv.len().abs_diff(cr.len()) > 1 {
        return Vec::new();
    }
    let n = cv.len().min(cr.len());
    let shift = cv[n - 1] - cr[n - 1];
    let amp = {
        let (lo, hi) = reference
            .iter()
            .fold((f64::MAX, f64::MIN), |(a, b), &x| (a.min(x), b.max(x)));
        0.5 * (hi - lo)
    };
    let effect = 2.0 * PI * shift.abs() / period * amp / peak;
    if effect <= target {
        return Vec::new();
    }
    let span = cr[n - 1] - cr[0];
    let period_run = (cv[n - 1] - cv[0]) / (n - 1) as f64;
    let period_ref = span / (n - 1) as f64;
    vec![Flag {
        kind: FlagKind::PhaseError,
        signal: signal.to_string(),
        t_start: cr[0],
        t_end: cr[n - 1],
        severity: effect / target,
        evidence: vec![
            num("drift_seconds", shift),
            num("drift_degrees", 360.0 * shift / period),
            num("period_run", period_run),
            num("period_reference", period_ref),
            num("error_from_drift_over_peak", effect),
        ],
    }]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_alternation_and_its_amplitude() {
        let t: Vec<f64> = (0..200)
            .map(|k| k as f64 * 0.01 + if k % 3 == 0 { 0.002 } else { 0.0 })
            .collect();
        let v: Vec<f64> = t
            .iter()
            .enumerate()
            .map(|(k, &x)| {
                x * 0.5
                    + if (60..140).contains(&k) {
                        0.01 * if k % 2 == 0 { 1.0 } else { -1.0 }
                    } else {
                        0.0
                    }
            })
            .collect();
        let runs = alternations(&v, 1e-12, MIN_ALTERNATIONS);
        assert_eq!(runs.len(), 1, "{runs:?}");
        let a = alternating_amplitude(&t, &v, runs[0].start, runs[0].end);
        assert!((a - 0.01).abs() < 2e-3, "{a}");
    }

    #[test]
    fn stability_functions_on_the_imaginary_axis() {
        // |R(i y)| = 1 for the trapezoidal rule (A-stable, conservative on the imaginary axis);
        // backward Euler 1 / sqrt(1 + y^2) (Hairer & Wanner, Solving ODEs II, IV.3).
        for y in [0.1, 0.6, 2.0] {
            let (r, i) = stability_function(MethodName::Trapezoidal, 0.0, y);
            assert!((r.hypot(i) - 1.0).abs() < 1e-15);
            let (r, i) = stability_function(MethodName::BackwardEuler, 0.0, y);
            assert!((r.hypot(i) - 1.0 / (1.0 + y * y).sqrt()).abs() < 1e-15);
            let (r, i) = stability_function(MethodName::Bdf2, 0.0, y);
            assert!(r.hypot(i) < 1.0);
        }
    }
}

/// The frequency of the oscillation in v from the mean spacing of its local maxima (None with fewer
/// than three maxima above a small fraction of its swing).
pub fn oscillation_frequency(t: &[f64], v: &[f64]) -> Option<f64> {
    let (lo, hi) = v
        .iter()
        .fold((f64::MAX, f64::MIN), |(a, b), &x| (a.min(x), b.max(x)));
    let swing = hi - lo;
    if swing.is_nan() || swing <= 0.0 {
        return None;
    }
    let maxima: Vec<f64> = (1..v.len().saturating_sub(1))
        .filter(|&j| v[j] > v[j - 1] && v[j] >= v[j + 1] && v[j] - lo > 1e-3 * swing)
        .map(|j| t[j])
        .collect();
    (maxima.len() >= 3).then(|| (maxima.len() - 1) as f64 / (maxima[maxima.len() - 1] - maxima[0]))
}

/// What `diagnose` concludes about a ringing waveform.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Verdict {
    Numerical,
    Physical,
    Inconclusive,
}

impl Verdict {
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Numerical => "numerical",
            Verdict::Physical => "physical",
            Verdict::Inconclusive => "inconclusive",
        }
    }
}

/// One rerun's observations.
#[derive(Debug, Clone, PartialEq)]
pub struct Observation {
    pub label: String,
    pub method: MethodName,
    /// The median step of the run.
    pub step: f64,
    /// The longest run of alternating differences and its implied frequency 1/(2h).
    pub alternating_steps: usize,
    pub implied_frequency_hz: Option<f64>,
    /// The alternation's amplitude over the signal's peak.
    pub alternating_amplitude: f64,
    /// The oscillation frequency from the spacing of maxima.
    pub oscillation_hz: Option<f64>,
}

/// Observes one waveform for `diagnose`.
pub fn observe(label: &str, method: MethodName, t: &[f64], v: &[f64]) -> Observation {
    let peak = v
        .iter()
        .fold(0.0f64, |a, x| a.max(x.abs()))
        .max(f64::MIN_POSITIVE);
    let runs = alternations(v, 1e-12 * peak, MIN_ALTERNATIONS);
    let longest = runs.iter().max_by_key(|r| r.differences()).copied();
    let step = median(t.windows(2).map(|w| w[1] - w[0]).collect());
    let (alternating_steps, implied, amp) = match longest {
        Some(r) => {
            let h = median(t[r.start..=r.end].windows(2).map(|w| w[1] - w[0]).collect());
            (
                r.differences(),
                Some(1.0 / (2.0 * h)),
                alternating_amplitude(t, v, r.start, r.end) / peak,
            )
        }
        None => (0, None, 0.0),
    };
    Observation {
        label: label.to_string(),
        method,
        step,
        alternating_steps,
        implied_frequency_hz: implied,
        alternating_amplitude: amp,
        oscillation_hz: oscillation_frequency(t, v),
    }
}

/// The verdict from the original run, its refinements (step limit halved, quartered) and an L-stable
/// rerun. Numerical ringing alternates step to step, follows 1/h under refinement and vanishes under an
/// L-stable method; physical ringing keeps its frequency in seconds, matches a pole and survives.
pub fn verdict(
    original: &Observation,
    refined: &[Observation],
    l_stable: &Observation,
    poles: &[Pole],
    amplitude_floor: f64,
) -> (Verdict, Option<Pole>) {
    let alternates = |o: &Observation| {
        o.alternating_steps >= MIN_ALTERNATIONS && o.alternating_amplitude >= amplitude_floor
    };
    if alternates(original) {
        let vanishes = !alternates(l_stable)
            || l_stable.alternating_amplitude < 0.1 * original.alternating_amplitude;
        let follows_step =
            refined.iter().all(
                |r| match (r.implied_frequency_hz, original.implied_frequency_hz) {
                    (Some(fr), Some(fo)) => {
                        (fr / fo - original.step / r.step).abs() <= 0.25 * (original.step / r.step)
                    }
                    (None, _) => true,
                    _ => false,
                },
            );
        let near_pole = original
            .implied_frequency_hz
            .and_then(|f| nearest_pole(poles, f))
            .is_some_and(|(_, d)| d < POLE_MATCH);
        if vanishes && follows_step && !near_pole {
            return (Verdict::Numerical, None);
        }
        return (Verdict::Inconclusive, None);
    }
    let Some(f) = original.oscillation_hz else {
        return (Verdict::Inconclusive, None);
    };
    // The frequency survives refinement; the L-stable rerun (which may damp it) still oscillates
    // without alternating.
    let stable = refined
        .iter()
        .all(|r| r.oscillation_hz.is_some_and(|g| (g - f).abs() <= 0.05 * f) && !alternates(r))
        && l_stable.oscillation_hz.is_some()
        && !alternates(l_stable);
    match nearest_pole(poles, f) {
        Some((p, d)) if stable && d <= 0.1 => (Verdict::Physical, Some(p)),
        _ => (Verdict::Inconclusive, None),
    }
}
