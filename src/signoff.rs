//! Sign-off: one fixed setting run on every circuit of a project, each measured against its reference,
//! with a record (schema `ringtrue.signoff/1`) that names every input by its sha256 so that a later
//! `verify` can say whether the record still describes the files.
//!
//! The project file lists the setting, the target and the circuits:
//!
//! ```yaml
//! project: power-stage
//! settings: { method: tr-bdf2, rtol: 1e-5, max_step: 10n }
//! target: 1e-3
//! circuits:
//!   - circuits/rc.yaml
//!   - { file: circuits/rlc.yaml, target: 1e-4, watch: [out, l1.current] }
//! ```
//!
//! Everything in the record is a pure function of the files except `created` and `cpu_seconds`.

use crate::audit::{self, results, CellResult, Plan};
use crate::circuit::raw::RawValue;
use crate::circuit::{self, yaml, Circuit, Probe};
use crate::settings::{MethodName, Overrides, Restart, Scale, Settings};
use crate::units::Quantity;
use rayon::prelude::*;
use serde::de::{self, Deserializer, MapAccess, Visitor};
use serde::Deserialize;
use serde_json::{json, Map, Value};
use std::fmt;
use std::path::{Component, Path, PathBuf};

pub const SCHEMA: &str = "ringtrue.signoff/1";

/// Wall-clock budget of each run, in seconds (a safety net; the sign-off circuits are meant to be fast).
pub const CELL_SECONDS: f64 = 600.0;

/// Every problem found, each a full sentence naming the file (and line where known) and the fix.
#[derive(Debug, Clone, PartialEq)]
pub struct SignoffError {
    pub problems: Vec<String>,
}

impl SignoffError {
    fn one(message: String) -> Self {
        SignoffError {
            problems: vec![message],
        }
    }
}

impl fmt::Display for SignoffError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.problems.join("\n"))
    }
}

impl std::error::Error for SignoffError {}

// ---------------------------------------------------------------------------------------------------
// The project file as written.

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProject {
    project: String,
    settings: RawSettings,
    #[serde(default)]
    target: Option<RawValue>,
    circuits: Vec<RawEntry>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSettings {
    #[serde(default)]
    method: Option<String>,
    #[serde(default)]
    rtol: Option<RawValue>,
    #[serde(default)]
    atol_v: Option<RawValue>,
    #[serde(default)]
    atol_i: Option<RawValue>,
    #[serde(default)]
    lte_factor: Option<RawValue>,
    #[serde(default)]
    max_step: Option<RawValue>,
    #[serde(default)]
    fixed_step: Option<RawValue>,
    #[serde(default)]
    scale: Option<String>,
    #[serde(default)]
    restart: Option<String>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEntryMap {
    file: String,
    #[serde(default)]
    target: Option<RawValue>,
    #[serde(default)]
    watch: Option<Vec<String>>,
}

/// A `circuits:` item: a path, or a map with the path and what to change for this circuit.
#[derive(Debug)]
enum RawEntry {
    Path(String),
    Map(RawEntryMap),
}

impl<'de> Deserialize<'de> for RawEntry {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = RawEntry;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str(
                    "a circuit file path, or a map with file and optionally target and watch",
                )
            }
            fn visit_str<E: de::Error>(self, s: &str) -> Result<RawEntry, E> {
                Ok(RawEntry::Path(s.to_string()))
            }
            fn visit_map<A: MapAccess<'de>>(self, m: A) -> Result<RawEntry, A::Error> {
                RawEntryMap::deserialize(de::value::MapAccessDeserializer::new(m))
                    .map(RawEntry::Map)
            }
        }
        d.deserialize_any(V)
    }
}

// ---------------------------------------------------------------------------------------------------
// The checked project.

/// One circuit of the project, loaded and checked.
#[derive(Debug, Clone)]
pub struct Entry {
    /// The path as written in the project file.
    pub file: String,
    /// The path resolved against the project file's folder.
    pub path: PathBuf,
    pub sha256: String,
    pub target: f64,
    /// The circuit, with the project's watch list applied when it gives one.
    pub circuit: Circuit,
    /// The plan searched for a setting that would pass: the circuit's own, else the default.
    pub plan: Plan,
    pub plan_source: &'static str,
}

/// A checked project.
#[derive(Debug, Clone)]
pub struct Project {
    pub name: String,
    /// The project file's path as given.
    pub file: PathBuf,
    pub sha256: String,
    /// The setting every circuit runs with (on top of each circuit's own `run:` map).
    pub settings: Overrides,
    pub target: f64,
    pub entries: Vec<Entry>,
}

/// The 1-based line of the first `key:` in `text` outside comments, for messages.
fn key_line(text: &str, key: &str) -> Option<usize> {
    let pat = format!("{key}:");
    text.lines()
        .position(|l| {
            let code = l.split('#').next().unwrap_or("");
            code.match_indices(&pat).any(|(i, _)| {
                i == 0 || matches!(code.as_bytes()[i - 1], b' ' | b'\t' | b'{' | b',' | b'-')
            })
        })
        .map(|i| i + 1)
}

/// The 1-based line of the first line that mentions `needle` outside comments.
fn text_line(text: &str, needle: &str) -> Option<usize> {
    text.lines()
        .position(|l| l.split('#').next().unwrap_or("").contains(needle))
        .map(|i| i + 1)
}

fn at(file: &str, line: Option<usize>) -> String {
    match line {
        Some(l) => format!("{file}:{l}"),
        None => file.to_string(),
    }
}

fn raw_number(v: &RawValue, q: Quantity) -> Result<f64, String> {
    v.number(q)
}

fn check_target(v: &RawValue) -> Result<f64, String> {
    let t = raw_number(v, Quantity::Plain)?;
    if t > 0.0 && t < 1.0 {
        Ok(t)
    } else {
        Err(format!(
            "{t} is out of range; give a fraction of each signal's peak between 0 and 1, e.g. 1e-3"
        ))
    }
}

fn valid_name(s: &str) -> bool {
    !s.is_empty()
        && s.len() <= 64
        && s.bytes()
            .all(|b| b.is_ascii_lowercase() || b.is_ascii_digit() || b == b'-' || b == b'_')
}

fn settings_overrides(
    raw: &RawSettings,
    text: &str,
    file: &str,
    problems: &mut Vec<String>,
) -> Overrides {
    let mut o = Overrides::default();
    let bad = |key: &str, message: String, problems: &mut Vec<String>| {
        problems.push(format!(
            "{}: settings.{key}: {message}",
            at(file, key_line(text, key))
        ));
    };
    match &raw.method {
        None => problems.push(format!(
            "{}: settings: no method given; add method: backward-euler, trapezoidal, bdf2 or tr-bdf2",
            at(file, key_line(text, "settings"))
        )),
        Some(m) => match m.parse::<MethodName>() {
            Ok(m) => o.method = Some(m),
            Err(e) => bad("method", e.to_string(), problems),
        },
    }
    let number = |key: &str, v: &Option<RawValue>, q: Quantity, problems: &mut Vec<String>| {
        v.as_ref().and_then(|v| match raw_number(v, q) {
            Ok(x) => Some(x),
            Err(e) => {
                problems.push(format!(
                    "{}: settings.{key}: {e}",
                    at(file, key_line(text, key))
                ));
                None
            }
        })
    };
    o.rtol = number("rtol", &raw.rtol, Quantity::Plain, problems);
    o.atol_v = number("atol_v", &raw.atol_v, Quantity::Voltage, problems);
    o.atol_i = number("atol_i", &raw.atol_i, Quantity::Current, problems);
    o.lte_factor = number("lte_factor", &raw.lte_factor, Quantity::Plain, problems);
    o.max_step = number("max_step", &raw.max_step, Quantity::Time, problems);
    o.fixed_step = number("fixed_step", &raw.fixed_step, Quantity::Time, problems);
    if let Some(s) = &raw.scale {
        match s.parse::<Scale>() {
            Ok(s) => o.scale = Some(s),
            Err(e) => bad("scale", e.to_string(), problems),
        }
    }
    if let Some(r) = &raw.restart {
        match r.parse::<Restart>() {
            Ok(r) => o.restart = Some(r),
            Err(e) => bad("restart", e.to_string(), problems),
        }
    }
    if let Some(m) = o.method {
        let mut s = Settings::new(m);
        s.apply(&o);
        if let Err(e) = s.validate() {
            problems.push(format!(
                "{}: settings.{}: {e}",
                at(file, key_line(text, e.setting)),
                e.setting
            ));
        }
    }
    o
}

/// The probes of a watch list given in the project, checked against the circuit (the same rules as a
/// circuit file's own `watch`).
fn watch_probes(c: &Circuit, list: &[String]) -> Result<Vec<Probe>, Vec<String>> {
    let (probes, problems) = crate::circuit::resolve_watch(list, &c.elements, &c.ground);
    if problems.is_empty() {
        Ok(probes)
    } else {
        Err(problems
            .into_iter()
            .map(|p| format!("{}: {}; {}", p.subject, p.message, p.hint))
            .collect())
    }
}

/// Reads and checks a project file and every circuit it lists; collects every problem found.
pub fn load(project_file: &Path) -> Result<Project, SignoffError> {
    let label = project_file.display().to_string();
    let bytes = std::fs::read(project_file).map_err(|e| {
        SignoffError::one(format!(
            "cannot read the project file {label}: {e}; check the path"
        ))
    })?;
    let text = String::from_utf8(bytes.clone()).map_err(|_| {
        SignoffError::one(format!(
            "{label} is not UTF-8 text; a project file is YAML with the keys project, settings, target and circuits"
        ))
    })?;
    let raw: RawProject = yaml::from_str(&text).map_err(|e| {
        let hint = if e.message.contains("unknown field") {
            "remove the key or correct its spelling"
        } else if e.message.contains("missing field") {
            "add the missing key"
        } else {
            "correct the YAML at that position"
        };
        let pos = match (e.line, e.column) {
            (Some(l), Some(c)) => format!("{label}:{l}:{c}"),
            (Some(l), None) => format!("{label}:{l}"),
            _ => label.clone(),
        };
        SignoffError::one(format!(
            "{pos}: {}; {hint} (a project file holds project, settings, target and circuits)",
            e.message
        ))
    })?;

    let mut problems: Vec<String> = Vec::new();
    if !valid_name(&raw.project) {
        problems.push(format!(
            "{}: project: '{}' is not a valid project name; use 1 to 64 characters from a-z, 0-9, - and _",
            at(&label, key_line(&text, "project")),
            raw.project
        ));
    }
    let settings = settings_overrides(&raw.settings, &text, &label, &mut problems);
    let target = match &raw.target {
        None => audit::plan::DEFAULT_TARGET,
        Some(v) => check_target(v).unwrap_or_else(|e| {
            problems.push(format!(
                "{}: target: {e}",
                at(&label, key_line(&text, "target"))
            ));
            audit::plan::DEFAULT_TARGET
        }),
    };
    if raw.circuits.is_empty() {
        problems.push(format!(
            "{}: circuits: the list is empty; list at least one circuit file",
            at(&label, key_line(&text, "circuits"))
        ));
    }
    let base = project_file
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));

    let mut entries = Vec::new();
    for raw_entry in &raw.circuits {
        let (file, entry_target, watch) = match raw_entry {
            RawEntry::Path(p) => (p.clone(), None, None),
            RawEntry::Map(m) => (m.file.clone(), m.target.as_ref(), m.watch.as_ref()),
        };
        let line = text_line(&text, &file);
        let here = at(&label, line);
        if file.trim().is_empty() {
            problems.push(format!(
                "{here}: circuits: an entry has an empty path; give the circuit file's path relative to the project file"
            ));
            continue;
        }
        let target = match entry_target {
            None => target,
            Some(v) => match check_target(v) {
                Ok(t) => t,
                Err(e) => {
                    problems.push(format!("{here}: circuit {file}: target: {e}"));
                    continue;
                }
            },
        };
        let path = base.join(&file);
        let shown = path.display().to_string();
        let bytes = match std::fs::read(&path) {
            Ok(b) => b,
            Err(e) => {
                problems.push(format!(
                    "{here}: circuit {file}: cannot read {shown}: {e}; paths are relative to the project file's folder"
                ));
                continue;
            }
        };
        let Ok(ctext) = std::str::from_utf8(&bytes) else {
            problems.push(format!(
                "{here}: circuit {file}: {shown} is not UTF-8 text; give a circuit file (YAML)"
            ));
            continue;
        };
        let mut circuit = match circuit::parse(ctext, &shown) {
            Ok(c) => c,
            Err(e) => {
                problems.push(format!("{here}: circuit {file} has problems:\n{e}"));
                continue;
            }
        };
        if let Some(list) = watch {
            match watch_probes(&circuit, list) {
                Ok(p) => circuit.watch = p,
                Err(ps) => {
                    for p in ps {
                        problems.push(format!("{here}: circuit {file} ({shown}): {p}"));
                    }
                    continue;
                }
            }
        }
        let (mut plan, plan_source) = match &circuit.plan {
            Some(rp) => match Plan::from_raw(rp) {
                Ok(p) => (p, "circuit"),
                Err(e) => {
                    problems.push(format!(
                        "{here}: circuit {file}: {shown}: {e}; correct the circuit's plan map"
                    ));
                    continue;
                }
            },
            None => (Plan::default(), "default"),
        };
        plan.target = target;
        entries.push(Entry {
            file,
            path,
            sha256: results::sha256_hex(&bytes),
            target,
            circuit,
            plan,
            plan_source,
        });
    }
    if !problems.is_empty() {
        return Err(SignoffError { problems });
    }
    Ok(Project {
        name: raw.project,
        file: project_file.to_path_buf(),
        sha256: results::sha256_hex(&bytes),
        settings,
        target,
        entries,
    })
}

// ---------------------------------------------------------------------------------------------------
// Running.

/// A setting from the audit plan that would make a failing circuit pass, or why there is none.
#[derive(Debug, Clone)]
pub enum WouldPass {
    Found {
        settings: Map<String, Value>,
        max_error: Option<f64>,
        reason: String,
        plan: &'static str,
    },
    NotFound {
        reason: String,
    },
}

/// The sign-off of one circuit.
#[derive(Debug, Clone)]
pub struct CircuitOutcome {
    pub reference_kind: String,
    pub error_bound: f64,
    pub reference_warning: Option<String>,
    /// The run (its trajectory dropped).
    pub cell: CellResult,
    pub passed: bool,
    /// Why it passed or failed, in one sentence.
    pub reason: String,
    /// For failing circuits only.
    pub would_pass: Option<WouldPass>,
}

/// The whole sign-off, one outcome per entry in project order.
#[derive(Debug, Clone)]
pub struct Outcome {
    pub circuits: Vec<CircuitOutcome>,
}

impl Outcome {
    pub fn passed(&self) -> bool {
        self.circuits.iter().all(|c| c.passed)
    }
}

fn judge(cell: &CellResult, error_bound: f64, target: f64) -> (bool, String) {
    if let Some(f) = &cell.failure {
        return (false, format!("the run did not finish: {f}"));
    }
    let e = cell.max_error.unwrap_or(f64::NAN);
    if error_bound > target {
        return (
            false,
            format!(
                "the reference's error bound {error_bound:.1e} exceeds the target {target:e}, so the run cannot be certified; loosen the target or give the circuit an exact or closed-form reference"
            ),
        );
    }
    let disq: Vec<&str> = cell
        .flags
        .iter()
        .filter(|f| f.kind.disqualifies())
        .map(|f| f.kind.as_str())
        .collect();
    if cell.meets_target {
        (
            true,
            format!("max error {e:.3e} is within the target {target:e}"),
        )
    } else if e <= target && !disq.is_empty() {
        (
            false,
            format!(
                "max error {e:.3e} is within the target {target:e} but the run is flagged: {}",
                disq.join(", ")
            ),
        )
    } else {
        (
            false,
            format!("max error {e:.3e} exceeds the target {target:e}"),
        )
    }
}

fn check_one(e: &Entry, settings: &Overrides) -> Result<CircuitOutcome, String> {
    let prepared = audit::prepare(&e.circuit).map_err(|err| {
        format!(
            "circuit {} ({}): {err}; correct the circuit's reference or watch list",
            e.file,
            e.path.display()
        )
    })?;
    let mut cell = audit::run_cell(&e.circuit, &prepared, settings, e.target, CELL_SECONDS);
    cell.trajectory = None;
    let (passed, reason) = judge(&cell, prepared.reference.error_bound, e.target);
    Ok(CircuitOutcome {
        reference_kind: prepared.reference.kind.label(),
        error_bound: prepared.reference.error_bound,
        reference_warning: prepared.reference.warning.clone(),
        cell,
        passed,
        reason,
        would_pass: None,
    })
}

fn search(e: &Entry, jobs: usize) -> WouldPass {
    let options = audit::Options {
        jobs,
        cell_seconds: CELL_SECONDS,
    };
    match audit::run(&e.circuit, &e.plan, &options, &|_| {}) {
        Ok(a) => match a.recommendation {
            Some(i) => {
                let c = &a.cells[i];
                WouldPass::Found {
                    settings: results::settings_json(c, e.circuit.run.stop),
                    max_error: c.max_error,
                    reason: a.recommendation_reason.clone(),
                    plan: e.plan_source,
                }
            }
            None => WouldPass::NotFound {
                reason: format!(
                    "no setting of the {} plan passes: {}",
                    e.plan_source, a.recommendation_reason
                ),
            },
        },
        Err(err) => WouldPass::NotFound {
            reason: format!("the {} plan could not be run: {err}", e.plan_source),
        },
    }
}

/// Runs every circuit with the project's setting (`jobs` threads), then searches the plan of each
/// failing circuit for the cheapest setting that would pass. The results do not depend on `jobs`.
pub fn run(project: &Project, jobs: usize) -> Result<Outcome, SignoffError> {
    let jobs = jobs.max(1);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(jobs)
        .build()
        .map_err(|e| {
            SignoffError::one(format!(
                "cannot start {jobs} worker threads: {e}; pass a smaller --jobs"
            ))
        })?;
    let results: Vec<Result<CircuitOutcome, String>> = pool.install(|| {
        project
            .entries
            .par_iter()
            .map(|e| check_one(e, &project.settings))
            .collect()
    });
    let mut circuits = Vec::with_capacity(results.len());
    let mut problems = Vec::new();
    for r in results {
        match r {
            Ok(c) => circuits.push(c),
            Err(p) => problems.push(format!("{}: {p}", project.file.display())),
        }
    }
    if !problems.is_empty() {
        return Err(SignoffError { problems });
    }
    for (c, e) in circuits.iter_mut().zip(&project.entries) {
        if !c.passed {
            c.would_pass = Some(search(e, jobs));
        }
    }
    Ok(Outcome { circuits })
}

// ---------------------------------------------------------------------------------------------------
// The record.

/// Where the record came from.
pub struct RecordInfo<'a> {
    pub created: &'a str,
    /// The project file's path relative to the folder the record is written in.
    pub project_file_from_record: &'a str,
}

/// The project's setting on the engine's defaults (before any circuit's `run:` map).
pub fn project_settings_json(o: &Overrides) -> Value {
    let mut s = Settings::new(o.method.unwrap_or(MethodName::TrBdf2));
    s.apply(o);
    let opt = |x: Option<f64>| x.map_or(Value::Null, results::num);
    json!({
        "method": s.method.as_str(),
        "rtol": results::num(s.tolerances.rtol),
        "atol_v": results::num(s.tolerances.atol_v),
        "atol_i": results::num(s.tolerances.atol_i),
        "lte_factor": results::num(s.tolerances.lte_factor),
        "max_step": opt(s.steps.max_step),
        "fixed_step": opt(s.steps.fixed_step),
        "restart": s.steps.restart.as_str(),
        "scale": s.tolerances.scale.as_str(),
    })
}

fn circuit_json(e: &Entry, c: &CircuitOutcome) -> Value {
    let mut m = Map::new();
    m.insert("file".into(), json!(e.file));
    m.insert("sha256".into(), json!(e.sha256));
    m.insert("name".into(), json!(e.circuit.name));
    m.insert("title".into(), json!(e.circuit.title));
    m.insert("target".into(), results::num(e.target));
    m.insert(
        "watch".into(),
        Value::Array(e.circuit.watch.iter().map(|p| json!(p.label())).collect()),
    );
    m.insert(
        "settings".into(),
        Value::Object(results::settings_json(&c.cell, e.circuit.run.stop)),
    );
    m.insert(
        "reference".into(),
        json!({
            "kind": c.reference_kind,
            "error_bound": results::num(c.error_bound),
            "warning": c.reference_warning.as_ref().map_or(Value::Null, |w| json!(w)),
        }),
    );
    m.insert(
        "max_error".into(),
        c.cell.max_error.map_or(Value::Null, results::num),
    );
    m.insert(
        "failure".into(),
        c.cell.failure.as_ref().map_or(Value::Null, |f| json!(f)),
    );
    m.insert(
        "flags".into(),
        Value::Array(c.cell.flags.iter().map(results::flag_json).collect()),
    );
    m.insert("steps".into(), json!(c.cell.stats.steps));
    m.insert(
        "newton_iterations".into(),
        json!(c.cell.stats.newton_iterations),
    );
    m.insert("cpu_seconds".into(), results::num(c.cell.stats.cpu_seconds));
    m.insert("passed".into(), json!(c.passed));
    m.insert("reason".into(), json!(c.reason));
    if !c.passed {
        match &c.would_pass {
            Some(WouldPass::Found {
                settings,
                max_error,
                reason,
                plan,
            }) => {
                let mut w = Map::new();
                w.insert("plan".into(), json!(plan));
                w.extend(settings.clone());
                w.insert(
                    "max_error".into(),
                    max_error.map_or(Value::Null, results::num),
                );
                w.insert("reason".into(), json!(reason));
                m.insert("would_pass".into(), Value::Object(w));
            }
            Some(WouldPass::NotFound { reason }) => {
                m.insert("would_pass".into(), Value::Null);
                m.insert("would_pass_reason".into(), json!(reason));
            }
            None => {
                m.insert("would_pass".into(), Value::Null);
                m.insert(
                    "would_pass_reason".into(),
                    json!("the plan was not searched"),
                );
            }
        }
    }
    Value::Object(m)
}

/// The whole record (schema `ringtrue.signoff/1`).
pub fn record_json(p: &Project, o: &Outcome, info: &RecordInfo) -> Value {
    let circuits: Vec<Value> = p
        .entries
        .iter()
        .zip(&o.circuits)
        .map(|(e, c)| circuit_json(e, c))
        .collect();
    json!({
        "schema": SCHEMA,
        "project": p.name,
        "project_file": p.file.display().to_string(),
        "project_file_from_record": info.project_file_from_record,
        "project_sha256": p.sha256,
        "settings": project_settings_json(&p.settings),
        "target": results::num(p.target),
        "tool": { "name": "ringtrue", "version": env!("CARGO_PKG_VERSION") },
        "created": info.created,
        "circuits": circuits,
        "passed": o.passed(),
    })
}

/// `to` relative to the folder `from_dir` (both absolute), with `..` where the paths part.
pub fn relative_path(from_dir: &Path, to: &Path) -> PathBuf {
    let f: Vec<Component> = from_dir.components().collect();
    let t: Vec<Component> = to.components().collect();
    let common = f.iter().zip(&t).take_while(|(a, b)| a == b).count();
    let mut p = PathBuf::new();
    for _ in common..f.len() {
        p.push("..");
    }
    for c in &t[common..] {
        p.push(c);
    }
    p
}

// ---------------------------------------------------------------------------------------------------
// The page.

/// A self-contained page: the table of circuits and the provenance.
pub fn render_html(record: &Value) -> String {
    use crate::report::escape;
    let s = |v: &Value| -> String {
        match v {
            Value::String(s) => escape(s),
            Value::Null => "&ndash;".into(),
            other => escape(&other.to_string()),
        }
    };
    let num = |v: &Value| -> String {
        v.as_f64()
            .map_or("&ndash;".to_string(), |x| escape(&format!("{x:.3e}")))
    };
    let project = s(&record["project"]);
    let passed = record["passed"].as_bool().unwrap_or(false);
    let mut h = String::new();
    h.push_str("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">");
    h.push_str(&format!("<title>Sign-off: {project}</title>"));
    h.push_str(
        "<style>body{font-family:sans-serif;margin:2em;color:#222}table{border-collapse:collapse;margin:1em 0}\
         th,td{border:1px solid #bbb;padding:.3em .6em;text-align:left;vertical-align:top}th{background:#eee}\
         .pass{color:#060;font-weight:bold}.fail{color:#a00;font-weight:bold}code{font-size:90%}</style>",
    );
    h.push_str("</head><body>\n");
    h.push_str(&format!("<h1>Sign-off: {project}</h1>\n"));
    h.push_str(&format!(
        "<p>Result: <span class=\"{}\">{}</span></p>\n",
        if passed { "pass" } else { "fail" },
        if passed {
            "PASSED: every circuit meets its target"
        } else {
            "FAILED: at least one circuit misses its target"
        }
    ));
    let st = &record["settings"];
    h.push_str("<h2>Setting</h2>\n<table><tr>");
    let keys = [
        "method",
        "rtol",
        "atol_v",
        "atol_i",
        "lte_factor",
        "max_step",
        "fixed_step",
        "restart",
        "scale",
    ];
    for k in keys {
        h.push_str(&format!("<th>{k}</th>"));
    }
    h.push_str("</tr><tr>");
    for k in keys {
        h.push_str(&format!("<td>{}</td>", s(&st[k])));
    }
    h.push_str("</tr></table>\n");
    h.push_str("<h2>Circuits</h2>\n<table><tr><th>file</th><th>circuit</th><th>reference</th><th>target</th><th>max error</th><th>steps</th><th>result</th><th>reason</th><th>a setting that would pass</th></tr>\n");
    for c in record["circuits"].as_array().map_or(&[][..], |a| a) {
        let ok = c["passed"].as_bool().unwrap_or(false);
        let would = match &c["would_pass"] {
            Value::Object(w) => format!(
                "{} at rtol {} ({})",
                s(&w["method"]),
                s(&w["rtol"]),
                s(&w["reason"])
            ),
            _ if !ok => s(&c["would_pass_reason"]),
            _ => String::new(),
        };
        h.push_str(&format!(
            "<tr><td><code>{}</code></td><td>{}</td><td>{} (bound {})</td><td>{}</td><td>{}</td><td>{}</td><td class=\"{}\">{}</td><td>{}</td><td>{}</td></tr>\n",
            s(&c["file"]),
            s(&c["title"]),
            s(&c["reference"]["kind"]),
            num(&c["reference"]["error_bound"]),
            num(&c["target"]),
            num(&c["max_error"]),
            s(&c["steps"]),
            if ok { "pass" } else { "fail" },
            if ok { "PASS" } else { "FAIL" },
            s(&c["reason"]),
            would
        ));
    }
    h.push_str("</table>\n<h2>Provenance</h2>\n<table>\n");
    let tool = format!(
        "{} {}",
        record["tool"]["name"].as_str().unwrap_or(""),
        record["tool"]["version"].as_str().unwrap_or("")
    );
    let rows: [(&str, String); 5] = [
        ("project file", s(&record["project_file"])),
        (
            "project file sha256",
            format!("<code>{}</code>", s(&record["project_sha256"])),
        ),
        ("tool", escape(&tool)),
        ("created", s(&record["created"])),
        ("schema", s(&record["schema"])),
    ];
    for (k, v) in rows {
        h.push_str(&format!("<tr><th>{k}</th><td>{v}</td></tr>\n"));
    }
    for c in record["circuits"].as_array().map_or(&[][..], |a| a) {
        h.push_str(&format!(
            "<tr><th>sha256 of <code>{}</code></th><td><code>{}</code></td></tr>\n",
            s(&c["file"]),
            s(&c["sha256"])
        ));
    }
    h.push_str("</table>\n<p>Check that this record still describes the files with <code>ringtrue signoff --verify signoff.json</code>.</p>\n</body></html>\n");
    h
}

// ---------------------------------------------------------------------------------------------------
// Verify.

/// What became of one file the record names.
#[derive(Debug, Clone, PartialEq)]
pub enum FileState {
    Unchanged,
    Changed { recorded: String, now: String },
    Missing { message: String },
}

#[derive(Debug, Clone, PartialEq)]
pub struct FileCheck {
    /// As written in the record (`project file` for the project itself).
    pub file: String,
    pub path: PathBuf,
    pub state: FileState,
}

/// The outcome of checking a record against the files.
#[derive(Debug, Clone, PartialEq)]
pub struct Verification {
    pub project: String,
    /// The project file first, then each circuit in record order.
    pub files: Vec<FileCheck>,
    pub recorded_version: String,
    pub version_differs: bool,
    /// Whether the record itself says the sign-off passed.
    pub record_passed: bool,
}

impl Verification {
    pub fn changed(&self) -> Vec<&FileCheck> {
        self.files
            .iter()
            .filter(|f| f.state != FileState::Unchanged)
            .collect()
    }
    /// True when every file is as recorded, the tool version is the same and the record passed.
    pub fn current(&self) -> bool {
        self.changed().is_empty() && !self.version_differs && self.record_passed
    }
}

fn check_file(file: &str, path: PathBuf, recorded: &str) -> FileCheck {
    let state = match std::fs::read(&path) {
        Ok(b) => {
            let now = results::sha256_hex(&b);
            if now == recorded {
                FileState::Unchanged
            } else {
                FileState::Changed {
                    recorded: recorded.to_string(),
                    now,
                }
            }
        }
        Err(e) => FileState::Missing {
            message: e.to_string(),
        },
    };
    FileCheck {
        file: file.into(),
        path,
        state,
    }
}

/// Checks a record (`text`, read from `record_path`) against the files it names. Errors say what in the
/// record is unreadable.
pub fn verify(text: &str, record_path: &Path) -> Result<Verification, String> {
    let label = record_path.display().to_string();
    let v: Value = serde_json::from_str(text).map_err(|e| {
        format!(
            "{label}:{}: not valid JSON ({e}); give the signoff.json written by ringtrue signoff",
            e.line()
        )
    })?;
    let field = |k: &str| -> Result<&str, String> {
        v.get(k).and_then(Value::as_str).ok_or_else(|| {
            format!("{label}: the record has no text field '{k}'; give the signoff.json written by ringtrue signoff")
        })
    };
    let schema = field("schema")?;
    if schema != SCHEMA {
        return Err(format!(
            "{label}: schema is '{schema}', not '{SCHEMA}'; give the signoff.json written by ringtrue signoff"
        ));
    }
    let project = field("project")?.to_string();
    let from_record = field("project_file_from_record")?;
    let project_sha = field("project_sha256")?;
    let recorded_version = v
        .get("tool")
        .and_then(|t| t.get("version"))
        .and_then(Value::as_str)
        .ok_or_else(|| format!("{label}: the record has no tool.version; give the signoff.json written by ringtrue signoff"))?
        .to_string();
    let record_passed = v.get("passed").and_then(Value::as_bool).ok_or_else(|| {
        format!("{label}: the record has no true/false field 'passed'; give the signoff.json written by ringtrue signoff")
    })?;
    let circuits = v.get("circuits").and_then(Value::as_array).ok_or_else(|| {
        format!("{label}: the record has no circuits list; give the signoff.json written by ringtrue signoff")
    })?;
    let record_dir = record_path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let project_path = record_dir.join(from_record);
    let project_dir = project_path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."))
        .to_path_buf();
    let shown = v
        .get("project_file")
        .and_then(Value::as_str)
        .unwrap_or(from_record);
    let mut files = vec![check_file(
        &format!("project file {shown}"),
        project_path.clone(),
        project_sha,
    )];
    for (i, c) in circuits.iter().enumerate() {
        let get = |k: &str| {
            c.get(k).and_then(Value::as_str).ok_or_else(|| {
                format!("{label}: circuits[{i}] has no text field '{k}'; give the signoff.json written by ringtrue signoff")
            })
        };
        let file = get("file")?;
        let sha = get("sha256")?;
        files.push(check_file(file, project_dir.join(file), sha));
    }
    Ok(Verification {
        project,
        files,
        version_differs: recorded_version != env!("CARGO_PKG_VERSION"),
        recorded_version,
        record_passed,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn relative_paths_climb_and_descend() {
        assert_eq!(
            relative_path(Path::new("/a/b/reports/p"), Path::new("/a/b/project.yaml")),
            PathBuf::from("../../project.yaml")
        );
        assert_eq!(
            relative_path(Path::new("/a"), Path::new("/a/x/y.yaml")),
            PathBuf::from("x/y.yaml")
        );
    }

    #[test]
    fn names_and_key_lines() {
        assert!(valid_name("power-stage_2"));
        assert!(!valid_name("Power"));
        assert!(!valid_name("../x"));
        assert!(!valid_name(""));
        let text = "project: x\nsettings: { method: bdf2, rtol: 2 }\n# rtol: 3\n";
        assert_eq!(key_line(text, "rtol"), Some(2));
        assert_eq!(key_line(text, "project"), Some(1));
        assert_eq!(key_line(text, "scale"), None);
    }
}
