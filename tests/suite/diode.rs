//! A diode in series with a resistor at the operating point against the closed form with the Lambert W
//! function: I = (n Vt / R) W((Is R / (n Vt)) exp((V + Is R) / (n Vt))) - Is (Banwell & Jayakumar,
//! Electronics Letters 36(4), 2000), to 1e-9 relative.

use crate::common::circuit;
use ringtrue::equations::System;
use ringtrue::integrate::{self, newton::Newton};
use ringtrue::settings::{MethodName, Settings};

/// The principal branch of Lambert W for x > 0, by Halley's iteration on w e^w = x (Corless et al.,
/// "On the Lambert W function", Adv. Comput. Math. 5, 1996, eq. 5.9), started from ln x - ln ln x.
fn lambert_w(x: f64) -> f64 {
    let mut w = if x > 3.0 {
        x.ln() - x.ln().ln()
    } else {
        (1.0 + x).ln()
    };
    for _ in 0..100 {
        let e = w.exp();
        let f = w * e - x;
        let step = f / (e * (w + 1.0) - (w + 2.0) * f / (2.0 * w + 2.0));
        w -= step;
        if step.abs() <= 1e-16 * w.abs() {
            break;
        }
    }
    w
}

/// W(x) for x given by its logarithm, for arguments beyond f64's range: solve w + ln w = ln x.
fn lambert_w_of_exp(ln_x: f64) -> f64 {
    if ln_x < 700.0 {
        return lambert_w(ln_x.exp());
    }
    let mut w = ln_x - ln_x.ln();
    for _ in 0..100 {
        let step = (w + w.ln() - ln_x) / (1.0 + 1.0 / w);
        w -= step;
        if step.abs() <= 1e-16 * w {
            break;
        }
    }
    w
}

#[test]
fn lambert_w_helper_is_right() {
    for x in [0.5, 1.0, 10.0, 1e5, 1e30] {
        let w = lambert_w(x);
        assert!((w * w.exp() - x).abs() <= 1e-14 * x, "{x}");
    }
    // W(e) = 1 (definition)
    assert!((lambert_w(std::f64::consts::E) - 1.0).abs() < 1e-15);
}

fn check(v: f64, r: f64, is: f64, n: f64) {
    let text = format!(
        "name: dr\nelements:\n  - {{ kind: voltage_source, name: v1, nodes: [in, gnd], value: {v} }}\n  - {{ kind: resistor, name: r1, nodes: [in, a], value: {r} }}\n  - {{ kind: diode, name: d1, nodes: [a, gnd], saturation_current: {is}, emission_coefficient: {n} }}\nrun: {{ stop: 1u }}\nwatch: [a, d1.current]\n"
    );
    let c = circuit(&text);
    let sys = System::new(&c);
    let mut s = Settings::new(MethodName::TrBdf2);
    s.tolerances.rtol = 1e-9;
    let x =
        integrate::initial_state(&sys, &s, &mut Newton::new(sys.size())).expect("operating point");
    let got = sys.probe_values(&x, 0.0)[1];
    let nvt = n * 1.380_649e-23 * 300.0 / 1.602_176_634e-19;
    let ln_arg = (is * r / nvt).ln() + (v + is * r) / nvt;
    let want = nvt / r * lambert_w_of_exp(ln_arg) - is;
    eprintln!(
        "measured: V = {v}, R = {r}: relative error {:.2e}",
        ((got - want) / want).abs()
    );
    assert!(
        ((got - want) / want).abs() <= 1e-9,
        "V = {v}, R = {r}: current {got:e} vs Lambert-W {want:e}"
    );
}

#[test]
fn series_diode_operating_point_matches_lambert_w() {
    check(5.0, 1e3, 1e-14, 1.0);
    check(0.5, 100.0, 1e-12, 1.5);
    check(12.0, 47.0, 2e-9, 1.8);
    check(1.0, 1e4, 1e-15, 1.0);
}

/// Regression: with steps allowed to grow fivefold, TR-BDF2's guess after a long step drove the clamp
/// diode so far into conduction that the Jacobian was numerically singular, and the run stopped with a
/// "singular at node rail" error. A nonlinear circuit now cuts such a step like any Newton failure.
#[test]
fn a_singular_newton_iterate_of_a_nonlinear_circuit_cuts_the_step() {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/reference_circuits/diode-clamp.yaml"
    ))
    .expect("shipped circuit");
    let c = circuit(&text);
    for m in MethodName::ALL {
        let run = crate::common::run(&c, m, |_| {});
        let t = &run.trajectory.times;
        assert!(
            (t[t.len() - 1] - 3e-6).abs() < 1e-15,
            "{m:?} ends at {}",
            t[t.len() - 1]
        );
        // The clamp holds the pin within a diode drop of the 3.3 V rail (common practice: under 1 V).
        let peak = run
            .trajectory
            .signal("pin")
            .expect("watched")
            .iter()
            .fold(f64::MIN, |a, &b| a.max(b));
        assert!(peak > 3.3 && peak < 4.3, "{m:?}: pin peak {peak}");
    }
}
