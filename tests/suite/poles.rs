//! Poles against closed forms, to 1e-9 relative: series RLC s = -R/2L +- j sqrt(1/LC - (R/2L)^2) and
//! parallel RLC s = -1/2RC +- j sqrt(1/LC - (1/2RC)^2) (Nilsson & Riedel, *Electric Circuits*, ch. 8);
//! a uniform RC ladder of N sections driven by an ideal source and open at the far end,
//! s_k = -(2 / RC)(1 - cos((2k - 1) pi / (2N + 1))), k = 1..N (the eigenvalues of the tridiagonal
//! matrix with diagonal 2, last entry 1; from memory, checked numerically with numpy's eigvalsh).

use crate::common::{circuit, ringtrue, scratch};
use ringtrue::poles::{poles, Pole};
use ringtrue::settings::{MethodName, Settings};

fn of(text: &str) -> Vec<Pole> {
    let c = circuit(text);
    let mut s = Settings::new(MethodName::TrBdf2);
    s.apply(&c.run.settings);
    poles(&c, &s).unwrap()
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * b.abs().max(1e-300)
}

#[test]
fn series_rlc() {
    let p = of("name: s\nelements:\n  - { kind: voltage_source, name: v1, nodes: [in, gnd], value: 1 }\n  - { kind: resistor, name: r1, nodes: [in, a], value: 10 }\n  - { kind: inductor, name: l1, nodes: [a, b], value: 1u }\n  - { kind: capacitor, name: c1, nodes: [b, gnd], value: 1n }\nrun: { stop: 1u }\n");
    let (alpha, w0) = (10.0 / 2e-6, 1.0 / (1e-15f64).sqrt());
    let wd = (w0 * w0 - alpha * alpha).sqrt();
    assert_eq!(p.len(), 2, "{p:?}");
    for x in &p {
        assert!(close(x.re, -alpha) && close(x.im.abs(), wd), "{x:?}");
    }
    assert!(close(p[0].q().unwrap(), w0 / (2.0 * alpha)));
}

#[test]
fn parallel_rlc() {
    let p = of("name: p\nelements:\n  - { kind: current_source, name: i1, nodes: [gnd, t], value: 1m }\n  - { kind: resistor, name: r1, nodes: [t, gnd], value: 10k }\n  - { kind: inductor, name: l1, nodes: [t, gnd], value: 1u }\n  - { kind: capacitor, name: c1, nodes: [t, gnd], value: 1n }\nrun: { stop: 1u }\n");
    let (alpha, w0) = (1.0 / (2.0 * 1e4 * 1e-9), 1.0 / (1e-15f64).sqrt());
    let wd = (w0 * w0 - alpha * alpha).sqrt();
    assert_eq!(p.len(), 2, "{p:?}");
    for x in &p {
        assert!(close(x.re, -alpha) && close(x.im.abs(), wd), "{x:?}");
    }
}

#[test]
fn uniform_rc_ladder() {
    let n = 12;
    let text = ringtrue::catalogue::rc_ladder(n).replace(
        "waveform: { step: { to: 1, at: 1n, rise: 1n } }",
        "value: 1",
    );
    let p = of(&text);
    assert_eq!(p.len(), n);
    let rc = 1e3 * 1e-12;
    let mut want: Vec<f64> = (1..=n)
        .map(|k| {
            -(2.0 / rc)
                * (1.0 - ((2 * k - 1) as f64 * std::f64::consts::PI / (2 * n + 1) as f64).cos())
        })
        .collect();
    want.sort_by(|a, b| b.total_cmp(a));
    let mut got: Vec<f64> = p.iter().map(|x| x.re).collect();
    got.sort_by(|a, b| b.total_cmp(a));
    for (g, w) in got.iter().zip(&want) {
        assert!(close(*g, *w), "{g:e} vs {w:e}");
    }
    assert!(p.iter().all(|x| x.im == 0.0));
}

#[test]
fn poles_command_writes_the_json_contract() {
    let dir = scratch("poles");
    let json = dir.join("p.json");
    let f = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("reference_circuits/tank-parallel-q300.yaml");
    let out = ringtrue(&[
        "poles",
        f.to_str().unwrap(),
        "--json",
        json.to_str().unwrap(),
    ]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(json).unwrap()).unwrap();
    let p = &v["poles"][0];
    for k in [
        "re",
        "im",
        "frequency_hz",
        "damping_ratio",
        "q",
        "time_constant",
    ] {
        assert!(p[k].is_number(), "{k}: {p}");
    }
}
