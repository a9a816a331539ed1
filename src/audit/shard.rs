//! Sharding an audit over a batch scheduler's array jobs: shard K of N runs every N-th cell of the plan
//! (cells i with i mod N = K - 1) on the engine and keeps the raw runs; merging the N shards measures
//! every run against one reference and assembles the audit exactly as an unsharded run does.
//!
//! A shard file (schema `ringtrue.shard/1`) carries the circuit text and the plan's sources, so a merge
//! needs nothing but the shard files and can prove they belong together. Finite numbers are JSON numbers
//! written in the shortest form that reads back to the same bits; the non-finite ones are the strings
//! "NaN", "inf" and "-inf". Shards never build the reference: that is done once, by the merge.

use super::{
    assemble, measure_cell, pool, prepare, settings_for_cell, simulate_cell, Audit, AuditError,
    CellResult, CellRun, Options, Plan,
};
use crate::circuit::Circuit;
use crate::integrate::{Stats, Trajectory};
use rayon::prelude::*;
use serde_json::{json, Value};

pub const SCHEMA: &str = "ringtrue.shard/1";

/// Most shards a plan may be split into.
pub const MAX_SHARDS: usize = 1_000_000;

/// Which shard: `index` of `count`, counted from 1.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ShardSpec {
    pub index: usize,
    pub count: usize,
}

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ShardError {
    #[error("the shard `{text}` is not K/N with whole numbers 1 <= K <= N <= {MAX_SHARDS}; write e.g. --shard 2/8 for the second of eight shards")]
    BadSpec { text: String },
    #[error("{file}: not a shard file: {message}; shard files are written by `ringtrue audit FILE --shard K/N --out DIR`")]
    Corrupt { file: String, message: String },
    #[error("{file}: written by ringtrue {found}, but this is ringtrue {expected}; rerun the shards with this version")]
    Version {
        file: String,
        found: String,
        expected: String,
    },
    #[error("{file} belongs to another audit than {first}: its {what} differs; merge only the shards of one `ringtrue audit ... --shard K/N` command")]
    Mismatch {
        file: String,
        first: String,
        what: &'static str,
    },
    #[error("shard {index} of {count} appears twice: {first} and {second}; remove one of them")]
    Duplicate {
        index: usize,
        count: usize,
        first: String,
        second: String,
    },
    #[error("shard {index} of {count} (cells {cells}) is missing; run `ringtrue audit {circuit} --shard {index}/{count} --out DIR` and merge again")]
    Missing {
        index: usize,
        count: usize,
        cells: String,
        circuit: String,
    },
    #[error("{file}: shard {index} of {count} should hold cells {expected} of the plan's {plan_size}, but holds {found}; rerun that shard")]
    WrongCells {
        file: String,
        index: usize,
        count: usize,
        plan_size: usize,
        expected: String,
        found: String,
    },
    #[error("{file}: cell {cell} watches {found:?}, but the circuit watches {expected:?}; rerun that shard")]
    WrongSignals {
        file: String,
        cell: usize,
        found: Vec<String>,
        expected: Vec<String>,
    },
    #[error("the circuit's plan has {plan} cells but the shards were made from a plan of {shards} cells")]
    PlanSize { plan: usize, shards: usize },
    #[error("no shard files to merge")]
    Empty,
    #[error("{0}")]
    Audit(#[from] AuditError),
}

impl ShardSpec {
    /// Reads `K/N`.
    pub fn parse(text: &str) -> Result<ShardSpec, ShardError> {
        let bad = || ShardError::BadSpec {
            text: text.to_string(),
        };
        let (k, n) = text.trim().split_once('/').ok_or_else(bad)?;
        let whole = |s: &str| -> Option<usize> {
            let s = s.trim();
            if s.is_empty() || !s.bytes().all(|b| b.is_ascii_digit()) {
                return None;
            }
            s.parse().ok()
        };
        let (index, count) = (whole(k).ok_or_else(bad)?, whole(n).ok_or_else(bad)?);
        if index == 0 || index > count || count > MAX_SHARDS {
            return Err(bad());
        }
        Ok(ShardSpec { index, count })
    }

    /// Whether cell `cell` (counted from 0) belongs to this shard.
    pub fn owns(&self, cell: usize) -> bool {
        cell % self.count == self.index - 1
    }

    /// The cells of a plan of `plan_size` cells that this shard runs, in plan order.
    pub fn cells(&self, plan_size: usize) -> Vec<usize> {
        (self.index - 1..plan_size).step_by(self.count).collect()
    }

    /// The shard's file name inside its folder.
    pub fn file_name(&self) -> String {
        format!("shard-{}-of-{}.json", self.index, self.count)
    }
}

/// Where the audit's inputs came from, kept whole in every shard.
#[derive(Debug, Clone, PartialEq)]
pub struct Sources {
    /// The circuit file's name as given on the command line.
    pub circuit_file: String,
    pub circuit_text: String,
    pub circuit_sha256: String,
    /// A separate plan file: its name and text.
    pub plan_file: Option<(String, String)>,
    /// `--target`, when given.
    pub target: Option<f64>,
}

/// One shard: its runs and what they were made from.
#[derive(Debug, Clone, PartialEq)]
pub struct Shard {
    pub version: String,
    pub spec: ShardSpec,
    pub sources: Sources,
    pub cell_seconds: f64,
    pub plan_size: usize,
    pub created: String,
    pub command: String,
    pub threads: usize,
    /// `(cell index, run)` in plan order.
    pub cells: Vec<(usize, CellRun)>,
}

/// Runs the cells of `plan` that belong to `spec`, on `options.jobs` threads. `progress` is called once
/// per finished cell with whether it failed.
pub fn run_shard(
    circuit: &Circuit,
    plan: &Plan,
    spec: ShardSpec,
    options: &Options,
    progress: &(dyn Fn(bool) + Sync),
) -> Result<Vec<(usize, CellRun)>, AuditError> {
    plan.validate()?;
    let overrides = plan.overrides();
    let mine = spec.cells(overrides.len());
    let pool = pool(options.jobs.max(1))?;
    Ok(pool.install(|| {
        mine.par_iter()
            .map(|&i| {
                let (_, run) = simulate_cell(circuit, &overrides[i], options.cell_seconds);
                progress(run.failure.is_some());
                (i, run)
            })
            .collect()
    }))
}

/// A float as JSON: a number when finite, else "NaN", "inf" or "-inf".
pub fn float(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else if x.is_nan() {
        json!("NaN")
    } else if x > 0.0 {
        json!("inf")
    } else {
        json!("-inf")
    }
}

/// Reads back what [`float`] wrote.
pub fn read_float(v: &Value) -> Option<f64> {
    match v {
        Value::Number(n) => n.as_f64(),
        Value::String(s) => match s.as_str() {
            "NaN" => Some(f64::NAN),
            "inf" => Some(f64::INFINITY),
            "-inf" => Some(f64::NEG_INFINITY),
            _ => None,
        },
        _ => None,
    }
}

fn floats(xs: &[f64]) -> Value {
    Value::Array(xs.iter().map(|&x| float(x)).collect())
}

fn run_json(index: usize, r: &CellRun) -> Value {
    let s = &r.stats;
    json!({
        "index": index,
        "failure": r.failure,
        "stats": {
            "steps": s.steps,
            "rejected_steps": s.rejected_steps,
            "newton_iterations": s.newton_iterations,
            "factorizations": s.factorizations,
            "cpu_seconds": float(s.cpu_seconds),
        },
        "trajectory": r.trajectory.as_ref().map(|t| json!({
            "labels": t.labels,
            "times": floats(&t.times),
            "values": Value::Array(t.values.iter().map(|v| floats(v)).collect()),
        })),
    })
}

/// The shard document.
pub fn to_json(s: &Shard) -> Value {
    let src = &s.sources;
    json!({
        "schema": SCHEMA,
        "tool": { "name": "ringtrue", "version": s.version },
        "shard": { "index": s.spec.index, "count": s.spec.count },
        "circuit": {
            "file": src.circuit_file,
            "sha256": src.circuit_sha256,
            "text": src.circuit_text,
        },
        "plan_file": src.plan_file.as_ref().map(|(f, t)| json!({ "file": f, "text": t })),
        "target": src.target.map(float),
        "cell_seconds": float(s.cell_seconds),
        "plan_size": s.plan_size,
        "created": s.created,
        "command": s.command,
        "threads": s.threads,
        "cells": Value::Array(s.cells.iter().map(|(i, r)| run_json(*i, r)).collect()),
    })
}

/// Reads a shard document; `file` names it in errors.
pub fn from_json(text: &str, file: &str) -> Result<Shard, ShardError> {
    let corrupt = |message: String| ShardError::Corrupt {
        file: file.to_string(),
        message,
    };
    let v: Value = serde_json::from_str(text).map_err(|e| corrupt(format!("{e}")))?;
    let r = Reader { corrupt: &corrupt };
    match v.get("schema").and_then(Value::as_str) {
        Some(SCHEMA) => {}
        Some(other) => return Err(corrupt(format!("its schema is {other}, not {SCHEMA}"))),
        None => return Err(corrupt("it has no schema field".into())),
    }
    let version = r.str(&v, &["tool", "version"])?;
    let spec = ShardSpec {
        index: r.count(&v, &["shard", "index"])?,
        count: r.count(&v, &["shard", "count"])?,
    };
    if spec.index == 0 || spec.index > spec.count || spec.count > MAX_SHARDS {
        return Err(corrupt(format!(
            "shard {} of {} is not a shard number",
            spec.index, spec.count
        )));
    }
    let plan_file = match r.at(&v, &["plan_file"])? {
        Value::Null => None,
        p => Some((r.str(p, &["file"])?, r.str(p, &["text"])?)),
    };
    let target = match r.at(&v, &["target"])? {
        Value::Null => None,
        t => Some(r.float(t, "target")?),
    };
    let sources = Sources {
        circuit_file: r.str(&v, &["circuit", "file"])?,
        circuit_text: r.str(&v, &["circuit", "text"])?,
        circuit_sha256: r.str(&v, &["circuit", "sha256"])?,
        plan_file,
        target,
    };
    let cells_v = r
        .at(&v, &["cells"])?
        .as_array()
        .ok_or_else(|| corrupt("`cells` is not a list".into()))?;
    let mut cells = Vec::with_capacity(cells_v.len());
    for c in cells_v {
        cells.push(r.cell(c)?);
    }
    Ok(Shard {
        version,
        spec,
        sources,
        cell_seconds: r.float(r.at(&v, &["cell_seconds"])?, "cell_seconds")?,
        plan_size: r.count(&v, &["plan_size"])?,
        created: r.str(&v, &["created"])?,
        command: r.str(&v, &["command"])?,
        threads: r.count(&v, &["threads"])?,
        cells,
    })
}

/// Field access that says which field is wrong.
struct Reader<'a> {
    corrupt: &'a dyn Fn(String) -> ShardError,
}

impl Reader<'_> {
    fn at<'v>(&self, v: &'v Value, path: &[&str]) -> Result<&'v Value, ShardError> {
        let mut cur = v;
        for key in path {
            cur = cur.get(key).ok_or_else(|| {
                (self.corrupt)(format!("the field `{}` is missing", path.join(".")))
            })?;
        }
        Ok(cur)
    }
    fn str(&self, v: &Value, path: &[&str]) -> Result<String, ShardError> {
        self.at(v, path)?
            .as_str()
            .map(str::to_string)
            .ok_or_else(|| (self.corrupt)(format!("`{}` is not text", path.join("."))))
    }
    fn count(&self, v: &Value, path: &[&str]) -> Result<usize, ShardError> {
        self.at(v, path)?
            .as_u64()
            .and_then(|n| usize::try_from(n).ok())
            .ok_or_else(|| (self.corrupt)(format!("`{}` is not a whole number", path.join("."))))
    }
    fn float(&self, v: &Value, what: &str) -> Result<f64, ShardError> {
        read_float(v).ok_or_else(|| (self.corrupt)(format!("`{what}` is not a number")))
    }
    fn floats(&self, v: &Value, what: &str) -> Result<Vec<f64>, ShardError> {
        v.as_array()
            .ok_or_else(|| (self.corrupt)(format!("`{what}` is not a list")))?
            .iter()
            .map(|x| self.float(x, what))
            .collect()
    }
    fn cell(&self, c: &Value) -> Result<(usize, CellRun), ShardError> {
        let index = self.count(c, &["index"])?;
        let what = |f: &str| format!("cells[index {index}].{f}");
        let failure = match self.at(c, &["failure"])? {
            Value::Null => None,
            Value::String(s) => Some(s.clone()),
            _ => return Err((self.corrupt)(format!("`{}` is not text", what("failure")))),
        };
        let st = self.at(c, &["stats"])?;
        let stats = Stats {
            steps: self.count(st, &["steps"])? as u64,
            rejected_steps: self.count(st, &["rejected_steps"])? as u64,
            newton_iterations: self.count(st, &["newton_iterations"])? as u64,
            factorizations: self.count(st, &["factorizations"])? as u64,
            cpu_seconds: self.float(self.at(st, &["cpu_seconds"])?, &what("cpu_seconds"))?,
        };
        let trajectory = match self.at(c, &["trajectory"])? {
            Value::Null => None,
            t => {
                let labels = self
                    .at(t, &["labels"])?
                    .as_array()
                    .and_then(|ls| {
                        ls.iter()
                            .map(|l| l.as_str().map(str::to_string))
                            .collect::<Option<Vec<_>>>()
                    })
                    .ok_or_else(|| {
                        (self.corrupt)(format!("`{}` is not a list of text", what("labels")))
                    })?;
                let times = self.floats(self.at(t, &["times"])?, &what("times"))?;
                let values = self
                    .at(t, &["values"])?
                    .as_array()
                    .ok_or_else(|| (self.corrupt)(format!("`{}` is not a list", what("values"))))?
                    .iter()
                    .map(|v| self.floats(v, &what("values")))
                    .collect::<Result<Vec<_>, _>>()?;
                if times.is_empty()
                    || values.len() != labels.len()
                    || values.iter().any(|v| v.len() != times.len())
                {
                    return Err((self.corrupt)(format!(
                        "the waveform of cell {index} does not have one value per signal and time"
                    )));
                }
                if times.iter().any(|t| !t.is_finite()) || times.windows(2).any(|w| w[1] < w[0]) {
                    return Err((self.corrupt)(format!(
                        "the times of cell {index} are not finite and increasing"
                    )));
                }
                Some(Trajectory {
                    labels,
                    times,
                    values,
                })
            }
        };
        if failure.is_none() && trajectory.is_none() {
            return Err((self.corrupt)(format!(
                "cell {index} neither failed nor left a waveform"
            )));
        }
        Ok((
            index,
            CellRun {
                failure,
                stats,
                trajectory,
            },
        ))
    }
}

fn list(cells: &[usize]) -> String {
    if cells.is_empty() {
        return "none".into();
    }
    let mut s: Vec<String> = cells.iter().take(12).map(|c| c.to_string()).collect();
    if cells.len() > 12 {
        s.push(format!("... ({} in all)", cells.len()));
    }
    s.join(", ")
}

/// Checks that `shards` (each with the name of its file) are the complete, consistent set of one
/// sharded audit, and returns them ordered by shard index.
pub fn check(shards: &[(String, Shard)]) -> Result<Vec<&(String, Shard)>, ShardError> {
    let first = shards.first().ok_or(ShardError::Empty)?;
    let expected = env!("CARGO_PKG_VERSION");
    for (file, s) in shards {
        if s.version != expected {
            return Err(ShardError::Version {
                file: file.clone(),
                found: s.version.clone(),
                expected: expected.to_string(),
            });
        }
        let (f, a) = (&first.1, s);
        let differs = if a.sources.circuit_sha256 != f.sources.circuit_sha256
            || a.sources.circuit_text != f.sources.circuit_text
        {
            Some("circuit file")
        } else if a.sources.plan_file.as_ref().map(|p| &p.1)
            != f.sources.plan_file.as_ref().map(|p| &p.1)
        {
            Some("plan file")
        } else if a.sources.target.map(f64::to_bits) != f.sources.target.map(f64::to_bits) {
            Some("--target")
        } else if a.cell_seconds.to_bits() != f.cell_seconds.to_bits() {
            Some("--cell-seconds")
        } else if a.spec.count != f.spec.count {
            Some("shard count")
        } else if a.plan_size != f.plan_size {
            Some("plan size")
        } else {
            None
        };
        if let Some(what) = differs {
            return Err(ShardError::Mismatch {
                file: file.clone(),
                first: first.0.clone(),
                what,
            });
        }
    }
    let count = first.1.spec.count;
    let plan_size = first.1.plan_size;
    let mut by_index: Vec<Option<&(String, Shard)>> = vec![None; count];
    for entry in shards {
        let slot = &mut by_index[entry.1.spec.index - 1];
        if let Some(prev) = slot {
            return Err(ShardError::Duplicate {
                index: entry.1.spec.index,
                count,
                first: prev.0.clone(),
                second: entry.0.clone(),
            });
        }
        *slot = Some(entry);
    }
    let mut ordered = Vec::with_capacity(count);
    for (k, slot) in by_index.into_iter().enumerate() {
        let spec = ShardSpec {
            index: k + 1,
            count,
        };
        let Some(entry) = slot else {
            return Err(ShardError::Missing {
                index: k + 1,
                count,
                cells: list(&spec.cells(plan_size)),
                circuit: first.1.sources.circuit_file.clone(),
            });
        };
        let expected = spec.cells(plan_size);
        let found: Vec<usize> = entry.1.cells.iter().map(|c| c.0).collect();
        if found != expected {
            return Err(ShardError::WrongCells {
                file: entry.0.clone(),
                index: k + 1,
                count,
                plan_size,
                expected: list(&expected),
                found: list(&found),
            });
        }
        ordered.push(entry);
    }
    Ok(ordered)
}

/// Merges the complete set of shards of one audit of `circuit` under `plan` (rebuilt from the shards'
/// sources): builds the reference once, measures every cell on `jobs` threads and assembles the audit.
pub fn merge(
    circuit: &Circuit,
    plan: &Plan,
    shards: &[(String, Shard)],
    jobs: usize,
) -> Result<Audit, ShardError> {
    plan.validate().map_err(AuditError::from)?;
    let ordered = check(shards)?;
    let first = &ordered[0].1;
    if plan.size() != first.plan_size {
        return Err(ShardError::PlanSize {
            plan: plan.size(),
            shards: first.plan_size,
        });
    }
    let overrides = plan.overrides();
    let mut runs: Vec<Option<(&str, &CellRun)>> = vec![None; overrides.len()];
    for (file, s) in &ordered {
        for (i, r) in &s.cells {
            runs[*i] = Some((file.as_str(), r));
        }
    }
    let jobs = jobs.max(1);
    let pool = pool(jobs)?;
    let (prepared, cells) = pool.install(
        || -> Result<(super::Prepared, Vec<CellResult>), ShardError> {
            let prepared = prepare(circuit)?;
            for (i, slot) in runs.iter().enumerate() {
                let (file, r) = slot.expect("check() proved every cell present");
                if let Some(t) = &r.trajectory {
                    if t.labels != prepared.labels {
                        return Err(ShardError::WrongSignals {
                            file: file.to_string(),
                            cell: i,
                            found: t.labels.clone(),
                            expected: prepared.labels.clone(),
                        });
                    }
                }
            }
            let cells = runs
                .par_iter()
                .zip(overrides.par_iter())
                .map(|(slot, o)| {
                    let (_, r) = slot.expect("check() proved every cell present");
                    let settings = settings_for_cell(circuit, o, first.cell_seconds);
                    measure_cell(&prepared, o, settings, r.clone(), plan.target)
                })
                .collect();
            Ok((prepared, cells))
        },
    )?;
    Ok(assemble(circuit, plan, prepared, cells, jobs))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spec_parses_and_rejects() {
        assert_eq!(
            ShardSpec::parse("2/8").unwrap(),
            ShardSpec { index: 2, count: 8 }
        );
        for bad in [
            "0/3", "4/3", "a/b", "3", "", "/", "1/0", "-1/3", "1/3/4", "+1/3",
        ] {
            assert!(ShardSpec::parse(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn shards_cover_every_cell_once() {
        for count in 1..7 {
            for size in 0..20 {
                let mut seen = vec![0; size];
                for index in 1..=count {
                    let spec = ShardSpec { index, count };
                    for c in spec.cells(size) {
                        assert!(spec.owns(c));
                        seen[c] += 1;
                    }
                }
                assert!(seen.iter().all(|&n| n == 1), "{count} shards of {size}");
            }
        }
    }

    #[test]
    fn floats_read_back_to_the_same_bits() {
        let xs = [
            -0.0,
            0.0,
            f64::MIN_POSITIVE,
            5e-324,
            f64::MAX,
            -f64::MAX,
            1.0 / 3.0,
            0.1 + 0.2,
            1e-300 * 3.7,
            123_456_789.012_345_67,
            f64::INFINITY,
            f64::NEG_INFINITY,
        ];
        for &x in &xs {
            let text = serde_json::to_string(&float(x)).unwrap();
            let back = read_float(&serde_json::from_str(&text).unwrap()).unwrap();
            assert_eq!(back.to_bits(), x.to_bits(), "{x:e} wrote {text}");
        }
        let nan = read_float(
            &serde_json::from_str(&serde_json::to_string(&float(f64::NAN)).unwrap()).unwrap(),
        )
        .unwrap();
        assert!(nan.is_nan());
        // A pseudo-random sweep over bit patterns (xorshift64, Marsaglia 2003).
        let mut s = 0x9E37_79B9_7F4A_7C15u64;
        for _ in 0..20_000 {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            let x = f64::from_bits(s);
            if !x.is_finite() {
                continue;
            }
            let text = serde_json::to_string(&float(x)).unwrap();
            let back = read_float(&serde_json::from_str(&text).unwrap()).unwrap();
            assert_eq!(back.to_bits(), x.to_bits(), "{x:e} wrote {text}");
        }
    }
}
