//! Sign-off: exit codes of passing and failing projects, the record's hashes against an independent
//! sha256 (itself checked against the FIPS 180-2 "abc" vector in audit::results), `--verify` on edited,
//! missing and untouched files, determinism, the suggested setting really passing, and bad project files.

use crate::common::{ringtrue, scratch, Outcome};
use ringtrue::audit::results::sha256_hex;
use serde_json::Value;
use std::path::{Path, PathBuf};

const RC: &str = "\
name: rc
title: RC low-pass
elements:
  - { kind: voltage_source, name: vin, nodes: [in, gnd], waveform: { step: { from: 0, to: 1, at: 100n } } }
  - { kind: resistor, name: r1, nodes: [in, out], value: 1k }
  - { kind: capacitor, name: c1, nodes: [out, gnd], value: 1n }
run:
  stop: 5u
watch: [out]
";

const RLC: &str = "\
name: rlc
title: Underdamped series RLC
elements:
  - { kind: voltage_source, name: vin, nodes: [in, gnd], waveform: { step: { to: 1 } } }
  - { kind: resistor, name: r1, nodes: [in, mid], value: 10 }
  - { kind: inductor, name: l1, nodes: [mid, out], value: 1u }
  - { kind: capacitor, name: c1, nodes: [out, gnd], value: 1n }
run:
  stop: 2u
watch: [out, l1.current]
";

const PASSING: &str = "\
project: demo
settings:
  method: tr-bdf2
  rtol: 1e-6
target: 1e-3
circuits:
  - circuits/rc.yaml
  - { file: circuits/rlc.yaml, watch: [out] }
";

/// A folder with the two circuits under circuits/ and `project` as project.yaml.
fn setup(name: &str, project: &str) -> PathBuf {
    let d = scratch(name);
    std::fs::create_dir_all(d.join("circuits")).unwrap();
    std::fs::write(d.join("circuits/rc.yaml"), RC).unwrap();
    std::fs::write(d.join("circuits/rlc.yaml"), RLC).unwrap();
    std::fs::write(d.join("project.yaml"), project).unwrap();
    d
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

fn signoff(dir: &Path, out: &str, extra: &[&str]) -> Outcome {
    let project = dir.join("project.yaml");
    let out = dir.join(out);
    let mut args = vec!["signoff", s(&project), "--out", s(&out)];
    args.extend_from_slice(extra);
    ringtrue(&args)
}

fn record(path: &Path) -> Value {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).unwrap()
}

fn no_panic(o: &Outcome) {
    assert!(
        !o.stderr.contains("panicked") && !o.stdout.contains("panicked"),
        "{}",
        o.stderr
    );
}

#[test]
fn a_passing_project_exits_0_and_records_independent_hashes() {
    let d = setup("signoff-pass", PASSING);
    let o = signoff(&d, "out", &[]);
    assert_eq!(o.code, 0, "{}\n{}", o.stdout, o.stderr);
    let r = record(&d.join("out/signoff.json"));
    assert_eq!(r["schema"], "ringtrue.signoff/1");
    assert_eq!(r["project"], "demo");
    assert_eq!(r["passed"], true);
    assert_eq!(r["settings"]["method"], "tr-bdf2");
    assert_eq!(r["settings"]["rtol"].as_f64(), Some(1e-6));
    assert_eq!(r["target"].as_f64(), Some(1e-3));
    assert_eq!(r["tool"]["version"], env!("CARGO_PKG_VERSION"));
    assert_eq!(
        r["project_sha256"].as_str().unwrap(),
        sha256_hex(&std::fs::read(d.join("project.yaml")).unwrap())
    );
    let cs = r["circuits"].as_array().unwrap();
    assert_eq!(cs.len(), 2);
    for (c, file) in cs.iter().zip(["circuits/rc.yaml", "circuits/rlc.yaml"]) {
        assert_eq!(c["file"], file);
        assert_eq!(
            c["sha256"].as_str().unwrap(),
            sha256_hex(&std::fs::read(d.join(file)).unwrap()),
            "{file}"
        );
        assert_eq!(c["passed"], true, "{c}");
        assert_eq!(c["reference"]["kind"], "exact");
        let e = c["max_error"].as_f64().unwrap();
        assert!(e > 0.0 && e <= 1e-3, "{file}: {e}");
        assert!(c.get("would_pass").is_none(), "{c}");
    }
    // the project's watch list replaced the circuit's
    assert_eq!(cs[1]["watch"], serde_json::json!(["out"]));
    let html = std::fs::read_to_string(d.join("out/signoff.html")).unwrap();
    assert!(html.contains("circuits/rlc.yaml") && html.contains("PASS"));
    assert!(!html.contains("FAIL"));
    assert!(
        !html.contains("src=") && !html.contains("href=") && !html.contains("http"),
        "the page must be self-contained"
    );
}

#[test]
fn a_failing_project_exits_1_and_names_the_failing_file() {
    let project = "\
project: demo
settings: { method: backward-euler, rtol: 1e-2 }
target: 1e-4
circuits:
  - { file: circuits/rc.yaml, target: 5e-2 }
  - circuits/rlc.yaml
";
    let d = setup("signoff-fail", project);
    let o = signoff(&d, "out", &[]);
    assert_eq!(o.code, 1, "{}\n{}", o.stdout, o.stderr);
    assert!(o.stdout.contains("PASS circuits/rc.yaml"), "{}", o.stdout);
    assert!(o.stdout.contains("FAIL circuits/rlc.yaml"), "{}", o.stdout);
    assert!(o.stderr.contains("circuits/rlc.yaml"), "{}", o.stderr);
    assert!(!o.stderr.contains("circuits/rc.yaml"), "{}", o.stderr);
    let r = record(&d.join("out/signoff.json"));
    assert_eq!(r["passed"], false);
    let cs = r["circuits"].as_array().unwrap();
    assert_eq!(cs[0]["passed"], true);
    assert_eq!(cs[1]["file"], "circuits/rlc.yaml");
    assert_eq!(cs[1]["passed"], false);
    assert!(cs[1]["max_error"].as_f64().unwrap() > 1e-4);
    // would_pass is given: a setting with its reason, or null with the reason there is none
    match &cs[1]["would_pass"] {
        Value::Object(w) => {
            assert!(w["method"].is_string() && w["rtol"].is_number() && w["reason"].is_string())
        }
        Value::Null => assert!(!cs[1]["would_pass_reason"].as_str().unwrap().is_empty()),
        other => panic!("would_pass is {other}"),
    }
    let html = std::fs::read_to_string(d.join("out/signoff.html")).unwrap();
    assert!(html.contains("FAIL"));
}

#[test]
fn the_suggested_setting_passes_when_rerun() {
    let project = "\
project: demo
settings: { method: backward-euler, rtol: 1e-2 }
circuits: [circuits/rlc.yaml]
";
    let d = setup("signoff-suggest", project);
    let o = signoff(&d, "out", &[]);
    assert_eq!(o.code, 1, "{}\n{}", o.stdout, o.stderr);
    let r = record(&d.join("out/signoff.json"));
    let w = &r["circuits"][0]["would_pass"];
    let (method, rtol) = (w["method"].as_str().unwrap(), w["rtol"].as_f64().unwrap());
    assert_eq!(w["plan"], "default");
    assert!(w["max_error"].as_f64().unwrap() <= 1e-3);
    let again = format!(
        "project: demo\nsettings: {{ method: {method}, rtol: {rtol:e} }}\ncircuits: [circuits/rlc.yaml]\n"
    );
    std::fs::write(d.join("project.yaml"), again).unwrap();
    let o = signoff(&d, "out2", &[]);
    assert_eq!(o.code, 0, "{method} {rtol}: {}\n{}", o.stdout, o.stderr);
    let r2 = record(&d.join("out2/signoff.json"));
    assert_eq!(
        r2["circuits"][0]["max_error"], w["max_error"],
        "the rerun reproduces the audit cell's error"
    );
}

#[test]
fn verify_passes_untouched_files_and_names_edited_and_missing_ones() {
    let d = setup("signoff-verify", PASSING);
    let o = signoff(&d, "reports/demo", &[]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let rec = d.join("reports/demo/signoff.json");
    let v = ringtrue(&["signoff", "--verify", s(&rec)]);
    assert_eq!(v.code, 0, "{}\n{}", v.stdout, v.stderr);
    assert!(
        v.stdout.contains("unchanged: circuits/rlc.yaml"),
        "{}",
        v.stdout
    );

    // verify works from another working directory: paths are resolved from the record
    let moved = std::process::Command::new(env!("CARGO_BIN_EXE_ringtrue"))
        .args(["signoff", "--verify", s(&rec)])
        .current_dir(d.join("circuits"))
        .output()
        .unwrap();
    assert_eq!(moved.status.code(), Some(0), "{moved:?}");

    let mut text = std::fs::read_to_string(d.join("circuits/rlc.yaml")).unwrap();
    text = text.replace("value: 10 }", "value: 12 }");
    std::fs::write(d.join("circuits/rlc.yaml"), &text).unwrap();
    let v = ringtrue(&["signoff", "--verify", s(&rec)]);
    assert_eq!(v.code, 1, "{}\n{}", v.stdout, v.stderr);
    assert!(
        v.stdout.contains("changed:   circuits/rlc.yaml"),
        "{}",
        v.stdout
    );
    assert!(
        v.stdout.contains("unchanged: circuits/rc.yaml"),
        "{}",
        v.stdout
    );
    assert!(v.stderr.contains("circuits/rlc.yaml"), "{}", v.stderr);
    assert!(!v.stderr.contains("circuits/rc.yaml"), "{}", v.stderr);

    std::fs::write(d.join("circuits/rlc.yaml"), RLC).unwrap();
    let v = ringtrue(&["signoff", "--verify", s(&rec)]);
    assert_eq!(
        v.code, 0,
        "restoring the file restores the record: {}",
        v.stdout
    );

    std::fs::remove_file(d.join("circuits/rc.yaml")).unwrap();
    let v = ringtrue(&["signoff", "--verify", s(&rec)]);
    assert_eq!(v.code, 1);
    assert!(
        v.stdout.contains("missing:   circuits/rc.yaml"),
        "{}",
        v.stdout
    );

    // a change to the project file (the setting) is a change too
    std::fs::write(d.join("circuits/rc.yaml"), RC).unwrap();
    std::fs::write(d.join("project.yaml"), PASSING.replace("1e-6", "1e-5")).unwrap();
    let v = ringtrue(&["signoff", "--verify", s(&rec)]);
    assert_eq!(v.code, 1);
    assert!(v.stdout.contains("changed:   project file"), "{}", v.stdout);
}

#[test]
fn verify_refuses_unreadable_records_with_exit_2() {
    let d = scratch("signoff-verify-bad");
    let cases = [
        ("garbage.json", "{ not json"),
        ("schema.json", "{\"schema\": \"ringtrue.audit/1\"}"),
        ("fields.json", "{\"schema\": \"ringtrue.signoff/1\"}"),
    ];
    for (name, text) in cases {
        let p = d.join(name);
        std::fs::write(&p, text).unwrap();
        let v = ringtrue(&["signoff", "--verify", s(&p)]);
        assert_eq!(v.code, 2, "{name}: {}", v.stderr);
        assert!(v.stderr.contains(name), "{name}: {}", v.stderr);
        no_panic(&v);
    }
    let v = ringtrue(&["signoff", "--verify", s(&d.join("absent.json"))]);
    assert_eq!(v.code, 2);
    assert!(v.stderr.contains("absent.json"));
}

fn strip_times(v: &mut Value) {
    match v {
        Value::Object(m) => {
            m.remove("created");
            m.remove("cpu_seconds");
            m.values_mut().for_each(strip_times);
        }
        Value::Array(a) => a.iter_mut().for_each(strip_times),
        _ => {}
    }
}

#[test]
fn two_runs_give_identical_records_apart_from_times() {
    let project = "\
project: demo
settings: { method: backward-euler, rtol: 1e-2 }
circuits: [circuits/rc.yaml, circuits/rlc.yaml]
";
    let d = setup("signoff-determinism", project);
    let a = signoff(&d, "one", &["--jobs", "1"]);
    let b = signoff(&d, "two", &["--jobs", "3"]);
    assert_eq!((a.code, b.code), (1, 1), "{}\n{}", a.stderr, b.stderr);
    let (mut ra, mut rb) = (
        record(&d.join("one/signoff.json")),
        record(&d.join("two/signoff.json")),
    );
    assert!(ra["created"].is_string());
    assert!(ra["circuits"][0]["cpu_seconds"].is_number());
    strip_times(&mut ra);
    strip_times(&mut rb);
    assert_eq!(ra, rb);
}

#[test]
fn bad_project_files_exit_2_with_the_file_line_and_fix() {
    let cases: [(&str, &str, &[&str]); 8] = [
        (
            "unknown-key",
            "project: demo\nsettings: { method: bdf2 }\ncolour: red\ncircuits: [circuits/rc.yaml]\n",
            &["project.yaml:3", "colour", "remove the key"],
        ),
        (
            "missing-circuit",
            "project: demo\nsettings: { method: bdf2 }\ncircuits: [circuits/rc.yaml, circuits/nope.yaml]\n",
            &["project.yaml:3", "circuits/nope.yaml", "relative to the project file"],
        ),
        (
            "bad-rtol",
            "project: demo\nsettings:\n  method: bdf2\n  rtol: 2\ncircuits: [circuits/rc.yaml]\n",
            &["project.yaml:4", "rtol", "less than 1"],
        ),
        (
            "bad-method",
            "project: demo\nsettings: { method: gear }\ncircuits: [circuits/rc.yaml]\n",
            &["project.yaml:2", "gear", "tr-bdf2"],
        ),
        (
            "bad-unit",
            "project: demo\nsettings: { method: bdf2, max_step: 1nF }\ncircuits: [circuits/rc.yaml]\n",
            &["project.yaml:2", "max_step", "1nF"],
        ),
        (
            "bad-watch",
            "project: demo\nsettings: { method: bdf2 }\ncircuits:\n  - { file: circuits/rlc.yaml, watch: [nowhere] }\n",
            &["project.yaml:4", "circuits/rlc.yaml", "nowhere", "in, mid, out"],
        ),
        (
            "bad-name",
            "project: Demo Project\nsettings: { method: bdf2 }\ncircuits: [circuits/rc.yaml]\n",
            &["project.yaml:1", "a-z"],
        ),
        (
            "bad-target",
            "project: demo\nsettings: { method: bdf2 }\ncircuits: [{ file: circuits/rc.yaml, target: 5 }]\n",
            &["project.yaml:3", "circuits/rc.yaml", "between 0 and 1"],
        ),
    ];
    for (name, text, wanted) in cases {
        let d = setup(&format!("signoff-bad-{name}"), text);
        let o = signoff(&d, "out", &[]);
        assert_eq!(o.code, 2, "{name}: {}\n{}", o.stdout, o.stderr);
        no_panic(&o);
        for w in wanted {
            assert!(
                o.stderr.contains(w),
                "{name}: expected '{w}' in:\n{}",
                o.stderr
            );
        }
        assert!(
            !d.join("out/signoff.json").exists(),
            "{name}: no record for bad input"
        );
    }
}

#[test]
fn a_circuit_with_problems_is_reported_with_its_own_line() {
    let d = setup("signoff-bad-circuit", PASSING);
    std::fs::write(
        d.join("circuits/rc.yaml"),
        RC.replace("value: 1k", "value: 1k, colour: red"),
    )
    .unwrap();
    let o = signoff(&d, "out", &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    no_panic(&o);
    assert!(o.stderr.contains("rc.yaml:5"), "{}", o.stderr);
    assert!(o.stderr.contains("colour"), "{}", o.stderr);
}

#[test]
fn the_shipped_examples_pass_and_fail_as_documented() {
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("examples/signoff");
    let d = scratch("signoff-examples");
    let o = ringtrue(&[
        "signoff",
        s(&root.join("passing.yaml")),
        "--out",
        s(&d.join("pass")),
    ]);
    assert_eq!(o.code, 0, "{}\n{}", o.stdout, o.stderr);
    let o = ringtrue(&[
        "signoff",
        s(&root.join("failing.yaml")),
        "--out",
        s(&d.join("fail")),
    ]);
    assert_eq!(o.code, 1, "{}\n{}", o.stdout, o.stderr);
    assert!(o.stderr.contains("circuits/rlc-ring.yaml"), "{}", o.stderr);
    let r = record(&d.join("fail/signoff.json"));
    assert!(
        r["circuits"][1]["would_pass"].is_object(),
        "{}",
        r["circuits"][1]
    );
}
