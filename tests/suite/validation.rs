//! One test per validation rule: the binary exits with code 2, names the element or node, and never
//! panics.

use crate::common::{ringtrue, scratch, Outcome};

const GOOD: &str = "name: ok\nelements:\n  - { kind: voltage_source, name: v1, nodes: [in, gnd], value: 1 }\n  - { kind: resistor, name: r1, nodes: [in, out], value: 1k }\n  - { kind: capacitor, name: c1, nodes: [out, gnd], value: 1n }\nrun: { stop: 1u }\nwatch: [out]\n";

/// Runs `check` on `text` and asserts exit code 2 with every `needles` in the message.
fn refused(name: &str, text: &str, needles: &[&str]) {
    let dir = scratch(name);
    let path = dir.join(format!("{name}.yaml"));
    std::fs::write(&path, text).unwrap();
    let out = ringtrue(&["check", path.to_str().unwrap()]);
    assert_eq!(
        out.code, 2,
        "{name}: expected exit 2, got {}\n{}",
        out.code, out.stderr
    );
    for n in needles {
        assert!(
            out.stderr.contains(n),
            "{name}: message lacks '{n}':\n{}",
            out.stderr
        );
    }
    assert!(
        out.stderr.contains(&format!("{name}.yaml")),
        "{name}: message lacks the file name:\n{}",
        out.stderr
    );
    assert!(!out.stderr.contains("panicked"), "{name}: panicked");
}

/// Writes `text` to `NAME.yaml` in a fresh scratch folder and runs `reference --points 5` on it into
/// `r.csv` there; gives the outcome and the CSV's path.
fn reference_of(name: &str, text: &str) -> (Outcome, std::path::PathBuf) {
    let dir = scratch(name);
    let path = dir.join(format!("{name}.yaml"));
    std::fs::write(&path, text).unwrap();
    let csv = dir.join("r.csv");
    let out = ringtrue(&[
        "reference",
        "--points",
        "5",
        "--csv",
        csv.to_str().unwrap(),
        path.to_str().unwrap(),
    ]);
    (out, csv)
}

#[test]
fn a_good_circuit_passes() {
    let dir = scratch("good");
    let path = dir.join("good.yaml");
    std::fs::write(&path, GOOD).unwrap();
    let out = ringtrue(&["check", path.to_str().unwrap()]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(out.stdout.contains("unknowns"), "{}", out.stdout);
}

#[test]
fn duplicate_names() {
    let t = GOOD.replace("name: c1", "name: r1");
    refused(
        "duplicate",
        &t,
        &["element r1", "more than one element", ":5"],
    );
}

#[test]
fn unknown_watched_node() {
    let t = GOOD.replace("watch: [out]", "watch: [outt]");
    refused("watchnode", &t, &["outt", "not a node"]);
}

#[test]
fn unknown_watched_element() {
    let t = GOOD.replace("watch: [out]", "watch: [r9.current]");
    refused("watchelem", &t, &["r9", "no element"]);
}

#[test]
fn non_positive_value() {
    let t = GOOD.replace("value: 1k", "value: -1k");
    refused("negative", &t, &["element r1", "must be positive", ":4"]);
}

#[test]
fn zero_capacitance() {
    let t = GOOD.replace("value: 1n", "value: 0");
    refused("zerocap", &t, &["element c1", "must be positive"]);
}

#[test]
fn wrong_unit() {
    let t = GOOD.replace("value: 1n", "value: 1nH");
    refused("unit", &t, &["element c1", "capacitance"]);
}

#[test]
fn non_finite_value() {
    let t = GOOD.replace("value: 1k", "value: .inf");
    refused("infinite", &t, &["element r1", "not finite"]);
}

#[test]
fn unknown_key() {
    let t = GOOD.replace("value: 1k }", "value: 1k, tolerance: 5 }");
    refused(
        "unknownkey",
        &t,
        &["element r1", "unknown field", "tolerance", ":4"],
    );
}

#[test]
fn key_of_another_kind() {
    let t = GOOD.replace("value: 1k }", "value: 1k, initial_voltage: 1 }");
    refused(
        "otherkey",
        &t,
        &["element r1", "initial_voltage", "does not apply"],
    );
}

#[test]
fn pwl_times_not_increasing() {
    let t = GOOD.replace(
        "value: 1 }",
        "waveform: { piecewise_linear: [[0, 0], [2n, 1], [1n, 0]] } }",
    );
    refused("pwl", &t, &["element v1", "strictly increasing"]);
}

#[test]
fn node_not_connected_to_ground() {
    let t = GOOD.replace(
        "  - { kind: capacitor",
        "  - { kind: resistor, name: r2, nodes: [island, island2], value: 1k }\n  - { kind: capacitor",
    );
    refused("floating", &t, &["node island", "no path to ground"]);
}

#[test]
fn loop_of_voltage_sources() {
    let t = GOOD.replace(
        "  - { kind: resistor, name: r1",
        "  - { kind: voltage_source, name: v2, nodes: [in, gnd], value: 2 }\n  - { kind: resistor, name: r1",
    );
    refused(
        "vloop",
        &t,
        &["element v2", "loop of voltage sources", "v1"],
    );
}

#[test]
fn loop_of_source_and_inductor_at_operating_point() {
    let t = GOOD.replace(
        "  - { kind: resistor, name: r1",
        "  - { kind: inductor, name: l1, nodes: [in, gnd], value: 1u }\n  - { kind: resistor, name: r1",
    );
    refused(
        "vlloop",
        &t,
        &["element l1", "inductors", "operating point"],
    );
    // The same loop is fine when the run starts from initial conditions.
    let ok = t.replace(
        "run: { stop: 1u }",
        "run: { stop: 1u, start: initial_conditions }",
    );
    let dir = scratch("vlloop-ic");
    let path = dir.join("ic.yaml");
    std::fs::write(&path, ok).unwrap();
    assert_eq!(ringtrue(&["check", path.to_str().unwrap()]).code, 0);
}

#[test]
fn cutset_of_current_source_and_capacitor_at_operating_point() {
    let t = "name: cut\nelements:\n  - { kind: current_source, name: i1, nodes: [gnd, top], value: 1m }\n  - { kind: capacitor, name: c1, nodes: [top, gnd], value: 1n }\nrun: { stop: 1u }\n";
    refused(
        "cutset",
        t,
        &["node top", "capacitors and current sources", "i1", "c1"],
    );
}

#[test]
fn cutset_of_current_sources_alone() {
    let t = "name: cut2\nelements:\n  - { kind: current_source, name: i1, nodes: [gnd, top], value: 1m }\n  - { kind: resistor, name: r1, nodes: [top, mid], value: 1k }\n  - { kind: current_source, name: i2, nodes: [mid, gnd], value: 1m }\nrun: { stop: 1u, start: initial_conditions }\n";
    refused("cutset2", t, &["node top", "only through current sources"]);
}

#[test]
fn unknown_kind() {
    let t = GOOD.replace("kind: resistor", "kind: resistr");
    refused("kind", &t, &["element r1", "unknown kind 'resistr'"]);
}

#[test]
fn control_of_wrong_kind() {
    let t = GOOD.replace(
        "  - { kind: capacitor",
        "  - { kind: cccs, name: f1, nodes: [out, gnd], control: r1, gain: 2 }\n  - { kind: capacitor",
    );
    refused("control", &t, &["element f1", "r1", "resistor"]);
}

#[test]
fn coupling_of_non_inductors() {
    let t = GOOD.replace(
        "  - { kind: capacitor",
        "  - { kind: coupling, name: k1, inductors: [r1, c1], k: 0.5 }\n  - { kind: capacitor",
    );
    refused("coupling", &t, &["element k1", "not an inductor"]);
}

#[test]
fn yaml_syntax_error() {
    refused("syntax", "name: x\nelements: [\n", &["syntax.yaml:"]);
}

#[test]
fn malformed_inputs_never_panic() {
    let dir = scratch("fuzz");
    let cases = [
        "",
        "name: x",
        "[1, 2]",
        "name: x\nelements: []\nrun: { stop: 1u }\n",
        "name: x\nelements: [{kind: resistor, name: r, nodes: [a], value: 1}]\nrun: {stop: 1}\n",
        "name: x\nelements: [{kind: resistor, name: r, nodes: [a, a], value: 1}]\nrun: {stop: 1}\n",
        "name: x\nelements: [{kind: voltage_source, name: v, nodes: [a, gnd], waveform: {pulse: {high: 1, width: 1n, period: 0}}}]\nrun: {stop: 1}\n",
        "name: x\nelements: [{kind: voltage_source, name: v, nodes: [a, gnd], waveform: {step: {to: 1}, sine: {amplitude: 1, frequency: 1}}}]\nrun: {stop: 1}\n",
        "name: x\nelements: [{kind: resistor, name: r, nodes: [a, gnd], value: 1}]\nrun: {stop: -1}\n",
        "name: x\nelements: [{kind: resistor, name: r, nodes: [a, gnd], value: 1}]\nrun: {stop: 1, rtol: 5}\n",
        "name: x\nelements: [{kind: diode, name: d, nodes: [a, gnd], saturation_current: 0}]\nrun: {stop: 1}\n",
        "name: x\nelements: [{kind: switch, name: s, nodes: [a, gnd], on_resistance: 10, off_resistance: 1, transition: 1n}]\nrun: {stop: 1}\n",
        "name: x\nelements: [{kind: vcvs, name: e, nodes: [a, gnd], control: [b, gnd], gain: 1}]\nrun: {stop: 1}\n",
        "name: X Y\nelements: [{kind: resistor, name: r, nodes: [a, gnd], value: 1}]\nrun: {stop: 1}\n",
    ];
    for (k, text) in cases.iter().enumerate() {
        let path = dir.join(format!("case{k}.yaml"));
        std::fs::write(&path, text).unwrap();
        for args in [vec!["check"], vec!["simulate", "--method", "bdf2", "--csv"]] {
            let csv = dir.join(format!("case{k}.csv"));
            let mut a: Vec<&str> = args.clone();
            if args.len() > 1 {
                a.push(csv.to_str().unwrap());
            }
            a.push(path.to_str().unwrap());
            let out = ringtrue(&a);
            assert_eq!(
                out.code, 2,
                "case {k} ({text:?}) with {args:?}: exit {}\n{}",
                out.code, out.stderr
            );
            assert!(!out.stderr.contains("panicked"));
        }
    }
}

#[test]
fn bad_flags_are_usage_errors() {
    let dir = scratch("flags");
    let path = dir.join("ok.yaml");
    std::fs::write(&path, GOOD).unwrap();
    let p = path.to_str().unwrap();
    let csv = dir.join("o.csv");
    let c = csv.to_str().unwrap();
    for args in [
        vec!["simulate", p, "--method", "gear", "--csv", c],
        vec!["simulate", p, "--method", "bdf2", "--rtol", "0", "--csv", c],
        vec![
            "simulate",
            p,
            "--method",
            "bdf2",
            "--max-step",
            "1nH",
            "--csv",
            c,
        ],
        vec!["simulate", p, "--csv", c],
        vec![
            "simulate",
            "/nonexistent/file.yaml",
            "--method",
            "bdf2",
            "--csv",
            c,
        ],
    ] {
        let out = ringtrue(&args);
        assert_eq!(out.code, 2, "{args:?}: {}", out.stderr);
    }
}

/// Regression (found by a mutation sweep of the shipped circuits): a capacitance whose reciprocal
/// overflows (5e-324 F, the least subnormal) left infinities in the exact reference's scaled C, on which
/// the singular value decomposition looped for ever. `reference` and `poles` now stop at once with exit
/// code 2 and name the node.
#[test]
fn a_capacitance_beyond_double_precision_is_refused_by_the_exact_reference() {
    let dir = scratch("subnormal");
    let path = dir.join("subnormal.yaml");
    std::fs::write(&path, GOOD.replace("value: 1n", "value: 5e-324")).unwrap();
    let p = path.to_str().unwrap();
    let csv = dir.join("r.csv");
    for args in [
        vec![
            "reference",
            "--points",
            "5",
            "--csv",
            csv.to_str().unwrap(),
            p,
        ],
        vec!["poles", p],
    ] {
        let out = ringtrue(&args);
        assert_eq!(out.code, 2, "{args:?}: exit {}\n{}", out.code, out.stderr);
        for needle in ["subnormal.yaml", "node out", "cannot be scaled"] {
            assert!(
                out.stderr.contains(needle),
                "{args:?}: message lacks '{needle}':\n{}",
                out.stderr
            );
        }
        assert!(!out.stderr.contains("panicked"));
    }
}

/// Regression (found by a mutation sweep): the exact reference of a run far longer than its time
/// constants. A stop of 1e35 s on a 1 us RC made nalgebra's matrix exponential loop for ever (its
/// scaling overflowed); a stop of 1e303 s wrote NaN with exit code 0. The first now gives the settled
/// value, 1 V (the RC's step response 1 - exp(-t / RC), closed form), and the second is refused.
#[test]
fn an_exact_reference_over_a_very_long_run_settles_or_is_refused() {
    let (out, csv) = reference_of("long", &GOOD.replace("stop: 1u", "stop: 1e35"));
    assert_eq!(out.code, 0, "{}", out.stderr);
    let text = std::fs::read_to_string(&csv).unwrap();
    let last: Vec<f64> = text
        .lines()
        .last()
        .unwrap()
        .split(',')
        .map(|v| v.parse().unwrap())
        .collect();
    assert_eq!(last[0], 1e35);
    assert!((last[1] - 1.0).abs() < 1e-12, "settled value {}", last[1]);

    let (out, _) = reference_of("vlong", &GOOD.replace("stop: 1u", "stop: 1e303"));
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(out.stderr.contains("vlong.yaml"), "{}", out.stderr);
    assert!(out.stderr.contains("cannot span"), "{}", out.stderr);
    assert!(!out.stderr.contains("panicked"));
}

/// Regression (found by a mutation sweep): a 2 MHz clock with its stop time's unit lost (0.5 s for
/// 0.5 us) gave four million breakpoints, and building its exact reference took more than 14 GB. A run
/// may have at most `MAX_BREAKPOINTS` (a million), counted without building them; a thousand periods
/// pass.
#[test]
fn a_pulse_train_with_millions_of_corners_is_refused() {
    let clocked = |stop: &str| {
        GOOD.replace(
            "value: 1 }",
            "waveform: { pulse: { low: 0, high: 1, rise: 1n, fall: 1n, width: 200n, period: 500n } } }",
        )
        .replace("stop: 1u", &format!("stop: {stop}"))
    };
    refused(
        "clock",
        &clocked("0.5"),
        &[
            "clock.yaml:3",
            "element v1",
            "4000004 breakpoints",
            "run.stop",
        ],
    );
    // Regression: an estimate past 1e16 is written to three digits; it was 8.000000000000001e306.
    refused(
        "clockfar",
        &clocked("1e300"),
        &["element v1", "about 8.00e306 breakpoints"],
    );
    let dir = scratch("clockok");
    let path = dir.join("clockok.yaml");
    std::fs::write(&path, clocked("500u")).unwrap();
    let out = ringtrue(&["check", path.to_str().unwrap()]);
    assert_eq!(out.code, 0, "{}", out.stderr);
}

/// Regression: numbers in messages were written with `{}`, so a period of 1e-300 came out as a
/// 300-digit decimal and `check`'s report of a stop of 1e-300 s likewise.
#[test]
fn numbers_in_messages_are_written_in_shortest_form() {
    let pulse = |period: &str, stop: &str| {
        GOOD.replace(
            "value: 1 }",
            &format!("waveform: {{ pulse: {{ low: 0, high: 1, rise: 1n, fall: 1n, width: 200n, period: {period} }} }} }}"),
        )
        .replace("stop: 1u", &format!("stop: {stop}"))
    };
    let dir = scratch("tinyperiod");
    let path = dir.join("tinyperiod.yaml");
    std::fs::write(&path, pulse("1e-300", "1u")).unwrap();
    let out = ringtrue(&["check", path.to_str().unwrap()]);
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(
        out.stderr.contains("period = 1e-300 is shorter"),
        "{}",
        out.stderr
    );
    let path = dir.join("tinystop.yaml");
    std::fs::write(&path, pulse("500n", "1e-300")).unwrap();
    let out = ringtrue(&["check", path.to_str().unwrap()]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(out.stdout.contains("(0, 1e-300 s]"), "{}", out.stdout);
    for line in out.stdout.lines() {
        assert!(line.len() < 200, "line of {} chars: {line}", line.len());
    }
}

/// Regression (found by a mutation sweep): the exact reference stored a piece per 64 of the fastest
/// time constant in every interval between breakpoints, with no bound, so a long clocked run of a stiff
/// circuit could exhaust memory. A 1 ps RC under 200,000 clock periods (800,000 breakpoints, allowed)
/// would need about 3e9 pieces; the reference now stops at its limit with exit code 2.
#[test]
fn an_exact_reference_past_its_piece_limit_is_refused() {
    let text = GOOD
        .replace(
            "value: 1 }",
            "waveform: { pulse: { low: 0, high: 1, rise: 1n, fall: 1n, width: 200n, period: 500n } } }",
        )
        .replace("value: 1n }", "value: 1f }")
        .replace("stop: 1u", "stop: 100m");
    let (out, _) = reference_of("pieces", &text);
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(out.stderr.contains("pieces.yaml"), "{}", out.stderr);
    assert!(
        out.stderr.contains("more than 2000000 pieces"),
        "{}",
        out.stderr
    );
    assert!(!out.stderr.contains("panicked"));
}

/// Regression: a max step or fixed step far below the run's length ran until the step budget was
/// spent (31 s for the converged reference with a max step of 1 ps over 60 ms) before saying so; the
/// run now stops before its first step, naming the least number of steps it would need.
#[test]
fn a_step_cap_that_cannot_finish_within_the_budget_is_refused_before_running() {
    let dir = scratch("stepcap");
    let path = dir.join("stepcap.yaml");
    let csv = dir.join("w.csv");
    let (p, c) = (path.to_str().unwrap(), csv.to_str().unwrap());
    let simulate = |extra: &[&str]| {
        let mut args = vec!["simulate", p, "--csv", c];
        args.extend_from_slice(extra);
        ringtrue(&args)
    };
    std::fs::write(&path, GOOD.replace("stop: 1u", "stop: 60m, max_step: 1p")).unwrap();
    for (extra, needle) in [
        (
            &["--method", "trapezoidal"][..],
            "steps of at most 1e-12 s over stop = 0.06 s need at least 60000000000 steps, more than the run's budget of 2000000 steps",
        ),
        (
            &["--method", "bdf2", "--fixed-step", "1n"][..],
            "steps of 1e-9 s over stop = 0.06 s need at least 60000000 steps",
        ),
    ] {
        let out = simulate(extra);
        assert_eq!(out.code, 1, "{}", out.stderr);
        assert!(out.stderr.contains(needle), "{}", out.stderr);
    }
    // At the budget exactly the run goes ahead: 1 ms in fixed steps of 1 us is 1000 steps.
    std::fs::write(&path, GOOD.replace("stop: 1u", "stop: 1m")).unwrap();
    let out = simulate(&[
        "--method",
        "bdf2",
        "--fixed-step",
        "1u",
        "--step-budget",
        "1000",
    ]);
    assert_eq!(out.code, 0, "{}", out.stderr);
}
