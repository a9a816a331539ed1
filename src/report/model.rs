//! The report model: plain data taken from an audit (numbers already checked for finiteness, series
//! already decimated), so the rendering never touches the audit and the audit never knows about HTML.

use super::plots::{decimate_min_max, Colour, Marker};
use crate::audit::results::Provenance;
use crate::audit::{Audit, CellResult, EvidenceValue, FlagKind};
use crate::circuit::Circuit;
use crate::reference::Reference;
use crate::settings::{MethodName, Overrides};

/// Buckets per plotted series (two points each at most).
pub const BUCKETS: usize = 1000;
/// Uniform points at which the reference is drawn (plus the breakpoints).
const REFERENCE_POINTS: usize = 4001;
/// Zoomed flag windows drawn at most (the rest are listed in the flag table only).
pub const MAX_ZOOMS: usize = 24;

/// Every flag kind, in the order the report lists them.
pub const FLAG_KINDS: [FlagKind; 3] = [
    FlagKind::NumericalRinging,
    FlagKind::ArtificialDamping,
    FlagKind::PhaseError,
];

/// What a cell came to, always shown as text beside its colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Status {
    Pass,
    /// Meets the target, with flags that do not disqualify it.
    PassNoted,
    Fail,
    Flagged,
    FailedRun,
}

impl Status {
    pub fn label(self) -> &'static str {
        match self {
            Status::Pass => "pass",
            Status::PassNoted => "pass, noted",
            Status::Fail => "fail",
            Status::Flagged => "flagged",
            Status::FailedRun => "failed run",
        }
    }
    pub fn class(self) -> &'static str {
        match self {
            Status::Pass => "st-pass",
            Status::PassNoted => "st-noted",
            Status::Fail => "st-fail",
            Status::Flagged => "st-flag",
            Status::FailedRun => "st-run",
        }
    }
    pub fn explanation(self) -> &'static str {
        match self {
            Status::Pass => "meets the target, no flags",
            Status::PassNoted => "meets the target; carries a flag that does not disqualify it",
            Status::Fail => "ran, but its max error is above the target",
            Status::Flagged => "carries a flag that disqualifies it",
            Status::FailedRun => "did not run to the end",
        }
    }
    pub const ALL: [Status; 5] = [
        Status::Pass,
        Status::PassNoted,
        Status::Fail,
        Status::Flagged,
        Status::FailedRun,
    ];
}

/// One cell as the report shows it.
#[derive(Debug, Clone)]
pub struct CellView {
    pub index: usize,
    pub method: String,
    pub rtol: f64,
    /// The settings besides method and rtol that the plan varies, as text ("" when none vary).
    pub group: String,
    pub max_error: Option<f64>,
    pub steps: u64,
    pub rejected: u64,
    pub newton: u64,
    pub cpu_seconds: f64,
    pub status: Status,
    pub failure: Option<String>,
    pub flag_kinds: Vec<String>,
    pub recommended: bool,
}

/// One evidence entry of a flag.
#[derive(Debug, Clone)]
pub struct Evidence {
    pub name: String,
    pub value: String,
}

#[derive(Debug, Clone)]
pub struct FlagView {
    pub number: usize,
    pub cell: usize,
    pub method: String,
    pub rtol: f64,
    pub group: String,
    pub kind: String,
    pub disqualifies: bool,
    pub signal: String,
    pub t_start: f64,
    pub t_end: f64,
    pub severity: f64,
    pub evidence: Vec<Evidence>,
    /// Index into `Model::zooms`, when the window was drawn.
    pub zoom: Option<usize>,
}

/// A plotted curve.
#[derive(Debug, Clone)]
pub struct Curve {
    pub name: String,
    pub colour: Colour,
    pub marker: Marker,
    pub points: Vec<(f64, f64)>,
}

/// One time plot (waveform, zoom, or error).
#[derive(Debug, Clone)]
pub struct TimePlot {
    pub title: String,
    pub signal: String,
    pub curves: Vec<Curve>,
    pub window: Option<(f64, f64)>,
    /// Text shown under the plot (for example which cells could not be drawn).
    pub note: String,
}

#[derive(Debug, Clone)]
pub struct MethodView {
    pub name: String,
    pub colour: Colour,
    pub marker: Marker,
    pub theoretical_order: u32,
    pub observed_order: Option<f64>,
    pub cells: Vec<usize>,
}

#[derive(Debug, Clone)]
pub struct PoleView {
    pub re: f64,
    pub im: f64,
    pub hz: f64,
    pub damping: f64,
    pub q: Option<f64>,
    pub tau: Option<f64>,
}

/// The settings matrix for one combination of the other settings.
#[derive(Debug, Clone)]
pub struct MatrixGroup {
    pub label: String,
    /// rows[method][rtol column] = cell index.
    pub rows: Vec<(String, Vec<Option<usize>>)>,
}

#[derive(Debug, Clone)]
pub struct ProvenanceView {
    pub version: String,
    pub file: String,
    pub title: String,
    pub sha256: String,
    pub created: String,
    pub command: String,
    pub threads: usize,
    pub stop: f64,
    pub plan: Vec<(String, String)>,
}

/// Everything the page shows.
#[derive(Debug, Clone)]
pub struct Model {
    pub title: String,
    pub circuit: String,
    pub target: f64,
    pub reference_kind: String,
    pub error_bound: f64,
    pub reference_warning: Option<String>,
    pub recommendation: Option<usize>,
    pub reason: String,
    pub cells: Vec<CellView>,
    pub status_counts: Vec<(Status, usize)>,
    pub flag_counts: Vec<(String, usize)>,
    pub flags: Vec<FlagView>,
    pub rtols: Vec<f64>,
    pub matrix: Vec<MatrixGroup>,
    pub methods: Vec<MethodView>,
    /// The tolerance the waveforms and errors are drawn at, and why.
    pub shown_rtol: f64,
    pub shown_group: String,
    pub shown_why: String,
    pub time_unit: &'static str,
    pub waveforms: Vec<TimePlot>,
    pub zooms: Vec<TimePlot>,
    pub errors: Vec<TimePlot>,
    pub error_floor: f64,
    pub poles: Vec<PoleView>,
    pub provenance: ProvenanceView,
}

/// The colour and marker of each method (fixed, so every figure agrees).
pub fn method_style(m: MethodName) -> (Colour, Marker) {
    match m {
        MethodName::BackwardEuler => (Colour(0, 94, 184), Marker::Circle),
        MethodName::Trapezoidal => (Colour(222, 120, 0), Marker::Triangle),
        MethodName::Bdf2 => (Colour(0, 150, 120), Marker::Square),
        MethodName::TrBdf2 => (Colour(190, 60, 150), Marker::Diamond),
    }
}

pub const REFERENCE_COLOUR: Colour = Colour(20, 20, 20);

/// Seconds to the unit the time axes use.
pub fn time_unit(stop: f64) -> (f64, &'static str) {
    let s = stop.abs();
    if !s.is_finite() || s >= 1.0 {
        (1.0, "s")
    } else if s >= 1e-3 {
        (1e3, "ms")
    } else if s >= 1e-6 {
        (1e6, "µs")
    } else if s >= 1e-9 {
        (1e9, "ns")
    } else {
        (1e12, "ps")
    }
}

fn finite_or(x: f64, d: f64) -> f64 {
    if x.is_finite() {
        x
    } else {
        d
    }
}

fn fin(x: Option<f64>) -> Option<f64> {
    x.filter(|v| v.is_finite())
}

/// The settings other than method and rtol that differ across the plan, as "name value" text.
fn group_label(a: &Audit, o: &Overrides) -> String {
    let p = &a.plan;
    let mut parts: Vec<String> = Vec::new();
    let num = |x: Option<f64>| x.map_or("default".to_string(), super::render::num);
    if p.atol_v.len() > 1 {
        parts.push(format!("atol_v {}", num(o.atol_v)));
    }
    if p.atol_i.len() > 1 {
        parts.push(format!("atol_i {}", num(o.atol_i)));
    }
    if p.lte_factor.len() > 1 {
        parts.push(format!("lte_factor {}", num(o.lte_factor)));
    }
    if p.max_step.len() > 1 {
        parts.push(format!("max_step {}", num(o.max_step)));
    }
    if p.fixed_step.len() > 1 {
        parts.push(format!("fixed_step {}", num(o.fixed_step)));
    }
    if p.restart.len() > 1 {
        parts.push(format!(
            "restart {}",
            o.restart.map_or("default", |r| r.as_str())
        ));
    }
    if p.scale.len() > 1 {
        parts.push(format!(
            "scale {}",
            o.scale.map_or("default", |r| r.as_str())
        ));
    }
    if p.step_budget.len() > 1 {
        parts.push(format!(
            "step_budget {}",
            o.step_budget
                .map_or("default".to_string(), |b| b.to_string())
        ));
    }
    parts.join(", ")
}

/// Whether two cells share every setting except method and rtol.
fn same_group(a: &Overrides, b: &Overrides) -> bool {
    a.atol_v == b.atol_v
        && a.atol_i == b.atol_i
        && a.lte_factor == b.lte_factor
        && a.max_step == b.max_step
        && a.fixed_step == b.fixed_step
        && a.restart == b.restart
        && a.scale == b.scale
        && a.step_budget == b.step_budget
        && a.start == b.start
}

fn status(c: &CellResult) -> Status {
    if !c.ok() {
        Status::FailedRun
    } else if c.flags.iter().any(|f| f.kind.disqualifies()) {
        Status::Flagged
    } else if c.meets_target {
        if c.flags.is_empty() {
            Status::Pass
        } else {
            Status::PassNoted
        }
    } else {
        Status::Fail
    }
}

fn evidence_text(v: &EvidenceValue) -> String {
    match v {
        EvidenceValue::Number(x) if x.is_finite() => super::plots::tick(*x),
        EvidenceValue::Number(_) => "n/a".to_string(),
        EvidenceValue::Text(s) => s.clone(),
    }
}

fn series(t: &[f64], v: &[f64], scale_t: f64) -> Vec<(f64, f64)> {
    let (dt, dv) = decimate_min_max(t, v, BUCKETS);
    dt.iter()
        .zip(&dv)
        .map(|(&t, &v)| (t * scale_t, v))
        .collect()
}

/// Sorted, de-duplicated times within [lo, hi].
fn dense_times(reference_points: usize, lo: f64, hi: f64, extra: &[f64]) -> Vec<f64> {
    let n = reference_points.max(2);
    let mut t: Vec<f64> = (0..n)
        .map(|k| lo + (hi - lo) * k as f64 / (n - 1) as f64)
        .collect();
    t.extend(extra.iter().copied().filter(|&x| x >= lo && x <= hi));
    t.retain(|x| x.is_finite());
    t.sort_by(f64::total_cmp);
    t.dedup();
    t
}

fn evaluate(reference: &Reference, times: &[f64], k: usize) -> Vec<f64> {
    if times.is_empty() {
        return Vec::new();
    }
    reference
        .evaluate(times)
        .into_iter()
        .nth(k)
        .unwrap_or_default()
}

/// Builds the model of the page.
pub fn build(a: &Audit, c: &Circuit, p: &Provenance) -> Model {
    let stop = if c.run.stop.is_finite() && c.run.stop > 0.0 {
        c.run.stop
    } else {
        finite_or(p.stop, 1.0).abs().max(f64::MIN_POSITIVE)
    };
    let (ts, unit) = time_unit(stop);
    let rec = a.recommendation.filter(|&i| i < a.cells.len());

    let cells: Vec<CellView> = a
        .cells
        .iter()
        .enumerate()
        .map(|(i, cell)| CellView {
            index: i,
            method: cell.settings.method.as_str().to_string(),
            rtol: cell.settings.tolerances.rtol,
            group: group_label(a, &cell.overrides),
            max_error: fin(cell.max_error),
            steps: cell.stats.steps,
            rejected: cell.stats.rejected_steps,
            newton: cell.stats.newton_iterations,
            cpu_seconds: finite_or(cell.stats.cpu_seconds, 0.0),
            status: status(cell),
            failure: cell.failure.clone(),
            flag_kinds: FLAG_KINDS
                .iter()
                .filter_map(|&k| {
                    let n = cell.flags.iter().filter(|f| f.kind == k).count();
                    match n {
                        0 => None,
                        1 => Some(k.as_str().to_string()),
                        _ => Some(format!("{} ×{n}", k.as_str())),
                    }
                })
                .collect(),
            recommended: rec == Some(i),
        })
        .collect();
    let status_counts = Status::ALL
        .iter()
        .map(|&s| (s, cells.iter().filter(|c| c.status == s).count()))
        .collect();
    let flag_counts = FLAG_KINDS
        .iter()
        .map(|&k| {
            (
                k.as_str().to_string(),
                a.cells
                    .iter()
                    .flat_map(|c| &c.flags)
                    .filter(|f| f.kind == k)
                    .count(),
            )
        })
        .collect();

    // Methods: the plan's, then any a cell used that the plan does not list.
    let mut method_names: Vec<MethodName> = a.plan.methods.clone();
    for cell in &a.cells {
        if !method_names.contains(&cell.settings.method) {
            method_names.push(cell.settings.method);
        }
    }
    let methods: Vec<MethodView> = method_names
        .iter()
        .map(|&m| {
            let (colour, marker) = method_style(m);
            let summary = a.methods.iter().find(|s| s.method == m);
            MethodView {
                name: m.as_str().to_string(),
                colour,
                marker,
                theoretical_order: summary.map_or(0, |s| s.theoretical_order),
                observed_order: fin(summary.and_then(|s| s.observed_order)),
                cells: (0..a.cells.len())
                    .filter(|&i| a.cells[i].settings.method == m)
                    .collect(),
            }
        })
        .collect();

    // The matrix: columns are the plan's rtol values (plus any a cell used), groups the other settings.
    let mut rtols: Vec<f64> = a
        .plan
        .rtol
        .iter()
        .copied()
        .filter(|x| x.is_finite())
        .collect();
    for cell in &cells {
        if cell.rtol.is_finite() && !rtols.contains(&cell.rtol) {
            rtols.push(cell.rtol);
        }
    }
    rtols.sort_by(|x, y| y.total_cmp(x));
    rtols.dedup();
    let mut group_reps: Vec<usize> = Vec::new();
    for (i, cell) in a.cells.iter().enumerate() {
        if !group_reps
            .iter()
            .any(|&g| same_group(&a.cells[g].overrides, &cell.overrides))
        {
            group_reps.push(i);
        }
    }
    let matrix: Vec<MatrixGroup> = group_reps
        .iter()
        .map(|&g| {
            let go = a.cells[g].overrides;
            MatrixGroup {
                label: cells[g].group.clone(),
                rows: method_names
                    .iter()
                    .map(|&m| {
                        let row = rtols
                            .iter()
                            .map(|&r| {
                                (0..a.cells.len()).find(|&i| {
                                    let x = &a.cells[i];
                                    x.settings.method == m
                                        && x.settings.tolerances.rtol == r
                                        && same_group(&x.overrides, &go)
                                })
                            })
                            .collect();
                        (m.as_str().to_string(), row)
                    })
                    .collect(),
            }
        })
        .collect();

    // The tolerance the waveforms are shown at.
    let (shown_rtol, shown_overrides, shown_why) = match rec {
        Some(i) => (
            a.cells[i].settings.tolerances.rtol,
            Some(a.cells[i].overrides),
            "the recommended cell's rtol".to_string(),
        ),
        None => {
            let r = if rtols.is_empty() {
                f64::NAN
            } else {
                let mut asc = rtols.clone();
                asc.reverse();
                asc[(asc.len() - 1) / 2]
            };
            (
                r,
                a.cells.first().map(|x| x.overrides),
                "no cell is recommended, so the middle rtol of the plan".to_string(),
            )
        }
    };
    let shown_group = shown_overrides.map_or(String::new(), |o| group_label(a, &o));
    let shown: Vec<(MethodName, Option<usize>)> = method_names
        .iter()
        .map(|&m| {
            (
                m,
                (0..a.cells.len()).find(|&i| {
                    let x = &a.cells[i];
                    x.settings.method == m
                        && x.settings.tolerances.rtol == shown_rtol
                        && shown_overrides
                            .as_ref()
                            .is_none_or(|g| same_group(g, &x.overrides))
                }),
            )
        })
        .collect();

    let breakpoints = c.breakpoints();
    let dense = dense_times(REFERENCE_POINTS, 0.0, stop, &breakpoints);
    let dense_ref = if dense.is_empty() {
        Vec::new()
    } else {
        a.reference.evaluate(&dense)
    };

    let mut waveforms = Vec::new();
    let mut errors = Vec::new();
    let mut floor = f64::INFINITY;
    for (k, label) in a.labels.iter().enumerate() {
        let peak = a
            .peaks
            .get(k)
            .copied()
            .filter(|p| p.is_finite() && *p > 0.0)
            .unwrap_or(1.0);
        let mut curves = vec![Curve {
            name: format!("reference ({})", a.reference.kind.label()),
            colour: REFERENCE_COLOUR,
            marker: Marker::None,
            points: dense_ref
                .get(k)
                .map_or(Vec::new(), |v| series(&dense, v, ts)),
        }];
        let mut err_curves = Vec::new();
        let mut missing = Vec::new();
        for &(m, idx) in &shown {
            let (colour, marker) = method_style(m);
            let traj = idx.and_then(|i| a.cells[i].trajectory.as_ref());
            let Some(v) = traj.and_then(|t| t.signal(label)) else {
                missing.push(m.as_str());
                continue;
            };
            let times = &traj.map_or(&[][..], |t| &t.times[..]);
            curves.push(Curve {
                name: m.as_str().to_string(),
                colour,
                marker: Marker::None,
                points: series(times, v, ts),
            });
            let r = evaluate(&a.reference, times, k);
            let e: Vec<f64> = v
                .iter()
                .zip(&r)
                .map(|(x, y)| (x - y).abs() / peak)
                .collect();
            for &x in &e {
                if x > 0.0 && x.is_finite() {
                    floor = floor.min(x);
                }
            }
            err_curves.push(Curve {
                name: m.as_str().to_string(),
                colour,
                marker,
                points: series(&times[..e.len().min(times.len())], &e, ts),
            });
        }
        let note = if missing.is_empty() {
            String::new()
        } else {
            format!("not drawn (no run at this setting): {}", missing.join(", "))
        };
        waveforms.push(TimePlot {
            title: format!("{label}: reference and each method"),
            signal: label.clone(),
            curves,
            window: None,
            note: note.clone(),
        });
        errors.push(TimePlot {
            title: format!("{label}: |cell − reference| / peak"),
            signal: label.clone(),
            curves: err_curves,
            window: None,
            note,
        });
    }
    // Exact zeros (before the first edge, say) would stretch the axis over many empty decades.
    let least = if a.target.is_finite() && a.target > 0.0 {
        a.target * 1e-6
    } else {
        1e-12
    };
    let error_floor = if floor.is_finite() {
        floor.max(least)
    } else {
        least
    };
    for plot in &mut errors {
        for curve in &mut plot.curves {
            for p in &mut curve.points {
                p.1 = p.1.max(error_floor);
            }
        }
    }

    // Flags, with a zoom on each window (as many as MAX_ZOOMS).
    let mut flags = Vec::new();
    let mut zooms = Vec::new();
    for (i, cell) in a.cells.iter().enumerate() {
        for f in &cell.flags {
            let number = flags.len() + 1;
            let k = a.labels.iter().position(|l| *l == f.signal);
            let mut zoom = None;
            if let (Some(k), true) = (k, zooms.len() < MAX_ZOOMS) {
                zoom = zoom_plot(a, cell, f, k, stop, ts, number).map(|z| {
                    zooms.push(z);
                    zooms.len() - 1
                });
            }
            flags.push(FlagView {
                number,
                cell: i,
                method: cell.settings.method.as_str().to_string(),
                rtol: cell.settings.tolerances.rtol,
                group: cells[i].group.clone(),
                kind: f.kind.as_str().to_string(),
                disqualifies: f.kind.disqualifies(),
                signal: f.signal.clone(),
                t_start: f.t_start,
                t_end: f.t_end,
                severity: f.severity,
                evidence: f
                    .evidence
                    .iter()
                    .map(|(n, v)| Evidence {
                        name: n.clone(),
                        value: evidence_text(v),
                    })
                    .collect(),
                zoom,
            });
        }
    }

    let poles = a
        .poles
        .iter()
        .filter(|p| p.re.is_finite() && p.im.is_finite())
        .map(|p| PoleView {
            re: p.re,
            im: p.im,
            hz: p.frequency_hz(),
            damping: p.damping_ratio(),
            q: fin(p.q()),
            tau: fin(p.time_constant()),
        })
        .collect();

    let plan = &a.plan;
    let opt_list = |v: &[Option<f64>]| {
        v.iter()
            .map(|x| x.map_or("default".to_string(), super::render::num))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let plan_rows = vec![
        (
            "methods".to_string(),
            plan.methods
                .iter()
                .map(|m| m.as_str())
                .collect::<Vec<_>>()
                .join(", "),
        ),
        (
            "rtol".to_string(),
            plan.rtol
                .iter()
                .map(|&x| super::render::num(x))
                .collect::<Vec<_>>()
                .join(", "),
        ),
        ("atol_v".to_string(), opt_list(&plan.atol_v)),
        ("atol_i".to_string(), opt_list(&plan.atol_i)),
        ("lte_factor".to_string(), opt_list(&plan.lte_factor)),
        ("max_step".to_string(), opt_list(&plan.max_step)),
        ("fixed_step".to_string(), opt_list(&plan.fixed_step)),
        (
            "restart".to_string(),
            plan.restart
                .iter()
                .map(|x| x.map_or("default", |r| r.as_str()))
                .collect::<Vec<_>>()
                .join(", "),
        ),
        (
            "scale".to_string(),
            plan.scale
                .iter()
                .map(|x| x.map_or("default", |r| r.as_str()))
                .collect::<Vec<_>>()
                .join(", "),
        ),
        (
            "step_budget".to_string(),
            plan.step_budget
                .iter()
                .map(|x| x.map_or("default".to_string(), |b| b.to_string()))
                .collect::<Vec<_>>()
                .join(", "),
        ),
        ("target".to_string(), super::render::num(plan.target)),
    ];

    Model {
        title: c.title.clone(),
        circuit: a.circuit.clone(),
        target: a.target,
        reference_kind: a.reference.kind.label(),
        error_bound: a.reference.error_bound,
        reference_warning: a.reference.warning.clone(),
        recommendation: rec,
        reason: a.recommendation_reason.clone(),
        cells,
        status_counts,
        flag_counts,
        flags,
        rtols,
        matrix,
        methods,
        shown_rtol,
        shown_group,
        shown_why,
        time_unit: unit,
        waveforms,
        zooms,
        errors,
        error_floor,
        poles,
        provenance: ProvenanceView {
            version: env!("CARGO_PKG_VERSION").to_string(),
            file: p.file.to_string(),
            title: p.title.to_string(),
            sha256: p.sha256.to_string(),
            created: p.created.to_string(),
            command: p.command.to_string(),
            threads: a.threads,
            stop,
            plan: plan_rows,
        },
    }
}

/// The flagged window of one cell, padded, against the reference.
fn zoom_plot(
    a: &Audit,
    cell: &CellResult,
    f: &crate::audit::Flag,
    k: usize,
    stop: f64,
    ts: f64,
    number: usize,
) -> Option<TimePlot> {
    let (mut lo, mut hi) = (f.t_start, f.t_end);
    if !(lo.is_finite() && hi.is_finite()) {
        return None;
    }
    if hi < lo {
        std::mem::swap(&mut lo, &mut hi);
    }
    let pad = ((hi - lo) * 0.15).max(stop * 0.005);
    let lo = (lo - pad).max(0.0);
    let hi = (hi + pad).min(stop);
    if hi <= lo {
        return None;
    }
    let dense = dense_times(1201, lo, hi, &[]);
    let r = evaluate(&a.reference, &dense, k);
    let (colour, _) = method_style(cell.settings.method);
    let mut curves = vec![Curve {
        name: format!("reference ({})", a.reference.kind.label()),
        colour: REFERENCE_COLOUR,
        marker: Marker::None,
        points: series(&dense, &r, ts),
    }];
    let mut note = String::new();
    match cell.trajectory.as_ref().and_then(|t| {
        let v = t.signal(&f.signal)?;
        Some((&t.times, v))
    }) {
        Some((times, v)) => {
            let idx: Vec<usize> = (0..times.len().min(v.len()))
                .filter(|&j| times[j] >= lo && times[j] <= hi)
                .collect();
            let tt: Vec<f64> = idx.iter().map(|&j| times[j]).collect();
            let vv: Vec<f64> = idx.iter().map(|&j| v[j]).collect();
            curves.push(Curve {
                name: format!(
                    "{} at rtol {}",
                    cell.settings.method.as_str(),
                    super::render::num(cell.settings.tolerances.rtol)
                ),
                colour,
                marker: if tt.len() <= 300 {
                    Marker::Circle
                } else {
                    Marker::None
                },
                points: series(&tt, &vv, ts),
            });
        }
        None => note = "the cell's waveform is not available".into(),
    }
    Some(TimePlot {
        title: format!(
            "flag {number}: {} on {} ({} at rtol {})",
            f.kind.as_str(),
            f.signal,
            cell.settings.method.as_str(),
            super::render::num(cell.settings.tolerances.rtol)
        ),
        signal: f.signal.clone(),
        curves,
        window: Some((lo * ts, hi * ts)),
        note,
    })
}
