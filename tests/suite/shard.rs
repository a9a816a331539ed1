//! Sharded audits: a merge of the shards equals the unsharded audit apart from timing fields (through
//! the command line, with the shards in one folder or in several), shard files read back to the same
//! bits (so a merge of an audit's own cells is byte-identical), and every way a set of shards can be
//! wrong exits 2 with a message that names the file.

use crate::common::{ringtrue, scratch};
use ringtrue::audit::{self, results, shard};
use serde_json::Value;
use std::path::Path;

/// The stiff-shunt circuit's fixed-step study widened to every method, with a step budget that makes
/// the 5 ns cells fail: ringing flags, damping-free cells and failed cells all go through the merge.
const PLAN: &str = "\
methods: [trapezoidal, bdf2, backward-euler, tr-bdf2]
rtol: [1e-3]
fixed_step: [20n, 5n]
restart: [same, backward-euler]
step_budget: [100000, 400]
target: 1e-3
";

const CIRCUIT: &str = "reference_circuits/inductor-ramp-stiff-shunt.yaml";

/// results.json without the fields that record when, how and how fast it ran.
fn results_without_timing(dir: &Path) -> Value {
    fn strip(v: &mut Value) {
        match v {
            Value::Object(m) => {
                m.remove("cpu_seconds");
                m.values_mut().for_each(strip);
            }
            Value::Array(a) => a.iter_mut().for_each(strip),
            _ => {}
        }
    }
    let text = std::fs::read_to_string(dir.join("results.json")).expect("results.json");
    let mut v: Value = serde_json::from_str(&text).expect("results.json is JSON");
    let m = v.as_object_mut().unwrap();
    for k in ["created", "command", "threads"] {
        assert!(m.remove(k).is_some(), "results.json has {k}");
    }
    strip(&mut v);
    v
}

/// Cuts the element that starts at `open` and ends at the next `close`, keeping a marker.
fn cut(html: &str, open: &str, close: &str) -> String {
    let a = html
        .find(open)
        .unwrap_or_else(|| panic!("report has {open}"));
    let b = a + html[a..].find(close).expect("element closes") + close.len();
    format!("{}[{open}]{}", &html[..a], &html[b..])
}

/// report.html without the cpu-time figure and the provenance rows that record the run.
fn report_without_timing(dir: &Path) -> String {
    let html = std::fs::read_to_string(dir.join("report.html")).expect("report.html");
    let html = cut(
        &html,
        "<figure data-figure=\"work-precision-cpu\"",
        "</figure>",
    );
    let html = cut(&html, "<dt>created</dt>", "</dd>");
    let html = cut(&html, "<dt>threads</dt>", "</dd>");
    cut(&html, "<div class=\"cmd mono\">", "</div>")
}

#[test]
fn merged_shards_equal_the_unsharded_audit() {
    let d = scratch("shard-cli");
    let plan = d.join("plan.yaml");
    std::fs::write(&plan, PLAN).unwrap();
    let plan = plan.to_str().unwrap();
    let full = d.join("full");
    let o = ringtrue(&[
        "audit",
        CIRCUIT,
        "--plan",
        plan,
        "--jobs",
        "2",
        "--out",
        full.to_str().unwrap(),
    ]);
    assert!(o.code == 0 || o.code == 1, "{}", o.stderr);
    let unsharded = results_without_timing(&full);
    let cells = unsharded["cells"].as_array().unwrap();
    assert_eq!(cells.len(), 32);
    // The plan must exercise failures and flags, or the comparison proves less than it claims.
    assert!(cells.iter().any(|c| c["status"] == "failed"));
    assert!(cells.iter().any(|c| c["status"] == "ok"));
    assert!(cells
        .iter()
        .any(|c| !c["flags"].as_array().unwrap().is_empty()));

    // Three shards in one folder, one thread each.
    let parts = d.join("parts");
    run_shards(plan, 3, &["--jobs", "1"], |_| parts.clone());
    let merged = d.join("merged");
    let o = ringtrue(&[
        "merge",
        parts.to_str().unwrap(),
        "--out",
        merged.to_str().unwrap(),
    ]);
    assert_eq!(o.code, full_code(&full), "{}", o.stderr);
    assert_eq!(results_without_timing(&merged), unsharded);
    assert_eq!(report_without_timing(&merged), report_without_timing(&full));

    // Five shards (more than some hold) in separate folders, merged into the first folder.
    let dirs: Vec<String> = run_shards(plan, 5, &[], |k| d.join(format!("task{k}")))
        .iter()
        .map(|p| p.to_str().unwrap().to_string())
        .collect();
    let mut args = vec!["merge"];
    args.extend(dirs.iter().map(String::as_str));
    let o = ringtrue(&args);
    assert_eq!(o.code, full_code(&full), "{}", o.stderr);
    let first = d.join("task1");
    assert_eq!(results_without_timing(&first), unsharded);
    assert_eq!(report_without_timing(&first), report_without_timing(&full));
}

/// Runs shards 1..=n of CIRCUIT under `plan`, shard k into `dir(k)`, and returns the folders.
fn run_shards(
    plan: &str,
    n: usize,
    extra: &[&str],
    dir: impl Fn(usize) -> std::path::PathBuf,
) -> Vec<std::path::PathBuf> {
    (1..=n)
        .map(|k| {
            let dk = dir(k);
            let spec = format!("{k}/{n}");
            let mut args = vec!["audit", CIRCUIT, "--plan", plan, "--shard", &spec];
            args.extend_from_slice(extra);
            args.extend(["--out", dk.to_str().unwrap()]);
            let o = ringtrue(&args);
            assert_eq!(o.code, 0, "{}", o.stderr);
            assert!(dk.join(format!("shard-{k}-of-{n}.json")).is_file());
            dk
        })
        .collect()
}

/// The exit code the unsharded audit gave, from its results (0 with a recommendation, 1 without).
fn full_code(full: &Path) -> i32 {
    let v = results_without_timing(full);
    if v["recommendation"].is_null() {
        1
    } else {
        0
    }
}

#[test]
fn a_merge_of_an_audits_own_cells_is_byte_identical() {
    let text = std::fs::read_to_string("reference_circuits/gate-drive-rlc.yaml").unwrap();
    let c = ringtrue::circuit::parse(&text, "gate-drive-rlc.yaml").unwrap();
    let plan = match &c.plan {
        Some(raw) => audit::Plan::from_raw(raw).unwrap(),
        None => audit::Plan::default(),
    };
    let options = audit::Options {
        jobs: 2,
        cell_seconds: 600.0,
    };
    let a = audit::run(&c, &plan, &options, &|_| {}).unwrap();
    let sources = shard::Sources {
        circuit_file: c.file.clone(),
        circuit_sha256: results::sha256_hex(text.as_bytes()),
        circuit_text: text.clone(),
        plan_file: None,
        target: None,
    };
    let count = 4;
    let shards: Vec<(String, shard::Shard)> = (1..=count)
        .map(|index| {
            let spec = shard::ShardSpec { index, count };
            let s = shard::Shard {
                version: env!("CARGO_PKG_VERSION").to_string(),
                spec,
                sources: sources.clone(),
                cell_seconds: options.cell_seconds,
                plan_size: plan.size(),
                created: "2026-12-02T00:00:00Z".into(),
                command: "test".into(),
                threads: 1,
                cells: spec
                    .cells(plan.size())
                    .into_iter()
                    .map(|i| {
                        let x = &a.cells[i];
                        let run = audit::CellRun {
                            failure: x.failure.clone(),
                            stats: x.stats,
                            trajectory: x.trajectory.clone(),
                        };
                        (i, run)
                    })
                    .collect(),
            };
            // Through the file format and back.
            let name = spec.file_name();
            let json = serde_json::to_string(&shard::to_json(&s)).unwrap();
            let back = shard::from_json(&json, &name).unwrap();
            assert_eq!(back, s, "{name} reads back as written");
            (name, back)
        })
        .collect();
    // Given out of order: the merge orders them.
    let mut shuffled = shards.clone();
    shuffled.reverse();
    let m = shard::merge(&c, &plan, &shuffled, 2).unwrap();
    let prov = results::Provenance {
        file: &c.file,
        title: &c.title,
        sha256: &sources.circuit_sha256,
        created: "now",
        command: "ringtrue audit",
        stop: c.run.stop,
    };
    let a_json = serde_json::to_string_pretty(&results::results_json(&a, &prov)).unwrap();
    let m_json = serde_json::to_string_pretty(&results::results_json(&m, &prov)).unwrap();
    assert_eq!(a_json, m_json);
    assert_eq!(
        ringtrue::report::render(&a, &c, &prov),
        ringtrue::report::render(&m, &c, &prov)
    );
}

#[test]
fn wrong_shard_sets_exit_2_naming_the_file() {
    let d = scratch("shard-errors");
    let c = "reference_circuits/gate-drive-rlc.yaml";
    let small_plan = d.join("plan.yaml");
    std::fs::write(
        &small_plan,
        "methods: [tr-bdf2, bdf2]\nrtol: [1e-3, 1e-4]\n",
    )
    .unwrap();
    let plan = small_plan.to_str().unwrap();
    let run = |k: usize, n: usize, dir: &str, extra: &[&str]| {
        let out = d.join(dir);
        let spec = format!("{k}/{n}");
        let mut args = vec![
            "audit",
            c,
            "--plan",
            plan,
            "--shard",
            &spec,
            "--out",
            out.to_str().unwrap(),
        ];
        args.extend_from_slice(extra);
        let o = ringtrue(&args);
        assert_eq!(o.code, 0, "{}", o.stderr);
        out
    };
    let a = run(1, 3, "a", &[]);
    run(3, 3, "a", &[]);
    // Missing: shard 2 of 3, with the cells it holds and the command that makes it.
    let o = ringtrue(&["merge", a.to_str().unwrap()]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(o.stderr.contains("shard 2 of 3"), "{}", o.stderr);
    assert!(o.stderr.contains("--shard 2/3"), "{}", o.stderr);
    // Duplicate: the same shard in two folders.
    let b = run(1, 3, "b", &[]);
    run(2, 3, "a", &[]);
    let o = ringtrue(&["merge", a.to_str().unwrap(), b.to_str().unwrap()]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(o.stderr.contains("appears twice"), "{}", o.stderr);
    assert!(o.stderr.contains("shard-1-of-3.json"), "{}", o.stderr);
    // The complete set merges.
    let o = ringtrue(&["merge", a.to_str().unwrap()]);
    assert!(o.code == 0 || o.code == 1, "{}", o.stderr);
    // Mismatched: a shard made with another target.
    let m = run(2, 3, "m", &["--target", "1e-2"]);
    let o = ringtrue(&[
        "merge",
        a.join("shard-1-of-3.json").to_str().unwrap(),
        m.join("shard-2-of-3.json").to_str().unwrap(),
        a.join("shard-3-of-3.json").to_str().unwrap(),
    ]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(o.stderr.contains("--target"), "{}", o.stderr);
    // Mismatched: another shard count.
    let n = run(2, 4, "n", &[]);
    let o = ringtrue(&["merge", a.to_str().unwrap(), n.to_str().unwrap()]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(o.stderr.contains("shard count"), "{}", o.stderr);
    // Corrupt: cut short, and with its circuit edited behind its hash.
    let s2 = std::fs::read_to_string(a.join("shard-2-of-3.json")).unwrap();
    let corrupt = d.join("corrupt");
    std::fs::create_dir_all(&corrupt).unwrap();
    for k in [1, 3] {
        std::fs::copy(
            a.join(format!("shard-{k}-of-3.json")),
            corrupt.join(format!("shard-{k}-of-3.json")),
        )
        .unwrap();
    }
    std::fs::write(corrupt.join("shard-2-of-3.json"), &s2[..s2.len() / 2]).unwrap();
    let o = ringtrue(&["merge", corrupt.to_str().unwrap()]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(o.stderr.contains("shard-2-of-3.json"), "{}", o.stderr);
    assert!(o.stderr.contains("not a shard file"), "{}", o.stderr);
    let mut v: Value = serde_json::from_str(&s2).unwrap();
    let t = v["circuit"]["text"]
        .as_str()
        .unwrap()
        .replace("stop:", "stop: ");
    v["circuit"]["text"] = Value::String(t);
    for k in 1..=3 {
        let p = corrupt.join(format!("shard-{k}-of-3.json"));
        let mut w: Value = serde_json::from_str(
            &std::fs::read_to_string(a.join(format!("shard-{k}-of-3.json"))).unwrap(),
        )
        .unwrap();
        w["circuit"]["text"] = v["circuit"]["text"].clone();
        std::fs::write(&p, serde_json::to_string(&w).unwrap()).unwrap();
    }
    let o = ringtrue(&["merge", corrupt.to_str().unwrap()]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(o.stderr.contains("sha256"), "{}", o.stderr);
    // A folder without shards, and a path that is not there.
    let empty = d.join("empty");
    std::fs::create_dir_all(&empty).unwrap();
    let o = ringtrue(&["merge", empty.to_str().unwrap()]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(o.stderr.contains("no shard files"), "{}", o.stderr);
    let o = ringtrue(&["merge", d.join("nowhere").to_str().unwrap()]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    // Bad --shard specs.
    for bad in ["0/3", "4/3", "a/b", "3"] {
        let o = ringtrue(&["audit", c, "--shard", bad, "--out", empty.to_str().unwrap()]);
        assert_eq!(o.code, 2, "--shard {bad}: {}", o.stderr);
        assert!(o.stderr.contains("K/N"), "{}", o.stderr);
    }
}
