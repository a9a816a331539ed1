//! `results.json`: the audit as other tools and CI scripts read it (schema `ringtrue.audit/1`). Fields
//! that hold times say so in their names (`cpu_seconds`, `created`); everything else is identical
//! between runs and between thread counts.

use super::{Audit, CellResult, EvidenceValue, Flag};
use serde_json::{json, Map, Value};
use sha2::{Digest, Sha256};

pub const SCHEMA: &str = "ringtrue.audit/1";

/// Lower-case hexadecimal sha256 of `bytes`.
pub fn sha256_hex(bytes: &[u8]) -> String {
    let digest = Sha256::digest(bytes);
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

/// A number, or null when it is not finite (JSON has no NaN).
pub fn num(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else {
        Value::Null
    }
}

fn opt(x: Option<f64>) -> Value {
    x.map_or(Value::Null, num)
}

pub fn flag_json(f: &Flag) -> Value {
    let mut evidence = Map::new();
    for (k, v) in &f.evidence {
        evidence.insert(
            k.clone(),
            match v {
                EvidenceValue::Number(x) => num(*x),
                EvidenceValue::Text(s) => json!(s),
            },
        );
    }
    json!({
        "kind": f.kind.as_str(),
        "signal": f.signal,
        "t_start": num(f.t_start),
        "t_end": num(f.t_end),
        "severity": num(f.severity),
        "evidence": Value::Object(evidence),
    })
}

/// One cell's settings as written in the results (effective values, so a reader needs no defaults).
pub fn settings_json(c: &CellResult, stop: f64) -> Map<String, Value> {
    let s = &c.settings;
    let mut m = Map::new();
    m.insert("method".into(), json!(s.method.as_str()));
    m.insert("rtol".into(), num(s.tolerances.rtol));
    m.insert("atol_v".into(), num(s.tolerances.atol_v));
    m.insert("atol_i".into(), num(s.tolerances.atol_i));
    m.insert("lte_factor".into(), num(s.tolerances.lte_factor));
    m.insert("max_step".into(), num(s.steps.effective_max_step(stop)));
    m.insert("fixed_step".into(), opt(s.steps.fixed_step));
    m.insert("restart".into(), json!(s.steps.restart.as_str()));
    m.insert("scale".into(), json!(s.tolerances.scale.as_str()));
    m.insert("start".into(), json!(s.start.as_str()));
    m
}

fn cell_json(index: usize, c: &CellResult, stop: f64) -> Value {
    let mut m = Map::new();
    m.insert("index".into(), json!(index));
    m.extend(settings_json(c, stop));
    m.insert("status".into(), json!(if c.ok() { "ok" } else { "failed" }));
    m.insert(
        "failure".into(),
        c.failure.as_ref().map_or(Value::Null, |f| json!(f)),
    );
    m.insert("max_error".into(), opt(c.max_error));
    let mut signals = Map::new();
    for (label, e) in &c.signals {
        signals.insert(
            label.clone(),
            json!({
                "max_error": num(e.max_error),
                "max_abs_error": num(e.max_abs_error),
                "rms_error": num(e.rms_error),
                "worst_time": num(e.worst_time),
            }),
        );
    }
    m.insert("signals".into(), Value::Object(signals));
    m.insert("steps".into(), json!(c.stats.steps));
    m.insert("rejected_steps".into(), json!(c.stats.rejected_steps));
    m.insert("newton_iterations".into(), json!(c.stats.newton_iterations));
    m.insert("factorizations".into(), json!(c.stats.factorizations));
    m.insert("cpu_seconds".into(), num(c.stats.cpu_seconds));
    m.insert("meets_target".into(), json!(c.meets_target));
    m.insert(
        "flags".into(),
        Value::Array(c.flags.iter().map(flag_json).collect()),
    );
    Value::Object(m)
}

/// Where the audit came from, for the record.
pub struct Provenance<'a> {
    pub file: &'a str,
    pub title: &'a str,
    pub sha256: &'a str,
    pub created: &'a str,
    pub command: &'a str,
    pub stop: f64,
}

/// The whole results document.
pub fn results_json(a: &Audit, p: &Provenance) -> Value {
    let cells: Vec<Value> = a
        .cells
        .iter()
        .enumerate()
        .map(|(i, c)| cell_json(i, c, p.stop))
        .collect();
    let recommendation = match a.recommendation {
        Some(i) => {
            let c = &a.cells[i];
            let mut m = Map::new();
            m.insert("cell".into(), json!(i));
            m.extend(settings_json(c, p.stop));
            m.insert("max_error".into(), opt(c.max_error));
            m.insert("newton_iterations".into(), json!(c.stats.newton_iterations));
            m.insert("steps".into(), json!(c.stats.steps));
            m.insert("reason".into(), json!(a.recommendation_reason));
            Value::Object(m)
        }
        None => Value::Null,
    };
    let mut methods = Map::new();
    for ms in &a.methods {
        let pairs: Vec<Value> = ms
            .cells
            .iter()
            .filter(|&&i| a.cells[i].ok())
            .map(|&i| {
                let c = &a.cells[i];
                json!({
                    "cell": i,
                    "rtol": num(c.settings.tolerances.rtol),
                    "steps": c.stats.steps,
                    "newton_iterations": c.stats.newton_iterations,
                    "cpu_seconds": num(c.stats.cpu_seconds),
                    "max_error": opt(c.max_error),
                })
            })
            .collect();
        methods.insert(
            ms.method.as_str().into(),
            json!({
                "theoretical_order": ms.theoretical_order,
                "observed_order": opt(ms.observed_order),
                "order_cells": ms.order_cells,
                "work_precision": pairs,
            }),
        );
    }
    let plan = &a.plan;
    let list = |v: Vec<Value>| Value::Array(v);
    let plan_json = json!({
        "methods": list(plan.methods.iter().map(|m| json!(m.as_str())).collect()),
        "rtol": list(plan.rtol.iter().map(|&x| num(x)).collect()),
        "atol_v": list(plan.atol_v.iter().map(|&x| opt(x)).collect()),
        "atol_i": list(plan.atol_i.iter().map(|&x| opt(x)).collect()),
        "lte_factor": list(plan.lte_factor.iter().map(|&x| opt(x)).collect()),
        "max_step": list(plan.max_step.iter().map(|&x| opt(x)).collect()),
        "fixed_step": list(plan.fixed_step.iter().map(|&x| opt(x)).collect()),
        "restart": list(plan.restart.iter().map(|x| x.map_or(Value::Null, |r| json!(r.as_str()))).collect()),
        "scale": list(plan.scale.iter().map(|x| x.map_or(Value::Null, |r| json!(r.as_str()))).collect()),
        "step_budget": list(plan.step_budget.iter().map(|x| x.map_or(Value::Null, |b| json!(b))).collect()),
        "target": num(plan.target),
    });
    let mut signals = Map::new();
    for (l, p) in a.labels.iter().zip(&a.peaks) {
        signals.insert(l.clone(), json!({ "peak": num(*p) }));
    }
    json!({
        "schema": SCHEMA,
        "tool": { "name": "ringtrue", "version": env!("CARGO_PKG_VERSION") },
        "circuit": { "name": a.circuit, "title": p.title, "file": p.file, "sha256": p.sha256 },
        "created": p.created,
        "command": p.command,
        "threads": a.threads,
        "reference": {
            "kind": a.reference.kind.label(),
            "error_bound": num(a.reference.error_bound),
            "warning": a.reference.warning.as_ref().map_or(Value::Null, |w| json!(w)),
        },
        "target": num(a.target),
        "plan": plan_json,
        "signals": Value::Object(signals),
        "cells": cells,
        "recommendation": recommendation,
        "recommendation_reason": a.recommendation_reason,
        "methods": Value::Object(methods),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_of_known_text() {
        // FIPS 180-2, appendix B.1: sha256("abc")
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn non_finite_numbers_become_null() {
        assert_eq!(num(f64::NAN), Value::Null);
        assert_eq!(num(f64::INFINITY), Value::Null);
        assert_eq!(num(0.5), json!(0.5));
    }
}
