//! Numerical ringing against the method properties that cause it: the trapezoidal rule's R(z) -> -1 as
//! z -> -inf (A-stable but not L-stable) makes a stiff mode alternate step to step after a slope change;
//! backward Euler's 0 < R(z) < 1 for real z < 0 and BDF2's roots of modulus below 1/sqrt(3 - 2z) damp
//! it (Hairer & Wanner, *Solving ODEs II*, IV.3 and V.1). Physical ringing follows a pole.

use crate::common::{circuit, ringtrue, scratch};
use ringtrue::audit::{self, FlagKind};
use ringtrue::circuit::raw::{RawPlan, RawValue};
use ringtrue::detect::{self, Verdict};
use ringtrue::settings::{MethodName, Overrides, Restart};
use std::path::PathBuf;

fn shipped(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("reference_circuits")
        .join(format!("{name}.yaml"))
}

fn fixed_cell(method: MethodName) -> Overrides {
    Overrides {
        method: Some(method),
        fixed_step: Some(20e-9),
        restart: Some(Restart::Same),
        ..Overrides::default()
    }
}

#[test]
fn stiff_shunt_ramp_rings_under_trapezoidal_only() {
    let (c, _) = ringtrue::circuit::load(&shipped("inductor-ramp-stiff-shunt")).unwrap();
    let prepared = audit::prepare(&c).unwrap();
    for (m, expect) in [
        (MethodName::Trapezoidal, true),
        (MethodName::BackwardEuler, false),
        (MethodName::Bdf2, false),
    ] {
        let cell = audit::run_cell(&c, &prepared, &fixed_cell(m), 1e-3, 600.0);
        let ringing = cell
            .flags
            .iter()
            .any(|f| f.kind == FlagKind::NumericalRinging);
        assert_eq!(ringing, expect, "{}: flags {:?}", m.as_str(), cell.flags);
        if expect {
            assert!(
                !cell.meets_target,
                "a ringing cell must not meet the target"
            );
        }
    }
    let d = ringtrue::diagnose::diagnose(&c, &fixed_cell(MethodName::Trapezoidal), "wind").unwrap();
    assert_eq!(
        d.verdict,
        Verdict::Numerical,
        "{}",
        ringtrue::diagnose::summary(&d)
    );
}

const RLC_Q10: &str = "name: rlc-q10\nelements:\n  - { kind: voltage_source, name: v1, nodes: [in, gnd], waveform: { step: { to: 1, at: 10n } } }\n  - { kind: resistor, name: r1, nodes: [in, a], value: 3.16227766 }\n  - { kind: inductor, name: l1, nodes: [a, out], value: 1u }\n  - { kind: capacitor, name: c1, nodes: [out, gnd], value: 1n }\nrun: { stop: 4u }\nwatch: [out, l1.current]\n";

#[test]
fn underdamped_rlc_q10_is_physical_and_never_flagged_as_ringing() {
    // Q = sqrt(L / C) / R = 10; the pole at w0 sqrt(1 - 1/(4 Q^2)) / 2 pi = 5.026 MHz.
    let c = circuit(RLC_Q10);
    let raw = RawPlan {
        rtol: Some(vec![RawValue::Number(1e-4)]),
        ..RawPlan::default()
    };
    let plan = audit::Plan::from_raw(&raw).unwrap();
    let a = audit::run(
        &c,
        &plan,
        &audit::Options {
            jobs: 2,
            cell_seconds: 600.0,
        },
        &|_| {},
    )
    .unwrap();
    for cell in &a.cells {
        assert!(
            !cell
                .flags
                .iter()
                .any(|f| f.kind == FlagKind::NumericalRinging),
            "{}: {:?}",
            cell.settings.method.as_str(),
            cell.flags
        );
    }
    let o = Overrides {
        method: Some(MethodName::Trapezoidal),
        rtol: Some(1e-4),
        ..Overrides::default()
    };
    let d = ringtrue::diagnose::diagnose(&c, &o, "out").unwrap();
    assert_eq!(
        d.verdict,
        Verdict::Physical,
        "{}",
        ringtrue::diagnose::summary(&d)
    );
    let p = d.pole.expect("the matching pole is named");
    let w0 = 1.0 / (1e-6f64 * 1e-9).sqrt();
    let wd = w0 * (1.0 - 1.0 / 400.0f64).sqrt();
    assert!((p.im.abs() - wd).abs() <= 1e-6 * wd, "pole {p:?}");
    // the same verdict through the command, as JSON
    let dir = scratch("diagnose");
    let file = dir.join("rlc.yaml");
    std::fs::write(&file, RLC_Q10).unwrap();
    let json = dir.join("d.json");
    let out = ringtrue(&[
        "diagnose",
        file.to_str().unwrap(),
        "--signal",
        "out",
        "--method",
        "trapezoidal",
        "--rtol",
        "1e-4",
        "--json",
        json.to_str().unwrap(),
    ]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(json).unwrap()).unwrap();
    assert_eq!(v["verdict"], "physical");
    assert_eq!(v["evidence"].as_array().unwrap().len(), 4);
}

/// Waveforms made by the test: (name, times, values, has step-synchronous ringing).
fn labelled_cases() -> Vec<(String, Vec<f64>, Vec<f64>, bool)> {
    let mut out = Vec::new();
    let irregular = |n: usize, h: f64| -> Vec<f64> {
        let mut t = vec![0.0];
        for k in 1..n {
            let jitter = 1.0 + 0.3 * ((k as f64 * 2.399).sin());
            t.push(t[k - 1] + h * jitter);
        }
        t
    };
    // 1-3: irregular steps with a decaying alternating component on a smooth curve
    for (k, &decay) in [0.995f64, 0.97, 0.9].iter().enumerate() {
        let t = irregular(600, 1e-9);
        let v: Vec<f64> = t
            .iter()
            .enumerate()
            .map(|(j, &x)| {
                (x * 2e6).sin()
                    + if j > 200 {
                        0.05 * decay.powi(j as i32 - 200) * if j % 2 == 0 { 1.0 } else { -1.0 }
                    } else {
                        0.0
                    }
            })
            .collect();
        out.push((format!("alternation decay {decay}"), t, v, k < 3));
    }
    // 4: sustained alternation on a ramp, uniform steps
    let t: Vec<f64> = (0..400).map(|j| j as f64 * 1e-8).collect();
    let v: Vec<f64> = t
        .iter()
        .enumerate()
        .map(|(j, &x)| x * 1e5 + 0.01 * if j % 2 == 0 { 1.0 } else { -1.0 })
        .collect();
    out.push(("alternation on a ramp".into(), t, v, true));
    // 5-8: damped sines at about 40, 20, 10 and 6 points per period (physical, not step-synchronous)
    for ppp in [40.0, 20.0, 10.0, 6.0] {
        let t = irregular(800, 1.0 / ppp);
        let v: Vec<f64> = t
            .iter()
            .map(|&x| (-0.02 * x).exp() * (2.0 * std::f64::consts::PI * x).sin())
            .collect();
        out.push((
            format!("damped sine at {ppp} points per period"),
            t,
            v,
            false,
        ));
    }
    // 9: an exponential settling curve
    let t = irregular(500, 1e-3);
    let v: Vec<f64> = t.iter().map(|&x| 1.0 - (-x / 0.05).exp()).collect();
    out.push(("exponential settling".into(), t, v, false));
    // 10: a square wave (jumps, not alternation)
    let t: Vec<f64> = (0..500).map(|j| j as f64).collect();
    let v: Vec<f64> = t
        .iter()
        .map(|&x| if (x as i64 / 25) % 2 == 0 { 1.0 } else { 0.0 })
        .collect();
    out.push(("square wave".into(), t, v, false));
    // 11: alternation too small to matter against the target (1e-8 of the peak)
    let t = irregular(400, 1e-9);
    let v: Vec<f64> = t
        .iter()
        .enumerate()
        .map(|(j, &x)| (x * 3e6).cos() + 1e-8 * if j % 2 == 0 { 1.0 } else { -1.0 })
        .collect();
    out.push(("negligible alternation".into(), t, v, false));
    // 12: noise-free sine sampled at exactly 2 points per period would alternate: it is aliasing, and
    // with no reference or pole to tell, inspect must flag it (a waveform sampled this coarsely is
    // exactly what a user should look at)
    let t: Vec<f64> = (0..200).map(|j| j as f64 * 0.5).collect();
    let v: Vec<f64> = t
        .iter()
        .map(|&x| (2.0 * std::f64::consts::PI * x + 0.3).sin())
        .collect();
    out.push(("sine at 2 points per period".into(), t, v, true));
    out
}

#[test]
fn inspect_on_a_labelled_set_of_waveforms() {
    let cases = labelled_cases();
    assert!(cases.len() >= 10);
    let (mut tp, mut fp, mut fn_) = (0, 0, 0);
    for (name, t, v, truth) in &cases {
        let peak = v.iter().fold(0.0f64, |a, x| a.max(x.abs()));
        let found = !detect::numerical_ringing("s", t, v, None, peak, 1e-3, &[]).is_empty();
        match (found, truth) {
            (true, true) => tp += 1,
            (true, false) => fp += 1,
            (false, true) => fn_ += 1,
            _ => {}
        }
        eprintln!("{name}: truth {truth}, found {found}");
    }
    let precision = tp as f64 / (tp + fp).max(1) as f64;
    let recall = tp as f64 / (tp + fn_).max(1) as f64;
    eprintln!(
        "labelled set: {} cases, precision {precision:.2}, recall {recall:.2}",
        cases.len()
    );
    assert_eq!((fp, fn_), (0, 0), "precision {precision}, recall {recall}");
}

#[test]
fn inspect_command_finds_the_first_and_not_the_second() {
    let dir = scratch("inspect");
    let cases = labelled_cases();
    for (k, expect) in [(0usize, 1usize), (4, 0)] {
        let (_, t, v, _) = &cases[k];
        let mut text = String::from("time,v\n");
        for (a, b) in t.iter().zip(v) {
            text.push_str(&format!("{a:e},{b:e}\n"));
        }
        let file = dir.join(format!("w{k}.csv"));
        std::fs::write(&file, text).unwrap();
        let json = dir.join(format!("w{k}.json"));
        let out = ringtrue(&[
            "inspect",
            file.to_str().unwrap(),
            "--signal",
            "v",
            "--json",
            json.to_str().unwrap(),
        ]);
        assert_eq!(out.code, 0, "{}", out.stderr);
        let doc: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(json).unwrap()).unwrap();
        let flags = doc["flags"].as_array().unwrap();
        assert_eq!(flags.len(), expect, "case {k}: {flags:?}");
        if expect > 0 {
            assert_eq!(flags[0]["kind"], "numerical_ringing");
            assert!(
                flags[0]["evidence"]["implied_frequency_hz"]
                    .as_f64()
                    .unwrap()
                    > 0.0
            );
        }
    }
    let bad = dir.join("bad.csv");
    std::fs::write(&bad, "time,v\n0,1\n0,2\n").unwrap();
    assert_eq!(
        ringtrue(&["inspect", bad.to_str().unwrap(), "--signal", "v"]).code,
        2
    );
    assert_eq!(
        ringtrue(&["inspect", bad.to_str().unwrap(), "--signal", "w"]).code,
        2
    );
}
