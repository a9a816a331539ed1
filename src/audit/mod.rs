//! The audit: every cell of the plan run in parallel, each measured at its own time points against one
//! reference, with a recommendation of the cheapest cell that meets the target.
//!
//! Each cell is a pure function of the circuit, its settings and the reference, so the results do not
//! depend on the number of threads or on the order in which cells finish; only `cpu_seconds` varies.

pub mod measure;
pub mod plan;
pub mod results;
pub mod shard;

use crate::circuit::Circuit;
use crate::integrate::{self, Stats, Trajectory};
use crate::reference::{Reference, ReferenceError, ReferenceKind};

use crate::settings::{MethodName, Overrides, Settings};
use measure::SignalError;
pub use plan::Plan;
use rayon::prelude::*;

/// One flag raised on a cell by a detector.
#[derive(Debug, Clone, PartialEq)]
pub struct Flag {
    pub kind: FlagKind,
    pub signal: String,
    pub t_start: f64,
    pub t_end: f64,
    /// How much the finding matters against the target (its amplitude over the target).
    pub severity: f64,
    /// Named figures that support the finding.
    pub evidence: Vec<(String, EvidenceValue)>,
}

#[derive(Debug, Clone, PartialEq)]
pub enum EvidenceValue {
    Number(f64),
    Text(String),
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum FlagKind {
    NumericalRinging,
    ArtificialDamping,
    PhaseError,
}

impl FlagKind {
    pub fn as_str(self) -> &'static str {
        match self {
            FlagKind::NumericalRinging => "numerical_ringing",
            FlagKind::ArtificialDamping => "artificial_damping",
            FlagKind::PhaseError => "phase_error",
        }
    }
    /// Whether the flag disqualifies a cell from meeting the target.
    pub fn disqualifies(self) -> bool {
        matches!(
            self,
            FlagKind::NumericalRinging | FlagKind::ArtificialDamping
        )
    }
}

/// The outcome of one cell.
#[derive(Debug, Clone)]
pub struct CellResult {
    pub overrides: Overrides,
    pub settings: Settings,
    /// `None` when the cell ran; the reason when it failed.
    pub failure: Option<String>,
    pub max_error: Option<f64>,
    pub signals: Vec<(String, SignalError)>,
    pub stats: Stats,
    pub meets_target: bool,
    pub flags: Vec<Flag>,
    /// The run's waveform (kept for the report).
    pub trajectory: Option<Trajectory>,
}

impl CellResult {
    pub fn ok(&self) -> bool {
        self.failure.is_none()
    }
}

/// Per method: the observed order and the work-precision pairs.
#[derive(Debug, Clone, PartialEq)]
pub struct MethodSummary {
    pub method: MethodName,
    pub theoretical_order: u32,
    /// -slope of log(max_error) against log(steps) over the tightest three rtol cells of the method's
    /// main ladder that ran (None with fewer than two).
    pub observed_order: Option<f64>,
    /// Indices of the cells the order was measured on.
    pub order_cells: Vec<usize>,
    /// Indices of every cell of the method, in grid order (its work-precision pairs).
    pub cells: Vec<usize>,
}

/// A finished audit.
pub struct Audit {
    pub circuit: String,
    pub labels: Vec<String>,
    pub reference: Reference,
    /// The peak |reference| of each watched signal (over a fine uniform grid and the breakpoints).
    pub peaks: Vec<f64>,
    pub plan: Plan,
    pub target: f64,
    pub cells: Vec<CellResult>,
    pub recommendation: Option<usize>,
    pub recommendation_reason: String,
    pub methods: Vec<MethodSummary>,
    pub threads: usize,
    /// The circuit's poles at its start state (empty when they could not be computed).
    pub poles: Vec<crate::poles::Pole>,
}

/// How to run an audit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Options {
    /// Worker threads (1 runs the cells one after another).
    pub jobs: usize,
    /// Wall-clock budget per cell in seconds.
    pub cell_seconds: f64,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            jobs: 1,
            cell_seconds: 600.0,
        }
    }
}

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum AuditError {
    #[error("the reference could not be built: {0}")]
    Reference(#[from] ReferenceError),
    #[error("{0}")]
    Plan(#[from] plan::PlanError),
    #[error("cannot start {jobs} worker threads: {message}")]
    Threads { jobs: usize, message: String },
}

/// The settings of one cell: the engine's defaults, then the circuit's `run:` map, then the cell's own.
pub fn cell_settings(circuit: &Circuit, o: &Overrides) -> Settings {
    let mut s = Settings::new(o.method.unwrap_or(MethodName::TrBdf2));
    s.apply(&circuit.run.settings);
    s.apply(o);
    s
}

/// Number of uniform points used to find each signal's peak.
const PEAK_GRID: usize = 4001;

/// What every cell of a circuit is measured against: the reference, each signal's peak, the poles.
pub struct Prepared {
    pub reference: Reference,
    pub labels: Vec<String>,
    /// The peak |reference| of each watched signal (over a fine uniform grid and the breakpoints).
    pub peaks: Vec<f64>,
    /// The circuit's poles at its start state (empty when they could not be computed).
    pub poles: Vec<crate::poles::Pole>,
}

/// Builds the reference, the peaks and the poles once for all cells of `circuit`.
pub fn prepare(circuit: &Circuit) -> Result<Prepared, AuditError> {
    let base = cell_settings(circuit, &Overrides::default());
    let reference = Reference::build(circuit, &base)?;
    let labels = reference.labels.clone();
    let mut peak_times = Reference::uniform_times(circuit.run.stop, PEAK_GRID);
    peak_times.extend(circuit.breakpoints());
    peak_times.sort_by(f64::total_cmp);
    let peaks: Vec<f64> = reference
        .evaluate(&peak_times)
        .iter()
        .map(|v| v.iter().fold(0.0f64, |a, x| a.max(x.abs())))
        .map(|p| if p > 0.0 { p } else { 1.0 })
        .collect();
    let poles = crate::poles::poles(circuit, &base).unwrap_or_default();
    Ok(Prepared {
        reference,
        labels,
        peaks,
        poles,
    })
}

/// Runs every cell of `plan` on `circuit`. `progress` is called once per finished cell with whether it
/// failed (from worker threads).
pub fn run(
    circuit: &Circuit,
    plan: &Plan,
    options: &Options,
    progress: &(dyn Fn(bool) + Sync),
) -> Result<Audit, AuditError> {
    plan.validate()?;
    let jobs = options.jobs.max(1);
    let pool = pool(jobs)?;
    let overrides = plan.overrides();
    let target = plan.target;
    // Everything, the reference included, runs on a pool of exactly `jobs` threads.
    let (prepared, cells) =
        pool.install(|| -> Result<(Prepared, Vec<CellResult>), AuditError> {
            let prepared = prepare(circuit)?;
            let cells = overrides
                .par_iter()
                .map(|o| {
                    let r = run_cell(circuit, &prepared, o, target, options.cell_seconds);
                    progress(!r.ok());
                    r
                })
                .collect();
            Ok((prepared, cells))
        })?;
    Ok(assemble(circuit, plan, prepared, cells, jobs))
}

/// A rayon pool of exactly `jobs` threads.
pub(crate) fn pool(jobs: usize) -> Result<rayon::ThreadPool, AuditError> {
    rayon::ThreadPoolBuilder::new()
        .num_threads(jobs)
        .build()
        .map_err(|e| AuditError::Threads {
            jobs,
            message: e.to_string(),
        })
}

/// The audit from its measured cells (in plan order): the recommendation and the per-method summaries.
/// Shared by [`run`] and by merging shards, so both give the same audit from the same cells.
pub fn assemble(
    circuit: &Circuit,
    plan: &Plan,
    prepared: Prepared,
    cells: Vec<CellResult>,
    threads: usize,
) -> Audit {
    let (recommendation, recommendation_reason) = recommend(&cells, plan.target);
    let methods = summarize_methods(plan, &cells);
    let Prepared {
        reference,
        labels,
        peaks,
        poles,
    } = prepared;
    Audit {
        circuit: circuit.name.clone(),
        labels,
        reference,
        peaks,
        plan: plan.clone(),
        target: plan.target,
        cells,
        recommendation,
        recommendation_reason,
        methods,
        threads,
        poles,
    }
}

/// What one cell's run left behind, before it is measured: everything a shard stores.
#[derive(Debug, Clone, PartialEq)]
pub struct CellRun {
    /// `None` when the engine ran to the stop time; its error message when it did not.
    pub failure: Option<String>,
    pub stats: Stats,
    /// The watched signals at every accepted step (`None` when the run failed).
    pub trajectory: Option<Trajectory>,
}

/// Runs one cell's setting on the engine, without measuring it.
pub fn simulate_cell(circuit: &Circuit, o: &Overrides, cell_seconds: f64) -> (Settings, CellRun) {
    let settings = settings_for_cell(circuit, o, cell_seconds);
    let run = match integrate::simulate(circuit, &settings) {
        Ok(r) => CellRun {
            failure: None,
            stats: r.stats,
            trajectory: Some(r.trajectory),
        },
        Err(e) => CellRun {
            failure: Some(e.to_string()),
            stats: Stats::default(),
            trajectory: None,
        },
    };
    (settings, run)
}

/// A cell's settings with its wall-clock budget.
pub fn settings_for_cell(circuit: &Circuit, o: &Overrides, cell_seconds: f64) -> Settings {
    let mut settings = cell_settings(circuit, o);
    settings.steps.time_budget = Some(cell_seconds);
    settings
}

/// Measures one cell's run against the prepared reference, with the detectors.
pub fn measure_cell(
    prepared: &Prepared,
    o: &Overrides,
    settings: Settings,
    run: CellRun,
    target: f64,
) -> CellResult {
    let failed = |failure: String, stats: Stats| CellResult {
        overrides: *o,
        settings,
        failure: Some(failure),
        max_error: None,
        signals: Vec::new(),
        stats,
        meets_target: false,
        flags: Vec::new(),
        trajectory: None,
    };
    let trajectory = match (run.failure, run.trajectory) {
        (None, Some(t)) => t,
        (Some(f), _) => return failed(f, run.stats),
        (None, None) => return failed("the run left no waveform".into(), run.stats),
    };
    let at_cell = prepared.reference.evaluate(&trajectory.times);
    let errors = measure::signal_errors(&trajectory, &at_cell, &prepared.peaks);
    let max_error = errors.iter().map(|e| e.max_error).fold(0.0f64, f64::max);
    if !max_error.is_finite() {
        return failed(
            "the run produced values that are not finite".into(),
            run.stats,
        );
    }
    let flags = detect_flags(&trajectory, &at_cell, prepared, target, settings.method);
    let meets_target = max_error <= target && !flags.iter().any(|f| f.kind.disqualifies());
    CellResult {
        overrides: *o,
        settings,
        failure: None,
        max_error: Some(max_error),
        signals: prepared.labels.iter().cloned().zip(errors).collect(),
        stats: run.stats,
        meets_target,
        flags,
        trajectory: Some(trajectory),
    }
}

/// Runs one cell and measures it against the prepared reference, with the detectors.
pub fn run_cell(
    circuit: &Circuit,
    prepared: &Prepared,
    o: &Overrides,
    target: f64,
    cell_seconds: f64,
) -> CellResult {
    let (settings, run) = simulate_cell(circuit, o, cell_seconds);
    measure_cell(prepared, o, settings, run, target)
}

/// Every detector on every watched signal of a run.
pub fn detect_flags(
    run: &Trajectory,
    reference: &[Vec<f64>],
    prepared: &Prepared,
    target: f64,
    method: MethodName,
) -> Vec<Flag> {
    use crate::detect;
    let mut flags = Vec::new();
    for (k, label) in prepared.labels.iter().enumerate() {
        let (t, v, r, peak) = (&run.times, &run.values[k], &reference[k], prepared.peaks[k]);
        flags.extend(detect::numerical_ringing(
            label,
            t,
            v,
            Some(r),
            peak,
            target,
            &prepared.poles,
        ));
        flags.extend(detect::artificial_damping(
            label,
            t,
            v,
            r,
            peak,
            target,
            &prepared.poles,
            method,
        ));
        flags.extend(detect::phase_error(
            label,
            t,
            v,
            r,
            peak,
            target,
            &prepared.poles,
        ));
    }
    flags
}

/// The passing cell with the least work: fewest Newton iterations, then fewest steps, then grid order
/// (never cpu time, which varies between runs).
fn recommend(cells: &[CellResult], target: f64) -> (Option<usize>, String) {
    let passing: Vec<usize> = (0..cells.len())
        .filter(|&i| cells[i].meets_target)
        .collect();
    let key = |i: usize| (cells[i].stats.newton_iterations, cells[i].stats.steps, i);
    let Some(&best) = passing.iter().min_by_key(|&&i| key(i)) else {
        let ran = cells.iter().filter(|c| c.ok()).count();
        let best_error = cells
            .iter()
            .filter_map(|c| c.max_error)
            .fold(f64::INFINITY, f64::min);
        let reason = if ran == 0 {
            "no cell ran to the end; see each cell's failure".to_string()
        } else if best_error <= target {
            format!("cells reach the target {target:e} in error but every one is flagged; see the flags")
        } else {
            format!(
                "no cell meets the target {target:e}: the smallest max error is {best_error:.3e}; add tighter rtol values or a max_step to the plan"
            )
        };
        return (None, reason);
    };
    let c = &cells[best];
    let s = &c.settings;
    let runner_up = passing
        .iter()
        .filter(|&&i| i != best)
        .min_by_key(|&&i| key(i));
    let mut reason = format!(
        "{} at rtol {:e} meets the target {target:e} (max error {:.3e}) with the least work: {} Newton iterations, {} steps",
        s.method.as_str(),
        s.tolerances.rtol,
        c.max_error.unwrap_or(0.0),
        c.stats.newton_iterations,
        c.stats.steps
    );
    if let Some(&r) = runner_up {
        reason.push_str(&format!(
            " (next: {} at rtol {:e}, {} Newton iterations)",
            cells[r].settings.method.as_str(),
            cells[r].settings.tolerances.rtol,
            cells[r].stats.newton_iterations
        ));
    }
    (Some(best), reason)
}

fn summarize_methods(plan: &Plan, cells: &[CellResult]) -> Vec<MethodSummary> {
    plan.methods
        .iter()
        .map(|&m| {
            let all: Vec<usize> = (0..cells.len())
                .filter(|&i| cells[i].settings.method == m)
                .collect();
            // The method's main ladder: every setting but rtol at the plan's first value.
            let first = |i: usize| {
                let o = &cells[i].overrides;
                o.atol_v == plan.atol_v[0]
                    && o.atol_i == plan.atol_i[0]
                    && o.lte_factor == plan.lte_factor[0]
                    && o.max_step == plan.max_step[0]
                    && o.fixed_step == plan.fixed_step[0]
                    && o.restart == plan.restart[0]
                    && o.scale == plan.scale[0]
                    && o.step_budget == plan.step_budget[0]
            };
            let mut ladder: Vec<usize> = all
                .iter()
                .copied()
                .filter(|&i| first(i) && cells[i].ok())
                .collect();
            ladder.sort_by(|&a, &b| {
                cells[b]
                    .settings
                    .tolerances
                    .rtol
                    .total_cmp(&cells[a].settings.tolerances.rtol)
            });
            let tight: Vec<usize> = ladder.iter().rev().take(3).rev().copied().collect();
            let pts: Vec<(f64, f64)> = tight
                .iter()
                .map(|&i| {
                    (
                        cells[i].stats.steps as f64,
                        cells[i].max_error.unwrap_or(f64::NAN),
                    )
                })
                .collect();
            MethodSummary {
                method: m,
                theoretical_order: integrate::methods::info(m).order,
                observed_order: measure::log_log_slope(&pts).map(|s| -s),
                order_cells: tight,
                cells: all,
            }
        })
        .collect()
}

impl Audit {
    /// Whether any cell meets the target.
    pub fn target_met(&self) -> bool {
        self.recommendation.is_some()
    }

    pub fn reference_kind(&self) -> &ReferenceKind {
        &self.reference.kind
    }
}
