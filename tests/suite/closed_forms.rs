//! Every method against textbook step responses at rtol 1e-6: within 1e-3 of the signal's peak
//! (backward Euler, first order, within 2e-2).
//!
//! Source of the formulas: Nilsson & Riedel, *Electric Circuits*, ch. 7 (RC and RL natural and step
//! responses) and ch. 8 (series RLC step response in its three damping regimes).

use crate::common::{circuit, max_error, run};
use ringtrue::settings::MethodName;

fn bound(m: MethodName) -> f64 {
    if m == MethodName::BackwardEuler {
        2e-2
    } else {
        1e-3
    }
}

fn check_all(text: &str, signal: &str, peak: f64, exact: impl Fn(f64) -> f64 + Copy) {
    let c = circuit(text);
    for m in MethodName::ALL {
        let r = run(&c, m, |s| s.tolerances.rtol = 1e-6);
        let e = max_error(&r, signal, exact) / peak;
        eprintln!(
            "measured: {signal} {} max error {e:.3e} of peak",
            m.as_str()
        );
        assert!(
            e <= bound(m),
            "{}: error {e:e} of peak on {signal}",
            m.as_str()
        );
    }
}

#[test]
fn rc_charging() {
    // v(t) = V (1 - exp(-t / RC)), RC = 1 us (Nilsson & Riedel, ch. 7)
    let text = "name: rc\nelements:\n  - { kind: voltage_source, name: v1, nodes: [in, gnd], waveform: { step: { to: 1 } } }\n  - { kind: resistor, name: r1, nodes: [in, out], value: 1k }\n  - { kind: capacitor, name: c1, nodes: [out, gnd], value: 1n }\nrun: { stop: 5u }\nwatch: [out]\n";
    check_all(text, "out", 1.0, |t| 1.0 - (-t / 1e-6).exp());
}

#[test]
fn rl_current_rise() {
    // i(t) = (V / R)(1 - exp(-t R / L)), L / R = 1 us (Nilsson & Riedel, ch. 7)
    let text = "name: rl\nelements:\n  - { kind: voltage_source, name: v1, nodes: [in, gnd], waveform: { step: { to: 1 } } }\n  - { kind: resistor, name: r1, nodes: [in, mid], value: 10 }\n  - { kind: inductor, name: l1, nodes: [mid, gnd], value: 10u }\nrun: { stop: 5u }\nwatch: [l1.current]\n";
    check_all(text, "l1.current", 0.1, |t| 0.1 * (1.0 - (-t / 1e-6).exp()));
}

/// Capacitor voltage of a series RLC driven by a unit step, from the roots of s^2 + (R/L) s + 1/(LC)
/// (Nilsson & Riedel, ch. 8).
fn series_rlc_step(r: f64, l: f64, c: f64) -> impl Fn(f64) -> f64 + Copy {
    move |t: f64| {
        let alpha = r / (2.0 * l);
        let w0 = 1.0 / (l * c).sqrt();
        if (alpha - w0).abs() <= 1e-12 * w0 {
            1.0 - (-alpha * t).exp() * (1.0 + alpha * t)
        } else if alpha < w0 {
            let wd = (w0 * w0 - alpha * alpha).sqrt();
            1.0 - (-alpha * t).exp() * ((wd * t).cos() + alpha / wd * (wd * t).sin())
        } else {
            let root = (alpha * alpha - w0 * w0).sqrt();
            let (s1, s2) = (-alpha + root, -alpha - root);
            1.0 + (s2 * (s1 * t).exp() - s1 * (s2 * t).exp()) / (s1 - s2)
        }
    }
}

fn series_rlc_text(r: &str) -> String {
    format!("name: rlc\nelements:\n  - {{ kind: voltage_source, name: v1, nodes: [in, gnd], waveform: {{ step: {{ to: 1 }} }} }}\n  - {{ kind: resistor, name: r1, nodes: [in, a], value: {r} }}\n  - {{ kind: inductor, name: l1, nodes: [a, out], value: 1u }}\n  - {{ kind: capacitor, name: c1, nodes: [out, gnd], value: 1n }}\nrun: {{ stop: 3u }}\nwatch: [out]\n")
}

#[test]
fn series_rlc_underdamped() {
    // R = 10 ohm, L = 1 uH, C = 1 nF: alpha = 5e6 /s, w0 = 3.16e7 rad/s (zeta = 0.158); peak 1.6 V.
    let f = series_rlc_step(10.0, 1e-6, 1e-9);
    check_all(&series_rlc_text("10"), "out", 1.61, f);
}

#[test]
fn series_rlc_critically_damped() {
    // R = 2 sqrt(L / C) = 63.2455532 ohm
    let r = 2.0 * (1e-6f64 / 1e-9).sqrt();
    let f = series_rlc_step(r, 1e-6, 1e-9);
    check_all(&series_rlc_text(&format!("{r}")), "out", 1.0, f);
}

#[test]
fn series_rlc_overdamped() {
    // R = 200 ohm: alpha = 1e8 /s > w0 = 3.16e7 rad/s
    let f = series_rlc_step(200.0, 1e-6, 1e-9);
    check_all(&series_rlc_text("200"), "out", 1.0, f);
}
