//! Source waveforms: their value at any time and the corners (breakpoints) where their slope changes.
//!
//! Values are left-continuous at a jump (a step or pulse edge of zero duration): at the corner itself the
//! waveform still has its earlier value and takes the new one just after. A run that lands on the corner
//! therefore sees the jump at the start of the next step, which is where it happens.

use std::f64::consts::PI;

#[derive(Debug, Clone, PartialEq)]
pub enum Waveform {
    Constant(f64),
    Step {
        from: f64,
        to: f64,
        at: f64,
        rise: f64,
    },
    Pulse {
        low: f64,
        high: f64,
        delay: f64,
        rise: f64,
        fall: f64,
        width: f64,
        period: Option<f64>,
    },
    Sine {
        offset: f64,
        amplitude: f64,
        frequency: f64,
        phase_deg: f64,
        delay: f64,
        decay: f64,
    },
    PiecewiseLinear(Vec<(f64, f64)>),
}

impl Waveform {
    /// The value at time `t` (left-continuous at jumps).
    pub fn value(&self, t: f64) -> f64 {
        match *self {
            Waveform::Constant(v) => v,
            Waveform::Step { from, to, at, rise } => ramp(t, at, rise, from, to),
            Waveform::Pulse {
                low,
                high,
                delay,
                rise,
                fall,
                width,
                period,
            } => {
                if t <= delay {
                    return low;
                }
                let mut tau = t - delay;
                if let Some(p) = period {
                    tau %= p;
                    if tau == 0.0 {
                        // exactly on a period boundary: the end of the previous low part
                        return low;
                    }
                }
                if tau <= rise {
                    if rise == 0.0 {
                        high
                    } else {
                        low + (high - low) * tau / rise
                    }
                } else if tau <= rise + width {
                    high
                } else if tau <= rise + width + fall {
                    if fall == 0.0 {
                        low
                    } else {
                        high + (low - high) * (tau - rise - width) / fall
                    }
                } else {
                    low
                }
            }
            Waveform::Sine {
                offset,
                amplitude,
                frequency,
                phase_deg,
                delay,
                decay,
            } => {
                let phase = phase_deg * PI / 180.0;
                if t <= delay {
                    offset + amplitude * phase.sin()
                } else {
                    let s = t - delay;
                    offset
                        + amplitude * (2.0 * PI * frequency * s + phase).sin() * (-decay * s).exp()
                }
            }
            Waveform::PiecewiseLinear(ref pts) => pwl_value(pts, t),
        }
    }

    /// Every corner of the waveform in [0, stop], sorted, without duplicates.
    pub fn corners(&self, stop: f64) -> Vec<f64> {
        let mut out = Vec::new();
        match *self {
            Waveform::Constant(_) => {}
            Waveform::Step { at, rise, .. } => {
                out.push(at);
                if rise > 0.0 {
                    out.push(at + rise);
                }
            }
            Waveform::Pulse {
                delay,
                rise,
                fall,
                width,
                period,
                ..
            } => {
                let offsets = [0.0, rise, rise + width, rise + width + fall];
                let mut k = 0u64;
                loop {
                    let base = match period {
                        Some(p) => delay + k as f64 * p,
                        None => delay,
                    };
                    if base > stop {
                        break;
                    }
                    for o in offsets {
                        out.push(base + o);
                    }
                    k += 1;
                    if period.is_none() || k > 10_000_000 {
                        break;
                    }
                }
            }
            Waveform::Sine { delay, .. } => out.push(delay),
            Waveform::PiecewiseLinear(ref pts) => out.extend(pts.iter().map(|p| p.0)),
        }
        out.retain(|&t| (0.0..=stop).contains(&t));
        out.sort_by(f64::total_cmp);
        out.dedup();
        out
    }

    /// True where the waveform jumps (a zero-duration edge) somewhere.
    pub fn has_jump(&self) -> bool {
        match *self {
            Waveform::Step { rise, from, to, .. } => rise == 0.0 && from != to,
            Waveform::Pulse {
                rise,
                fall,
                low,
                high,
                ..
            } => (rise == 0.0 || fall == 0.0) && low != high,
            _ => false,
        }
    }

    /// At least as many corners as `corners(stop)` gives, counted without building them (for the
    /// breakpoint limit: a pulse train up to a stop of 1e30 s is counted, not walked).
    pub fn corner_count_estimate(&self, stop: f64) -> f64 {
        match *self {
            Waveform::Constant(_) => 0.0,
            Waveform::Step { .. } => 2.0,
            Waveform::Pulse {
                delay,
                period: Some(p),
                ..
            } if p > 0.0 => 4.0 * ((stop - delay).max(0.0) / p + 1.0),
            Waveform::Pulse { .. } => 4.0,
            Waveform::Sine { .. } => 1.0,
            Waveform::PiecewiseLinear(ref pts) => pts.len() as f64,
        }
    }
}

fn ramp(t: f64, at: f64, dur: f64, from: f64, to: f64) -> f64 {
    if t <= at {
        from
    } else if t >= at + dur {
        to
    } else {
        from + (to - from) * (t - at) / dur
    }
}

fn pwl_value(pts: &[(f64, f64)], t: f64) -> f64 {
    match pts {
        [] => 0.0,
        [first, ..] if t <= first.0 => first.1,
        [.., last] if t >= last.0 => last.1,
        _ => {
            // first index whose time is >= t; pts[i-1].0 < t <= pts[i].0
            let i = pts.partition_point(|p| p.0 < t);
            let (t0, v0) = pts[i - 1];
            let (t1, v1) = pts[i];
            v0 + (v1 - v0) * (t - t0) / (t1 - t0)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn step_is_left_continuous_at_an_ideal_jump() {
        let w = Waveform::Step {
            from: 0.0,
            to: 1.0,
            at: 1.0,
            rise: 0.0,
        };
        assert_eq!(w.value(1.0), 0.0);
        assert_eq!(w.value(1.0 + 1e-12), 1.0);
        assert_eq!(w.corners(5.0), vec![1.0]);
    }

    #[test]
    fn pulse_train_corners_and_values() {
        let w = Waveform::Pulse {
            low: 0.0,
            high: 2.0,
            delay: 1.0,
            rise: 1.0,
            fall: 1.0,
            width: 2.0,
            period: Some(6.0),
        };
        assert_eq!(w.value(0.5), 0.0);
        assert_eq!(w.value(1.5), 1.0);
        assert_eq!(w.value(3.0), 2.0);
        assert_eq!(w.value(4.5), 1.0);
        assert_eq!(w.value(6.0), 0.0);
        assert_eq!(w.value(7.5), 1.0);
        assert_eq!(w.corners(8.0), vec![1.0, 2.0, 4.0, 5.0, 7.0, 8.0]);
    }

    #[test]
    fn pwl_interpolates_and_holds_ends() {
        let w = Waveform::PiecewiseLinear(vec![(1.0, 0.0), (2.0, 4.0), (4.0, 0.0)]);
        assert_eq!(w.value(0.0), 0.0);
        assert_eq!(w.value(1.5), 2.0);
        assert_eq!(w.value(3.0), 2.0);
        assert_eq!(w.value(9.0), 0.0);
        assert_eq!(w.corners(3.0), vec![1.0, 2.0]);
    }

    #[test]
    fn sine_with_delay_and_decay() {
        let w = Waveform::Sine {
            offset: 1.0,
            amplitude: 2.0,
            frequency: 1.0,
            phase_deg: 90.0,
            delay: 0.5,
            decay: 0.0,
        };
        assert!((w.value(0.0) - 3.0).abs() < 1e-15);
        assert!((w.value(1.0) - (1.0 + 2.0 * (PI + PI / 2.0).sin())).abs() < 1e-12);
    }
}
