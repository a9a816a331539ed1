//! The transient driver: one loop that owns acceptance, rejection, step sizes and breakpoints, for every
//! method. Methods (`methods.rs`) only attempt a step and say how their error is estimated.
//!
//! Step control: the local truncation error of each unknown is compared with
//! `lte_factor * (rtol * scale + atol)`, atol being `atol_v` for voltages and `atol_i` for currents.
//! Methods without an embedded estimate have their error estimated from the divided difference of order
//! p + 1 of the last accepted points (common practice); where too few points of the same formula exist,
//! after a breakpoint or a change of formula, the step is checked by step doubling instead (one step of h
//! against two of h / 2, and the two half steps are kept). Steps land exactly on every breakpoint.

pub mod error;
pub mod methods;
pub mod newton;
pub mod resample;
pub mod start;

use crate::circuit::Circuit;
use crate::equations::{System, UnknownKind};
use crate::settings::{MethodName, Restart, Scale, Settings, Start};
pub use error::RunError;
use methods::{Estimate, Method, Point, Solved, StageSolver, Trial};
use newton::{Equations, Newton, NewtonFailure, NewtonTolerances, Stage};
use std::collections::VecDeque;
use std::time::Instant;

/// What a run cost.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Stats {
    /// Accepted steps.
    pub steps: u64,
    pub rejected_steps: u64,
    pub newton_iterations: u64,
    pub factorizations: u64,
    /// Wall-clock seconds of the run on its thread (the only field that varies between identical runs).
    pub cpu_seconds: f64,
}

/// The watched signals at every accepted time point.
#[derive(Debug, Clone, PartialEq)]
pub struct Trajectory {
    pub labels: Vec<String>,
    pub times: Vec<f64>,
    /// `values[k][j]`: signal `k` at `times[j]`.
    pub values: Vec<Vec<f64>>,
}

impl Trajectory {
    pub fn signal(&self, label: &str) -> Option<&[f64]> {
        self.labels
            .iter()
            .position(|l| l == label)
            .map(|k| self.values[k].as_slice())
    }

    /// The signals at `times`, interpolated within the pieces between `breakpoints`
    /// (see `resample`).
    pub fn resample(&self, breakpoints: &[f64], times: &[f64]) -> Trajectory {
        Trajectory {
            labels: self.labels.clone(),
            times: times.to_vec(),
            values: resample::interpolate(self, breakpoints, times),
        }
    }
}

/// A finished run.
#[derive(Debug, Clone)]
pub struct Run {
    pub trajectory: Trajectory,
    pub stats: Stats,
    /// The state at the last accepted point.
    pub final_state: Vec<f64>,
    /// The largest |voltage| and |current| of any unknown that controls the step, over the run.
    pub peak_voltage: f64,
    pub peak_current: f64,
}

/// Runs `circuit` with `settings` (the circuit's own `run:` settings are not applied here; see
/// `Settings::apply`).
pub fn simulate(circuit: &Circuit, settings: &Settings) -> Result<Run, RunError> {
    let sys = System::new(circuit);
    simulate_system(&sys, circuit.run.stop, &circuit.breakpoints(), settings)
}

/// The state at t = 0 for the given start.
pub fn initial_state(
    sys: &System,
    settings: &Settings,
    newton: &mut Newton,
) -> Result<Vec<f64>, RunError> {
    let tol = NewtonTolerances::from_step_tolerances(&settings.tolerances, 100);
    match settings.start {
        Start::OperatingPoint => start::operating_point(sys, &tol, newton),
        Start::InitialConditions => start::initial_conditions(sys, &tol, newton),
    }
}

/// The work of a step apart from its solves, per stored entry of G and C and per step, in units of
/// a floating-point operation of the LU (the hold rule depends only on their ratio to the LU's work).
/// Measured with `cargo bench --bench floor` on RC ladders of 1000 stages and meshes of 100 x 100:
/// the non-LU part of a step is about two solves of the ladder's factors.
const STEP_WORK_PER_ENTRY: f64 = 2.0;
const STEP_WORK_FIXED: f64 = 2000.0;
/// The most a held step may have to grow before it grows, whatever the cost model says: a step kept
/// until it could grow by g runs on average at about (g - 1) / (g ln g) of its allowed length (0.72 at
/// g = 2, 0.61 at g = 3), so past this the steps it adds are sure and the factorizations it saves are
/// an estimate.
const HOLD_CEILING: f64 = 3.0;

/// The driver's view of the history, and its stage solver.
struct Solver<'a> {
    sys: &'a System,
    newton: Newton,
    tol: NewtonTolerances,
    cur: Point,
    prev: Option<Point>,
    /// Extrapolate Newton guesses only from points after this time (the last breakpoint).
    segment_start: f64,
    /// Stored entries of G and C, for the hold rule's cost of a step.
    step_entries: f64,
    /// Vectors of the circuit's size that earlier steps no longer need (`StageSolver::buffer`).
    spare: Vec<Vec<f64>>,
}

/// The most vectors `Solver::spare` keeps: a step of any method gives back fewer.
const SPARE_VECTORS: usize = 16;

impl Solver<'_> {
    /// The Newton guess for a step to `t`: the line through the last two points of this segment.
    fn guess(&self, t: f64) -> Vec<f64> {
        match &self.prev {
            Some(p) if p.t >= self.segment_start && self.cur.t > p.t => {
                let s = (t - self.cur.t) / (self.cur.t - p.t);
                self.cur
                    .x
                    .iter()
                    .zip(&p.x)
                    .map(|(c, p)| c + s * (c - p))
                    .collect()
            }
            _ => self.cur.x.clone(),
        }
    }
    /// The growth below which the present step is kept. After a breakpoint the allowed step of a
    /// smooth response grows in proportion to the time since it, h_opt = c (t - t_b) (the run climbs
    /// the decades of its time constants). Keeping the step until h_opt = g h and then growing to
    /// h_opt costs a factorization F and (g - 1) / c steps of work S per factor g of elapsed time, so
    /// per unit of ln(t - t_b) the cost is (F + S (g - 1) / c) / ln g, least where
    /// g ln g - g + 1 = c F / S (set the derivative in g to zero). The hold is that g, kept between
    /// `floor` (the `hold_growth` setting) and `ceiling` (`HOLD_CEILING`); `share` is the estimate of
    /// c, the allowed step over the time since the breakpoint. F and S come from the last
    /// factorization's operation counts plus the rest of a step (residuals, products, error norm),
    /// which the floor bench measures at about `STEP_WORK_PER_ENTRY` operations per stored matrix
    /// entry and `STEP_WORK_FIXED` per step. The dense LU gives no counts: `floor`.
    fn hold_growth(&self, floor: f64, ceiling: f64, solves: f64, share: f64) -> f64 {
        let Some((factor, step)) = self.work_counts(solves) else {
            return floor;
        };
        best_hold(
            share.clamp(0.0, 1.0) * factor / step,
            floor,
            ceiling.max(floor),
        )
    }

    /// Whether a factorization costs more than a step, by the same counts (false for the dense LU).
    fn factoring_costs_more_than_a_step(&self, solves: f64) -> bool {
        self.work_counts(solves)
            .is_some_and(|(factor, step)| factor > step)
    }

    /// The work F of a refactorization and S of a step with `solves` solves, in LU operations, from
    /// the last factorization's counts (None for the dense LU, which gives none).
    fn work_counts(&self, solves: f64) -> Option<(f64, f64)> {
        let (factor, solve) = self.newton.last_factorization()?.flops()?;
        let step = solves * solve + STEP_WORK_PER_ENTRY * self.step_entries + STEP_WORK_FIXED;
        Some((factor, step))
    }
}

/// The g in [floor, ceiling] with g ln g - g + 1 = k (the left side grows with g from 0 at g = 1), by
/// bisection.
fn best_hold(k: f64, floor: f64, ceiling: f64) -> f64 {
    let phi = |g: f64| g * g.ln() - g + 1.0;
    if k.is_nan() || k <= phi(floor) {
        return floor;
    }
    if k >= phi(ceiling) {
        return ceiling;
    }
    let (mut lo, mut hi) = (floor, ceiling);
    for _ in 0..40 {
        let mid = 0.5 * (lo + hi);
        if phi(mid) < k {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

impl StageSolver for Solver<'_> {
    fn current(&self) -> &Point {
        &self.cur
    }
    fn previous(&self) -> Option<&Point> {
        self.prev.as_ref()
    }
    fn solve(&mut self, alpha: f64, r: &[f64], t: f64) -> Result<Solved, NewtonFailure> {
        let stage = Stage {
            sys: self.sys,
            alpha,
            r,
            t,
            source_factor: 1.0,
            shunt: 0.0,
        };
        let x = match stage.jacobian_key() {
            Some(key) => {
                // A linear stage is (alpha C + G) x = b(t) + r: one solve, no guess needed.
                let mut x = self.buffer();
                self.sys.sources_into(t, 1.0, &mut x);
                for (xi, ri) in x.iter_mut().zip(r) {
                    *xi += ri;
                }
                self.newton.solve_linear(&stage, key, &mut x)?;
                x
            }
            None => {
                let mut x = self.guess(t);
                self.newton.solve(&stage, &mut x, &self.tol)?;
                x
            }
        };
        let mut q = self.buffer();
        self.sys.charge_into(&x, &mut q);
        let mut qdot = self.buffer();
        for ((d, q), r) in qdot.iter_mut().zip(&q).zip(r) {
            *d = alpha * q - r;
        }
        Ok(Solved { x, q, qdot })
    }
    fn solve_with_last_jacobian(&mut self, v: &mut [f64]) {
        self.newton.solve_with_last(v);
    }
    fn buffer(&mut self) -> Vec<f64> {
        let n = self.sys.size();
        let mut v = self.spare.pop().unwrap_or_default();
        v.resize(n, 0.0);
        v
    }
    fn recycle(&mut self, v: Vec<f64>) {
        if self.spare.len() < SPARE_VECTORS {
            self.spare.push(v);
        }
    }
}

/// Local-error test against the tolerances.
struct ErrorNorm<'a> {
    settings: &'a Settings,
    /// The unknowns that control the step, as maximal runs of one kind (see `runs`): MNA numbers the
    /// node voltages first and the branch currents after them, so a circuit has a few runs, and each
    /// pass over them is a plain loop over slices.
    runs: Vec<(UnknownKind, std::ops::Range<usize>)>,
    /// Largest |x_i| over the accepted points so far (kept for the `signal_peak` scale only).
    peak: Vec<f64>,
    peak_v: f64,
    peak_i: f64,
}

/// The largest |a_i| (a NaN is skipped, as `f64::max` skips it) and whether any a_i is NaN, in four
/// lanes: a maximum does not depend on the order in which it is taken, and the lanes vectorise.
fn lane_peaks(a: &[f64]) -> (f64, bool) {
    let mut m = [0.0f64; 4];
    let mut nan = [false; 4];
    let chunks = a.chunks_exact(4);
    let rest = chunks.remainder();
    for x in chunks {
        for k in 0..4 {
            let v = x[k].abs();
            m[k] = if v > m[k] { v } else { m[k] };
            nan[k] |= v.is_nan();
        }
    }
    for x in rest {
        let v = x.abs();
        m[0] = if v > m[0] { v } else { m[0] };
        nan[0] |= v.is_nan();
    }
    let top = m.iter().fold(0.0f64, |t, &v| if v > t { v } else { t });
    (top, nan.iter().any(|&n| n))
}

impl ErrorNorm<'_> {
    /// Which unknowns control the step, and of which kind, as maximal runs.
    fn runs(sys: &System) -> Vec<(UnknownKind, std::ops::Range<usize>)> {
        let mut runs: Vec<(UnknownKind, std::ops::Range<usize>)> = Vec::new();
        for (i, u) in sys.unknowns.iter().enumerate() {
            if !u.controls_step {
                continue;
            }
            match runs.last_mut() {
                Some((kind, r)) if *kind == u.kind && r.end == i => r.end = i + 1,
                _ => runs.push((u.kind, i..i + 1)),
            }
        }
        runs
    }

    /// The largest |x_i| of each kind over the unknowns that control the step (a NaN is skipped, as
    /// `f64::max` skips it).
    fn kind_peaks(&self, x: &[f64]) -> (f64, f64) {
        let (mut v_peak, mut i_peak) = (0.0f64, 0.0f64);
        for (kind, r) in &self.runs {
            let (m, _) = lane_peaks(&x[r.clone()]);
            match kind {
                UnknownKind::Voltage => v_peak = v_peak.max(m),
                UnknownKind::Current => i_peak = i_peak.max(m),
            }
        }
        (v_peak, i_peak)
    }

    fn observe(&mut self, x: &[f64]) {
        // Only the `signal_peak` scale reads each unknown's own peak.
        if self.settings.tolerances.scale == Scale::SignalPeak {
            for (p, v) in self.peak.iter_mut().zip(x) {
                let a = v.abs();
                if a > *p {
                    *p = a;
                }
            }
        }
        let (v_peak, i_peak) = self.kind_peaks(x);
        self.peak_v = self.peak_v.max(v_peak);
        self.peak_i = self.peak_i.max(i_peak);
    }

    /// max_i |err_i| / (lte_factor (rtol scale_i + atol_i)) over the unknowns that control the step
    /// (infinite when one of them is NaN). "So far" includes the trial point: its own values for
    /// `signal_peak` and `value`, and for `circuit_peak` the largest of each kind in it, so that a
    /// circuit starting from rest measures its first step against the source that drives it and not
    /// against each node's own tiny value.
    fn ratio(&self, err: &[f64], old: &[f64], new: &[f64]) -> f64 {
        let t = &self.settings.tolerances;
        let atol = |kind: &UnknownKind| match kind {
            UnknownKind::Voltage => t.atol_v,
            UnknownKind::Current => t.atol_i,
        };
        let mut nan = false;
        let mut worst: f64 = 0.0;
        match t.scale {
            Scale::CircuitPeak => {
                // The scale of every unknown is its kind's peak, which bounds |old_i| (an accepted
                // point, observed) and |new_i|: one denominator per kind, and one division each.
                let (mut err_v, mut err_i) = (0.0f64, 0.0f64);
                for (kind, r) in &self.runs {
                    let (e, e_nan) = lane_peaks(&err[r.clone()]);
                    nan |= e_nan;
                    match kind {
                        UnknownKind::Voltage => err_v = err_v.max(e),
                        UnknownKind::Current => err_i = err_i.max(e),
                    }
                }
                let (new_v, new_i) = self.kind_peaks(new);
                for (e, peak, atol) in [
                    (err_v, self.peak_v.max(new_v), t.atol_v),
                    (err_i, self.peak_i.max(new_i), t.atol_i),
                ] {
                    let r = e / (t.lte_factor * (t.rtol * peak + atol));
                    nan |= r.is_nan();
                    worst = worst.max(r);
                }
            }
            Scale::SignalPeak | Scale::Value => {
                let own_peak = t.scale == Scale::SignalPeak;
                for (kind, run) in &self.runs {
                    let atol = atol(kind);
                    for i in run.clone() {
                        let here = old[i].abs().max(new[i].abs());
                        let scale = if own_peak {
                            self.peak[i].max(here)
                        } else {
                            here
                        };
                        let r = err[i].abs() / (t.lte_factor * (t.rtol * scale + atol));
                        nan |= r.is_nan();
                        worst = if r > worst { r } else { worst };
                    }
                }
            }
        }
        if nan {
            f64::INFINITY
        } else {
            worst
        }
    }
}

/// Weights w_j such that sum_j w_j x_j is the divided difference of order `pts.len() - 1` of the
/// points, times its factorial: an estimate of the derivative of that order. The divided difference is
/// the weighted sum sum_j x_j / prod_{k != j} (t_j - t_k) (Hairer, Norsett & Wanner, Solving ODEs I,
/// II.9), so the weights are computed once per step and each unknown costs a few multiply-adds.
fn derivative_weights(pts: &[(f64, &[f64])]) -> Vec<f64> {
    let m = pts.len();
    let factorial: f64 = (1..m).map(|k| k as f64).product();
    (0..m)
        .map(|j| {
            let denom: f64 = (0..m)
                .filter(|&k| k != j)
                .map(|k| pts[j].0 - pts[k].0)
                .product();
            factorial / denom
        })
        .collect()
}

/// `coefficient` times the derivative that the divided difference of `pts` estimates, per unknown,
/// into `out` (see `derivative_weights`).
fn derivative_estimate(pts: &[(f64, &[f64])], coefficient: f64, out: &mut Vec<f64>) {
    let w = derivative_weights(pts);
    out.clear();
    match pts {
        // The second-order methods' four points, spelled out for the hot path.
        [(_, a), (_, b), (_, d), (_, e)] => {
            let (w0, w1, w2, w3) = (w[0], w[1], w[2], w[3]);
            out.resize(a.len(), 0.0);
            for ((((o, a), b), d), e) in out.iter_mut().zip(*a).zip(*b).zip(*d).zip(*e) {
                *o = (w0 * a + w1 * b + w2 * d + w3 * e) * coefficient;
            }
        }
        _ => out.extend(
            (0..pts.first().map_or(0, |p| p.1.len()))
                .map(|i| w.iter().zip(pts).map(|(w, (_, x))| w * x[i]).sum::<f64>() * coefficient),
        ),
    }
}

struct Recorder<'a> {
    sys: &'a System,
    traj: Trajectory,
}

impl Recorder<'_> {
    fn record(&mut self, t: f64, x: &[f64]) {
        self.traj.times.push(t);
        for (k, v) in self.sys.probe_values(x, t).into_iter().enumerate() {
            self.traj.values[k].push(v);
        }
    }
}

/// How many points of history the divided-difference estimate of an order-p formula needs.
fn points_needed(order: u32) -> usize {
    order as usize + 1
}

/// Step shrinks after a breakpoint: the first step is a quarter of the step before it.
const RESTART_FRACTION: f64 = 0.25;
/// Smallest factor by which a step rejected by step doubling is shortened. Doubling checks the first
/// step after a breakpoint, where the run has no history and the first guess (a hundredth of the
/// segment) can be many decades too long for a stiff jump; the doubling estimate itself (two half
/// steps against one) is then the only evidence, so it may shorten by more than `shrink_limit`.
const DOUBLING_SHRINK_LIMIT: f64 = 1e-4;
/// A step that fails this close after a breakpoint (as a fraction of the run) failed at the jump.
const JUST_AFTER_JUMP: f64 = 1e-6;
/// Step after a Newton failure, as a fraction of the failed step (common practice).
const NEWTON_CUT: f64 = 0.25;
/// A nonlinear circuit's Jacobian can be numerically singular at a far-off Newton iterate (a diode
/// driven deep into conduction by a long step's guess): such a step is cut like any Newton failure, up
/// to this many times in a row (a step 0.25^8, about 1.5e-5, of the first), after which the
/// singularity is reported. A linear circuit's singular matrix is structural and is reported at once.
const SINGULAR_CUTS: u32 = 8;

/// Runs the assembled equations from t = 0 to `stop`, landing on each of `breakpoints` (sorted, in
/// (0, stop], ending with stop).
pub fn simulate_system(
    sys: &System,
    stop: f64,
    breakpoints: &[f64],
    settings: &Settings,
) -> Result<Run, RunError> {
    settings.validate()?;
    let clock = Instant::now();
    let sc = &settings.steps;
    // Steps no longer than a cap cannot cover the run in fewer than stop / cap of them: refuse at
    // once rather than spend the whole budget first (a max step of 1 ps over 60 ms needs 6e10).
    let cap = sc.fixed_step.unwrap_or(sc.effective_max_step(stop));
    let ratio = stop / cap;
    let least = if (ratio - ratio.round()).abs() <= 1e-9 * ratio {
        ratio.round()
    } else {
        ratio.ceil()
    };
    if least > sc.step_budget as f64 {
        return Err(RunError::BudgetBelowLeastSteps {
            step: cap,
            fixed: sc.fixed_step.is_some(),
            stop,
            least,
            budget: sc.step_budget,
        });
    }
    let mut start_newton = Newton::for_system(sys);
    start_newton.set_backend(settings.linear_solver);
    let x0 = initial_state(sys, settings, &mut start_newton)?;
    let n = sys.size();
    let mut q0 = vec![0.0; n];
    sys.charge_into(&x0, &mut q0);
    // The derivative at t = 0 on the rows that hold a charge: b(0) - i(x0, 0).
    let mut b0 = vec![0.0; n];
    let mut i0 = vec![0.0; n];
    sys.sources_into(0.0, 1.0, &mut b0);
    sys.current_into(&x0, 0.0, &mut i0, None);
    let qdot0: Vec<f64> = (0..n)
        .map(|r| {
            if sys.dynamic_rows[r] {
                b0[r] - i0[r]
            } else {
                0.0
            }
        })
        .collect();

    let mut solver = Solver {
        sys,
        // The start's Newton carries on: its Jacobian keeps the pivot sequence its sparse LU learned,
        // so the first step refactors instead of searching for pivots again (a pivot that no longer
        // suits the step matrix makes the LU pivot anew). Its cached factorizations are of other
        // matrices and are dropped.
        newton: {
            let mut nw = start_newton;
            nw.forget();
            nw
        },
        tol: NewtonTolerances::from_step_tolerances(&settings.tolerances, 30),
        cur: Point {
            t: 0.0,
            x: x0.clone(),
            q: q0,
            qdot: qdot0,
        },
        prev: None,
        segment_start: 0.0,
        step_entries: (sys.g().stored() + sys.c().stored()) as f64,
        spare: Vec::new(),
    };
    let mut norm = ErrorNorm {
        settings,
        runs: ErrorNorm::runs(sys),
        peak: vec![0.0; n],
        peak_v: 0.0,
        peak_i: 0.0,
    };
    norm.observe(&x0);
    let mut rec = Recorder {
        sys,
        traj: Trajectory {
            labels: sys.probe_labels(),
            times: Vec::new(),
            values: vec![Vec::new(); sys.probe_labels().len()],
        },
    };
    rec.record(0.0, &x0);

    let mut stats = Stats::default();
    let h_max = sc.effective_max_step(stop);
    let h_min = sc.min_step_fraction * stop;
    let main_method = methods::method(settings.method);
    let growth = main_method
        .max_step_ratio()
        .map_or(sc.growth_limit, |m| m.min(sc.growth_limit));
    let be = methods::method(MethodName::BackwardEuler);
    let mut bp_idx = 0;
    let mut h = sc
        .fixed_step
        .unwrap_or(h_max.min(breakpoints.first().copied().unwrap_or(stop)) * 0.01);
    let mut at_restart = true;
    let mut singular_cuts = 0u32;
    let mut window: VecDeque<(f64, Vec<f64>)> = VecDeque::from([(0.0, x0)]);
    let mut window_formula: Option<MethodName> = None;
    // The error estimate of each trial, kept between steps.
    let mut err_buf: Vec<f64> = Vec::with_capacity(n);

    while solver.cur.t < stop {
        if let Some(limit) = sc.time_budget {
            if (stats.steps + stats.rejected_steps) % 64 == 0
                && clock.elapsed().as_secs_f64() > limit
            {
                return Err(RunError::TimeBudget {
                    time: solver.cur.t,
                    seconds: limit,
                });
            }
        }
        if stats.steps + stats.rejected_steps >= sc.step_budget {
            return Err(RunError::StepBudget {
                time: solver.cur.t,
                stop,
                budget: sc.step_budget,
            });
        }
        let t = solver.cur.t;
        let formula: &dyn Method = if at_restart && sc.restart == Restart::BackwardEuler {
            be
        } else {
            main_method
        };
        // Land on the next breakpoint without leaving a sliver.
        let bp = breakpoints.get(bp_idx).copied().unwrap_or(stop);
        let limit = if sc.fixed_step.is_some() {
            f64::INFINITY
        } else {
            h_max
        };
        let mut hh = h.min(limit);
        let remaining = bp - t;
        let mut lands = false;
        if hh >= remaining {
            hh = remaining;
            lands = true;
        } else if remaining - hh < 0.1 * hh {
            if remaining <= limit {
                hh = remaining;
                lands = true;
            } else {
                hh = remaining / 2.0;
            }
        }
        if hh < h_min || t + hh == t {
            let method = methods::info(settings.method);
            if sc.restart == Restart::Same
                && !method.l_stable
                && t - solver.segment_start <= JUST_AFTER_JUMP * stop
            {
                return Err(RunError::StepTooSmallAfterJump {
                    time: t,
                    step: hh,
                    jump: solver.segment_start,
                    method: settings.method.as_str(),
                });
            }
            return Err(RunError::StepTooSmall { time: t, step: hh });
        }

        let mut trial = match formula.attempt(&mut solver, hh) {
            Ok(tr) => {
                singular_cuts = 0;
                tr
            }
            Err(failure) => {
                cut_or_report(failure, sys, &mut singular_cuts, t + hh)?;
                stats.rejected_steps += 1;
                h = hh * NEWTON_CUT;
                continue;
            }
        };

        // The formula actually used decides which history is valid for the estimate.
        if window_formula != Some(trial.used) {
            let last = window
                .pop_back()
                .expect("the window holds the present point");
            window.clear();
            window.push_back(last);
            window_formula = Some(trial.used);
        }

        let p = trial.order as f64;
        // `base` is the step the estimate's `factor` applies to (h, or h / 2 after step doubling).
        let hold = |solver: &Solver, factor: f64, base: f64| {
            let since = t + hh - solver.segment_start;
            let share = if since > 0.0 {
                factor * base / since
            } else {
                1.0
            };
            solver.hold_growth(
                sc.hold_growth,
                HOLD_CEILING,
                main_method.solves_per_step(),
                share,
            )
        };
        let keep_shrinks = solver.factoring_costs_more_than_a_step(main_method.solves_per_step());
        let (accepted_points, next_h): (Vec<Solved>, f64) = if sc.fixed_step.is_some() {
            (vec![trial.point], sc.fixed_step.unwrap_or(hh))
        } else {
            let ratio = match &mut trial.estimate {
                Estimate::Embedded(e) => {
                    let r = norm.ratio(e, &solver.cur.x, &trial.point.x);
                    solver.recycle(std::mem::take(e));
                    Some(r)
                }
                Estimate::FromHistory { coefficient }
                    if window.len() >= points_needed(trial.order) =>
                {
                    let k = points_needed(trial.order);
                    let mut pts: Vec<(f64, &[f64])> = window
                        .iter()
                        .skip(window.len() - k)
                        .map(|(t, x)| (*t, x.as_slice()))
                        .collect();
                    pts.push((t + hh, trial.point.x.as_slice()));
                    derivative_estimate(&pts, *coefficient, &mut err_buf);
                    Some(norm.ratio(&err_buf, &solver.cur.x, &trial.point.x))
                }
                Estimate::FromHistory { .. } => None,
            };
            match ratio {
                Some(ratio) => {
                    let factor = step_factor(ratio, p, sc.safety);
                    if ratio <= 1.0 {
                        (
                            vec![trial.point],
                            held(hh, factor, hold(&solver, factor, hh), growth, keep_shrinks),
                        )
                    } else {
                        stats.rejected_steps += 1;
                        h = hh * factor.clamp(sc.shrink_limit, 0.9);
                        continue;
                    }
                }
                None => {
                    // Step doubling with the formula that was used.
                    let used = methods::method(trial.used);
                    match double_check(&mut solver, used, &trial, hh, &norm, sc.safety) {
                        Ok(Doubled::Accept { mid, end, factor }) => (
                            vec![mid, end],
                            held(
                                hh / 2.0,
                                factor,
                                hold(&solver, factor, hh / 2.0),
                                growth,
                                keep_shrinks,
                            ),
                        ),
                        Ok(Doubled::Reject { factor }) => {
                            stats.rejected_steps += 1;
                            let floor = sc.shrink_limit.min(DOUBLING_SHRINK_LIMIT);
                            h = hh / 2.0 * factor.clamp(floor, 0.9);
                            continue;
                        }
                        Err(failure) => {
                            cut_or_report(failure, sys, &mut singular_cuts, t + hh)?;
                            stats.rejected_steps += 1;
                            h = hh * NEWTON_CUT;
                            continue;
                        }
                    }
                }
            }
        };

        let count = accepted_points.len();
        for (j, pt) in accepted_points.into_iter().enumerate() {
            let last = j + 1 == count;
            let tj = if last && lands {
                bp
            } else {
                t + hh * (j + 1) as f64 / count as f64
            };
            norm.observe(&pt.x);
            rec.record(tj, &pt.x);
            let mut kept = solver.buffer();
            kept.copy_from_slice(&pt.x);
            window.push_back((tj, kept));
            if window.len() > 4 {
                if let Some((_, v)) = window.pop_front() {
                    solver.recycle(v);
                }
            }
            let new = Point {
                t: tj,
                x: pt.x,
                q: pt.q,
                qdot: pt.qdot,
            };
            let before = std::mem::replace(&mut solver.cur, new);
            if let Some(old) = solver.prev.replace(before) {
                solver.recycle(old.x);
                solver.recycle(old.q);
                solver.recycle(old.qdot);
            }
            stats.steps += 1;
        }
        h = next_h;
        at_restart = false;
        if lands {
            bp_idx += 1;
            at_restart = true;
            solver.segment_start = bp;
            let last = window.pop_back().expect("just pushed");
            window.clear();
            window.push_back(last);
            window_formula = None;
            if sc.fixed_step.is_none() {
                h *= RESTART_FRACTION;
            }
        }
    }
    stats.newton_iterations = solver.newton.work.newton_iterations;
    stats.factorizations = solver.newton.work.factorizations;
    stats.cpu_seconds = clock.elapsed().as_secs_f64();
    Ok(Run {
        trajectory: rec.traj,
        stats,
        final_state: solver.cur.x,
        peak_voltage: norm.peak_v,
        peak_current: norm.peak_i,
    })
}

/// Whether a step whose Newton solve failed at `time` is cut (Ok) or ends the run: a singular Jacobian
/// of a linear circuit is structural and is reported at once; a nonlinear circuit's is cut up to
/// `SINGULAR_CUTS` times in a row (counted in `cuts`). Every other failure is cut.
fn cut_or_report(
    failure: NewtonFailure,
    sys: &System,
    cuts: &mut u32,
    time: f64,
) -> Result<(), RunError> {
    if let NewtonFailure::Singular { unknown } = failure {
        if sys.linear || *cuts >= SINGULAR_CUTS {
            return Err(RunError::Singular {
                time,
                unknown: sys.describe_unknown(unknown),
            });
        }
        *cuts += 1;
    }
    Ok(())
}

/// The next step after an accepted step `h` whose error allows growth by `factor`: at most
/// `growth_limit` times longer (the setting, or less where the method needs it), and `h` itself when the
/// growth would be less than `hold` (a linear circuit then reuses its factored Jacobian). An accepted
/// step whose estimate asks for a slightly shorter next step (`factor` in [safety, 1)) is also kept
/// when `keep_shrinks`, which the driver sets when a factorization costs more than a step: the shrink
/// would cost a factorization for certain, keeping it at worst one rejected step.
fn held(h: f64, factor: f64, hold: f64, growth_limit: f64, keep_shrinks: bool) -> f64 {
    if factor < hold && (factor >= 1.0 || keep_shrinks) {
        h
    } else {
        h * factor.min(growth_limit)
    }
}

/// The factor by which the step that produced error ratio `ratio` should change.
fn step_factor(ratio: f64, order: f64, safety: f64) -> f64 {
    if ratio <= 0.0 {
        return f64::INFINITY;
    }
    safety * ratio.powf(-1.0 / (order + 1.0))
}

enum Doubled {
    Accept {
        mid: Solved,
        end: Solved,
        factor: f64,
    },
    Reject {
        factor: f64,
    },
}

/// Checks `full` (one step of `h`) against two steps of `h / 2` with the same formula. The error of each
/// half step is (x_half - x_full) / (2 (2^p - 1)) (Richardson extrapolation; Hairer, Norsett & Wanner,
/// Solving ODEs I, II.4).
fn double_check(
    solver: &mut Solver,
    method: &dyn Method,
    full: &Trial,
    h: f64,
    norm: &ErrorNorm,
    safety: f64,
) -> Result<Doubled, NewtonFailure> {
    let half1 = method.attempt(solver, h / 2.0)?;
    let saved_cur = solver.cur.clone();
    let saved_prev = solver.prev.clone();
    let mid_point = Point {
        t: saved_cur.t + h / 2.0,
        x: half1.point.x.clone(),
        q: half1.point.q.clone(),
        qdot: half1.point.qdot.clone(),
    };
    solver.prev = Some(std::mem::replace(&mut solver.cur, mid_point));
    let half2 = method.attempt(solver, h / 2.0);
    solver.cur = saved_cur;
    solver.prev = saved_prev;
    let half2 = half2?;
    let p = full.order as f64;
    let denom = 2.0 * (2f64.powf(p) - 1.0);
    let (fine, coarse) = (&half2.point.x, &full.point.x);
    let err: Vec<f64> = fine
        .iter()
        .zip(coarse)
        .map(|(f, c)| (f - c) / denom)
        .collect();
    let ratio = norm.ratio(&err, &solver.cur.x, fine);
    let factor = step_factor(ratio, p, safety);
    Ok(if ratio <= 1.0 {
        Doubled::Accept {
            mid: half1.point,
            end: half2.point,
            factor,
        }
    } else {
        Doubled::Reject { factor }
    })
}

#[cfg(test)]
mod tests {
    use super::{best_hold, lane_peaks};

    /// The lane maximum equals a plain maximum of |a_i| that skips NaN, wherever the largest entry and
    /// a NaN sit (in the lanes or the remainder), and flags the NaN.
    #[test]
    fn lane_peaks_is_the_largest_magnitude_and_flags_nan() {
        for n in [0usize, 1, 3, 4, 5, 8, 11] {
            let base: Vec<f64> = (0..n).map(|i| ((i * 7) % 5) as f64 - 2.0).collect();
            for at in 0..n {
                let mut v = base.clone();
                v[at] = -9.5;
                assert_eq!(lane_peaks(&v), (9.5, false), "n = {n}, peak at {at}");
                let mut w = base.clone();
                w[at] = f64::NAN;
                let plain = w.iter().fold(0.0f64, |m, x| m.max(x.abs()));
                assert_eq!(lane_peaks(&w), (plain, true), "n = {n}, NaN at {at}");
            }
        }
        assert_eq!(lane_peaks(&[]), (0.0, false));
    }

    /// The hold solves g ln g - g + 1 = k inside its bounds, and clamps outside them.
    #[test]
    fn best_hold_inverts_its_cost_equation() {
        let phi = |g: f64| g * g.ln() - g + 1.0;
        for g in [1.6, 2.0, 2.5, 2.9] {
            assert!((best_hold(phi(g), 1.5, 3.0) - g).abs() < 1e-9, "g = {g}");
        }
        assert_eq!(best_hold(0.0, 1.5, 3.0), 1.5);
        assert_eq!(best_hold(f64::NAN, 1.5, 3.0), 1.5);
        assert_eq!(best_hold(100.0, 1.5, 3.0), 3.0);
    }
}
