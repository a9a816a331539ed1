//! The closed-form reference library against independently written textbook expressions, its own
//! differential equations (central differences), and the circuits it must refuse.
//!
//! Sources of the expressions:
//! - Nilsson & Riedel, *Electric Circuits*, ch. 7: the general first-order solution
//!   x(t) = x_f + (x(t0) - x_f) e^(-(t - t0)/tau) and the RC / RL step responses.
//! - Nilsson & Riedel, ch. 9: the RL circuit driven by Vm cos(wt + phi) from i(0) = 0,
//!   i = Vm/|Z| [cos(wt + phi - theta) - cos(phi - theta) e^(-Rt/L)], theta = atan(wL/R) (recalled, from
//!   memory), and the phasor V_C = V_s / (1 + j w R C) for the RC steady state.
//! - Boyce & DiPrima, *Elementary Differential Equations*, ch. 2 (integrating factor), for the response of
//!   tau x' + x = A + S t (from memory).
//! - Nilsson & Riedel, ch. 8: series and parallel RLC step responses in the three damping regimes, with
//!   the constants fixed by x(0) and dx/dt(0).
//! - The LC energy relation 1/2 C v^2 + 1/2 L i^2 = constant (conservation of energy in a lossless
//!   circuit, any circuits text).

use crate::common::{circuit, settings};
use ringtrue::circuit::{Circuit, ReferenceSpec};
use ringtrue::reference::closed_form::ClosedForm;
use ringtrue::reference::{Reference, ReferenceError};
use ringtrue::settings::MethodName;
use std::f64::consts::PI;

/// The closed form the circuit's `reference:` map asks for, under the start mode of its run map.
fn build(text: &str) -> Result<ClosedForm, ReferenceError> {
    let c = circuit(text);
    build_circuit(&c)
}

fn build_circuit(c: &Circuit) -> Result<ClosedForm, ReferenceError> {
    let s = settings(c, MethodName::Trapezoidal, |_| {});
    let ReferenceSpec::ClosedForm { formula, roles } = &c.reference else {
        panic!("test circuit has no closed_form reference");
    };
    ClosedForm::new(c, &s, formula, roles)
}

fn ok(text: &str) -> ClosedForm {
    build(text).unwrap_or_else(|e| panic!("closed form refused: {e}"))
}

/// Every watched signal at t, by label.
struct At(Vec<(String, f64)>);

impl At {
    fn get(&self, label: &str) -> f64 {
        self.0
            .iter()
            .find(|(l, _)| l == label)
            .unwrap_or_else(|| panic!("{label} is not watched"))
            .1
    }
}

fn at(cf: &ClosedForm, t: f64) -> At {
    let values = cf.signals(&[t]);
    At(cf
        .labels()
        .into_iter()
        .zip(values.into_iter().map(|v| v[0]))
        .collect())
}

fn close(what: &str, t: f64, got: f64, want: f64, scale: f64, tol: f64) {
    let err = (got - want).abs() / scale;
    assert!(
        err <= tol,
        "{what} at t = {t:e}: got {got:e}, want {want:e} (error {err:e} of {scale:e})"
    );
}

/// Agreement to rounding, relative to the signal's scale.
const ROUNDING: f64 = 1e-12;

fn refused(text: &str) -> String {
    match build(text) {
        Ok(_) => panic!("the closed form accepted a circuit it must refuse:\n{text}"),
        Err(ReferenceError::ClosedForm { message, .. }) => message,
        Err(other) => panic!("expected a closed-form error, got: {other}"),
    }
}

fn rc_text(wave: &str, run: &str, formula: &str) -> String {
    format!(
        "name: rc\nelements:\n  - {{ kind: voltage_source, name: v1, nodes: [in, gnd], waveform: {wave} }}\n  - {{ kind: resistor, name: r1, nodes: [in, out], value: 1k }}\n  - {{ kind: capacitor, name: c1, nodes: [out, gnd], value: 1n }}\nrun: {run}\nwatch: [in, out, v1.current, r1.current, c1.current]\nreference: {{ closed_form: {formula}, source: v1, resistor: r1, capacitor: c1 }}\n"
    )
}

fn rl_text(wave: &str, run: &str, formula: &str, init: &str) -> String {
    format!(
        "name: rl\nelements:\n  - {{ kind: voltage_source, name: v1, nodes: [in, gnd], waveform: {wave} }}\n  - {{ kind: resistor, name: r1, nodes: [in, mid], value: 10 }}\n  - {{ kind: inductor, name: l1, nodes: [mid, gnd], value: 10u{init} }}\nrun: {run}\nwatch: [in, mid, v1.current, r1.current, l1.current]\nreference: {{ closed_form: {formula}, source: v1, resistor: r1, inductor: l1 }}\n"
    )
}

// ------------------------------------------------------------------------------------------------
// RC

#[test]
fn rc_step_from_the_operating_point() {
    // v(t) = Vf + (V0 - Vf) e^(-t/RC), i(t) = (Vf - V0)/R e^(-t/RC) (Nilsson & Riedel, ch. 7);
    // the operating point holds the source's t = 0 value, 1 V, on the capacitor.
    let cf = ok(&rc_text(
        "{ step: { from: 1, to: 5 } }",
        "{ stop: 5u }",
        "rc_step",
    ));
    assert_eq!(
        cf.labels(),
        ["in", "out", "v1.current", "r1.current", "c1.current"]
    );
    let (r, tau, v0, vf) = (1e3, 1e-6, 1.0, 5.0);
    let s0 = at(&cf, 0.0);
    close("out", 0.0, s0.get("out"), v0, vf, ROUNDING);
    // left-continuous: at t = 0 the source still has its earlier value and nothing flows yet
    close("in", 0.0, s0.get("in"), 1.0, vf, ROUNDING);
    close("c1.current", 0.0, s0.get("c1.current"), 0.0, 4e-3, ROUNDING);
    for t in [0.3e-6, 1e-6, 2.5e-6, 5e-6] {
        let s = at(&cf, t);
        let e = (-t / tau).exp();
        let i = (vf - v0) / r * e;
        close("in", t, s.get("in"), vf, vf, ROUNDING);
        close("out", t, s.get("out"), vf + (v0 - vf) * e, vf, ROUNDING);
        close("c1.current", t, s.get("c1.current"), i, 4e-3, ROUNDING);
        close("r1.current", t, s.get("r1.current"), i, 4e-3, ROUNDING);
        // the source delivers the charging current: negative from its + node through it
        close("v1.current", t, s.get("v1.current"), -i, 4e-3, ROUNDING);
    }
}

#[test]
fn rc_delayed_step_from_initial_conditions_with_reversed_elements() {
    // Two pieces of the general first-order solution (Nilsson & Riedel, ch. 7): from v(0) = 0.5 V towards
    // 2 V until the step at 1 us, then from v(1 us) towards -3 V. The resistor is written out -> in and
    // the capacitor gnd -> out, so their currents are the negatives of the a -> b -> ground current;
    // the capacitor's initial_voltage is v(gnd) - v(out) = -0.5 V.
    let text = "name: rc\nelements:\n  - { kind: voltage_source, name: v1, nodes: [in, gnd], waveform: { step: { from: 2, to: -3, at: 1u } } }\n  - { kind: resistor, name: r1, nodes: [out, in], value: 2k }\n  - { kind: capacitor, name: c1, nodes: [gnd, out], value: 500p, initial_voltage: -0.5 }\nrun: { stop: 4u, start: initial_conditions }\nwatch: [c1.current, out, r1.current, in, v1.current]\nreference: { closed_form: rc_step, source: v1, resistor: r1, capacitor: c1 }\n";
    let cf = ok(text);
    assert_eq!(
        cf.labels(),
        ["c1.current", "out", "r1.current", "in", "v1.current"]
    );
    let (r, tau) = (2e3, 1e-6);
    let v = |t: f64| {
        let v1 = 2.0 + (0.5 - 2.0) * (-1.0f64).exp();
        if t <= 1e-6 {
            2.0 + (0.5 - 2.0) * (-t / tau).exp()
        } else {
            -3.0 + (v1 + 3.0) * (-(t - 1e-6) / tau).exp()
        }
    };
    let u = |t: f64| if t <= 1e-6 { 2.0 } else { -3.0 };
    for t in [0.0, 0.4e-6, 1e-6, 1e-6 * (1.0 + 1e-12), 1.7e-6, 4e-6] {
        let s = at(&cf, t);
        // Ohm's law for the current in -> out
        let i = (u(t) - v(t)) / r;
        close("in", t, s.get("in"), u(t), 3.0, ROUNDING);
        close("out", t, s.get("out"), v(t), 3.0, ROUNDING);
        close("r1.current", t, s.get("r1.current"), -i, 2e-3, ROUNDING);
        close("c1.current", t, s.get("c1.current"), -i, 2e-3, ROUNDING);
        close("v1.current", t, s.get("v1.current"), -i, 2e-3, ROUNDING);
    }
}

#[test]
fn rc_ramp_from_piecewise_linear_and_from_a_slow_step() {
    // tau v' + v = A + S t, v(0) = v0: v = v0 e^(-t/tau) + A (1 - e^(-t/tau)) + S (t - tau (1 - e^(-t/tau)))
    // (integrating factor, Boyce & DiPrima ch. 2, from memory); current (u - v)/R by Ohm's law.
    let tau = 1e-6;
    let cases = [
        // u = 1 + 2e6 t over the run, operating point v0 = u(0) = 1
        (
            rc_text(
                "{ piecewise_linear: [[0, 1], [10u, 21]] }",
                "{ stop: 5u }",
                "rc_ramp",
            ),
            1.0,
            2e6,
            1.0,
        ),
        // u = 2e6 t (a step from 0 to 10 over exactly the run), initial conditions v0 = 0 (not given)
        (
            rc_text(
                "{ step: { from: 0, to: 10, at: 0, rise: 5u } }",
                "{ stop: 5u, start: initial_conditions }",
                "rc_ramp",
            ),
            0.0,
            2e6,
            0.0,
        ),
    ];
    for (text, a, slope, v0) in cases {
        let cf = ok(&text);
        for t in [0.0, 0.2e-6, 1e-6, 3e-6, 5e-6] {
            let s = at(&cf, t);
            let e = (-t / tau).exp();
            let u = a + slope * t;
            let v = v0 * e + a * (1.0 - e) + slope * (t - tau * (1.0 - e));
            close("in", t, s.get("in"), u, 11.0, ROUNDING);
            close("out", t, s.get("out"), v, 11.0, ROUNDING);
            close(
                "c1.current",
                t,
                s.get("c1.current"),
                (u - v) / 1e3,
                2e-3,
                ROUNDING,
            );
            close(
                "v1.current",
                t,
                s.get("v1.current"),
                -(u - v) / 1e3,
                2e-3,
                ROUNDING,
            );
        }
    }
}

#[test]
fn rc_sine_steady_state_plus_transient() {
    // Steady state from the phasor V_C = V_s / (1 + j w R C): gain 1/sqrt(1 + (w tau)^2), phase
    // -atan(w tau) (Nilsson & Riedel, ch. 9); the complete response adds (v0 - v_ss(0)) e^(-t/tau)
    // (ch. 7). Operating point: v0 = u(0) = 0.5 + 2 sin 30 deg = 1.5 V.
    let cf = ok(&rc_text(
        "{ sine: { offset: 0.5, amplitude: 2, frequency: 200k, phase_deg: 30 } }",
        "{ stop: 10u }",
        "rc_sine",
    ));
    let (tau, w, phi) = (1e-6, 2.0 * PI * 200e3, PI / 6.0);
    let wt = w * tau;
    let vss = |t: f64| 0.5 + 2.0 / (1.0 + wt * wt).sqrt() * (w * t + phi - wt.atan()).sin();
    let v0 = 0.5 + 2.0 * phi.sin();
    for t in [0.0, 0.37e-6, 1.1e-6, 4.2e-6, 10e-6] {
        let s = at(&cf, t);
        let u = 0.5 + 2.0 * (w * t + phi).sin();
        let v = vss(t) + (v0 - vss(0.0)) * (-t / tau).exp();
        close("in", t, s.get("in"), u, 2.5, ROUNDING);
        close("out", t, s.get("out"), v, 2.5, ROUNDING);
        close(
            "r1.current",
            t,
            s.get("r1.current"),
            (u - v) / 1e3,
            2.5e-3,
            ROUNDING,
        );
    }
}

// ------------------------------------------------------------------------------------------------
// RL

#[test]
fn rl_step_from_initial_conditions() {
    // i(t) = V/R + (I0 - V/R) e^(-Rt/L), v_L(t) = (V - I0 R) e^(-Rt/L) (Nilsson & Riedel, ch. 7)
    let cf = ok(&rl_text(
        "{ step: { from: 0, to: 10 } }",
        "{ stop: 5u, start: initial_conditions }",
        "rl_step",
        ", initial_current: 0.3",
    ));
    let (r, tau, v, i0) = (10.0, 1e-6, 10.0, 0.3);
    let s = at(&cf, 0.0);
    close("l1.current", 0.0, s.get("l1.current"), i0, 1.0, ROUNDING);
    for t in [1e-9, 0.5e-6, 1e-6, 5e-6] {
        let s = at(&cf, t);
        let e = (-t / tau).exp();
        let i = v / r + (i0 - v / r) * e;
        close("l1.current", t, s.get("l1.current"), i, 1.0, ROUNDING);
        close("r1.current", t, s.get("r1.current"), i, 1.0, ROUNDING);
        close("v1.current", t, s.get("v1.current"), -i, 1.0, ROUNDING);
        close("mid", t, s.get("mid"), (v - i0 * r) * e, 10.0, ROUNDING);
        close("in", t, s.get("in"), v, 10.0, ROUNDING);
    }
}

#[test]
fn rl_delayed_step_from_the_operating_point_with_a_reversed_inductor() {
    // The operating point shorts the inductor: i(0) = 1 V / 10 ohm. The inductor is written gnd -> mid,
    // so its current is the negative of the in -> mid -> gnd current (Nilsson & Riedel, ch. 7, twice).
    let text = "name: rl\nelements:\n  - { kind: voltage_source, name: v1, nodes: [in, gnd], waveform: { step: { from: 1, to: 3, at: 2u } } }\n  - { kind: resistor, name: r1, nodes: [in, mid], value: 10 }\n  - { kind: inductor, name: l1, nodes: [gnd, mid], value: 10u }\nrun: { stop: 6u }\nwatch: [mid, l1.current, r1.current]\nreference: { closed_form: rl_step, source: v1, resistor: r1, inductor: l1 }\n";
    let cf = ok(text);
    let tau = 1e-6;
    for t in [0.0, 1.5e-6, 2e-6, 2.5e-6, 6e-6] {
        let s = at(&cf, t);
        let (i, vl) = if t <= 2e-6 {
            (0.1, 0.0)
        } else {
            let e = (-(t - 2e-6) / tau).exp();
            (0.3 + (0.1 - 0.3) * e, (3.0 - 0.1 * 10.0) * e)
        };
        close("r1.current", t, s.get("r1.current"), i, 0.3, ROUNDING);
        close("l1.current", t, s.get("l1.current"), -i, 0.3, ROUNDING);
        close("mid", t, s.get("mid"), vl, 3.0, ROUNDING);
    }
}

#[test]
fn rl_ramp() {
    // L i' + R i = A + S t: i = (A + S (t - tau))/R + (I0 - (A - S tau)/R) e^(-t/tau), tau = L/R
    // (integrating factor, Boyce & DiPrima ch. 2, from memory); v_L = u - R i by KVL.
    let cf = ok(&rl_text(
        "{ piecewise_linear: [[0, -1], [4u, 7]] }",
        "{ stop: 4u, start: initial_conditions }",
        "rl_ramp",
        ", initial_current: 50m",
    ));
    let (r, tau, a, slope, i0) = (10.0, 1e-6, -1.0, 2e6, 0.05);
    for t in [0.0, 0.3e-6, 1e-6, 2.2e-6, 4e-6] {
        let s = at(&cf, t);
        let u = a + slope * t;
        let i = (a + slope * (t - tau)) / r + (i0 - (a - slope * tau) / r) * (-t / tau).exp();
        close("in", t, s.get("in"), u, 7.0, ROUNDING);
        close("l1.current", t, s.get("l1.current"), i, 0.7, ROUNDING);
        close("mid", t, s.get("mid"), u - r * i, 7.0, ROUNDING);
    }
}

#[test]
fn rl_sine_matches_the_textbook_complete_response() {
    // v = Vm cos(wt + phi) from i(0) = 0: i = Vm/|Z| [cos(wt + phi - theta) - cos(phi - theta) e^(-Rt/L)],
    // |Z| = sqrt(R^2 + w^2 L^2), theta = atan(wL/R) (Nilsson & Riedel, ch. 9, from memory).
    // Vm cos(wt + 30 deg) = Vm sin(wt + 120 deg).
    let cf = ok(&rl_text(
        "{ sine: { amplitude: 5, frequency: 100k, phase_deg: 120 } }",
        "{ stop: 20u, start: initial_conditions }",
        "rl_sine",
        "",
    ));
    let (r, l, vm, w, phi) = (10.0, 10e-6, 5.0, 2.0 * PI * 100e3, PI / 6.0);
    let z = (r * r + w * w * l * l).sqrt();
    let theta = (w * l / r).atan();
    for t in [0.0, 0.8e-6, 2.5e-6, 7.3e-6, 20e-6] {
        let s = at(&cf, t);
        let i = vm / z * ((w * t + phi - theta).cos() - (phi - theta).cos() * (-r * t / l).exp());
        close("l1.current", t, s.get("l1.current"), i, vm / z, ROUNDING);
        close("v1.current", t, s.get("v1.current"), -i, vm / z, ROUNDING);
    }
}

// ------------------------------------------------------------------------------------------------
// Series RLC (Nilsson & Riedel, ch. 8)

fn series_text(r: &str, wave: &str, run: &str, inits: (&str, &str)) -> String {
    format!(
        "name: rlc\nelements:\n  - {{ kind: voltage_source, name: v1, nodes: [in, gnd], waveform: {wave} }}\n  - {{ kind: resistor, name: r1, nodes: [in, a], value: {r} }}\n  - {{ kind: inductor, name: l1, nodes: [a, out], value: 1u{} }}\n  - {{ kind: capacitor, name: c1, nodes: [out, gnd], value: 1n{} }}\nrun: {run}\nwatch: [in, a, out, v1.current, r1.current, l1.current, c1.current]\nreference: {{ closed_form: series_rlc_step, source: v1, resistor: r1, inductor: l1, capacitor: c1 }}\n",
        inits.0, inits.1
    )
}

/// The textbook capacitor voltage and its derivative for a series RLC from v(0) = v0, dv/dt(0) = dv0
/// towards vf (Nilsson & Riedel, ch. 8): underdamped Vf + e^(-at)(B1 cos wd t + B2 sin wd t),
/// critically damped Vf + e^(-at)(D1 t + D2), overdamped Vf + A1 e^(s1 t) + A2 e^(s2 t).
fn textbook_second_order(
    alpha: f64,
    w0: f64,
    critical: bool,
    vf: f64,
    v0: f64,
    dv0: f64,
    t: f64,
) -> (f64, f64) {
    if critical {
        let d2 = v0 - vf;
        let d1 = dv0 + alpha * d2;
        let e = (-alpha * t).exp();
        (vf + e * (d1 * t + d2), e * (d1 - alpha * (d1 * t + d2)))
    } else if alpha < w0 {
        let wd = (w0 * w0 - alpha * alpha).sqrt();
        let b1 = v0 - vf;
        let b2 = (dv0 + alpha * b1) / wd;
        let e = (-alpha * t).exp();
        let (s, c) = (wd * t).sin_cos();
        (
            vf + e * (b1 * c + b2 * s),
            e * ((-alpha * b1 + wd * b2) * c + (-alpha * b2 - wd * b1) * s),
        )
    } else {
        let root = (alpha * alpha - w0 * w0).sqrt();
        let (s1, s2) = (-alpha + root, -alpha - root);
        let a1 = (dv0 - s2 * (v0 - vf)) / (s1 - s2);
        let a2 = (v0 - vf) - a1;
        (
            vf + a1 * (s1 * t).exp() + a2 * (s2 * t).exp(),
            a1 * s1 * (s1 * t).exp() + a2 * s2 * (s2 * t).exp(),
        )
    }
}

fn check_series(cf: &ClosedForm, r: f64, times: &[f64], expect: impl Fn(f64) -> (f64, f64, f64)) {
    let c = 1e-9;
    for &t in times {
        let s = at(cf, t);
        let (u, v, dv) = expect(t);
        let i = c * dv;
        close("in", t, s.get("in"), u, 2.0, ROUNDING);
        close("out", t, s.get("out"), v, 2.0, ROUNDING);
        // KVL around the resistor
        close("a", t, s.get("a"), u - r * i, 2.0, 1e-11);
        close("c1.current", t, s.get("c1.current"), i, 0.05, ROUNDING);
        close("l1.current", t, s.get("l1.current"), i, 0.05, ROUNDING);
        close("r1.current", t, s.get("r1.current"), i, 0.05, ROUNDING);
        close("v1.current", t, s.get("v1.current"), -i, 0.05, ROUNDING);
    }
}

#[test]
fn series_rlc_underdamped_from_initial_conditions() {
    // R = 10 ohm, L = 1 uH, C = 1 nF: alpha = 5e6 /s < w0 = 3.16e7 rad/s; v(0) = 0.5 V, i(0) = 20 mA
    let cf = ok(&series_text(
        "10",
        "{ step: { from: 0, to: 1 } }",
        "{ stop: 3u, start: initial_conditions }",
        (", initial_current: 20m", ", initial_voltage: 0.5"),
    ));
    let (alpha, w0) = (5e6, 1.0 / (1e-6f64 * 1e-9).sqrt());
    let times = [0.0, 0.05e-6, 0.31e-6, 1e-6, 2.9e-6];
    check_series(&cf, 10.0, &times, |t| {
        let (v, dv) = textbook_second_order(alpha, w0, false, 1.0, 0.5, 0.02 / 1e-9, t);
        (if t > 0.0 { 1.0 } else { 0.0 }, v, dv)
    });
}

#[test]
fn series_rlc_critically_damped_with_a_delayed_step() {
    // R = 2 sqrt(L/C): alpha = w0. From v(0) = -0.3 V, i(0) = 10 mA towards 0.2 V until the step at
    // 0.5 us, then from the state there towards 1 V: the textbook form applied twice, with the state at
    // 0.5 us taken from the textbook form itself.
    let r = 2.0 * (1e-6f64 / 1e-9).sqrt();
    let cf = ok(&series_text(
        &format!("{r}"),
        "{ step: { from: 0.2, to: 1, at: 0.5u } }",
        "{ stop: 3u, start: initial_conditions }",
        (", initial_current: 10m", ", initial_voltage: -0.3"),
    ));
    let alpha = r / 2e-6;
    let w0 = 1.0 / (1e-6f64 * 1e-9).sqrt();
    let first = |t: f64| textbook_second_order(alpha, w0, true, 0.2, -0.3, 0.01 / 1e-9, t);
    let (v1, dv1) = first(0.5e-6);
    let times = [0.0, 0.2e-6, 0.5e-6, 0.6e-6, 1.3e-6, 3e-6];
    check_series(&cf, r, &times, |t| {
        if t <= 0.5e-6 {
            let (v, dv) = first(t);
            (0.2, v, dv)
        } else {
            let (v, dv) = textbook_second_order(alpha, w0, true, 1.0, v1, dv1, t - 0.5e-6);
            (1.0, v, dv)
        }
    });
}

#[test]
fn series_rlc_overdamped_from_the_operating_point() {
    // R = 200 ohm: alpha = 1e8 /s > w0; the operating point holds v(0) = 2 V (the step's from), i(0) = 0.
    let cf = ok(&series_text(
        "200",
        "{ step: { from: 2, to: -1 } }",
        "{ stop: 20u }",
        ("", ""),
    ));
    let (alpha, w0) = (1e8, 1.0 / (1e-6f64 * 1e-9).sqrt());
    let times = [0.0, 0.01e-6, 0.2e-6, 1e-6];
    check_series(&cf, 200.0, &times, |t| {
        let (v, dv) = textbook_second_order(alpha, w0, false, -1.0, 2.0, 0.0, t);
        (if t > 0.0 { -1.0 } else { 2.0 }, v, dv)
    });
    // Far in the tail beta t exceeds 700, where cosh overflows on its own: the value must still be the
    // settled -1 V (e^(s1 t) = e^(-103) at 20 us), not a NaN from inf * 0.
    let s = at(&cf, 20e-6);
    close("out", 20e-6, s.get("out"), -1.0, 2.0, ROUNDING);
    close(
        "c1.current",
        20e-6,
        s.get("c1.current"),
        0.0,
        0.05,
        ROUNDING,
    );
}

#[test]
fn series_rlc_is_continuous_across_critical_damping() {
    // Just inside either side of critical damping (alpha = w0 (1 -+ 1e-9)) the response differs from
    // the critically damped one by about (alpha^2 - w0^2) t^2 e^(-alpha t) ~ 1e-9 of the step; a
    // formula that divides by the tiny wd or beta would lose far more. Textbook critical form, ch. 8.
    let rc = 2.0 * (1e-6f64 / 1e-9).sqrt();
    for f in [1.0 - 1e-9, 1.0 + 1e-9] {
        let cf = ok(&series_text(
            &format!("{}", rc * f),
            "{ step: { from: 0, to: 1 } }",
            "{ stop: 1u, start: initial_conditions }",
            (", initial_current: 10m", ""),
        ));
        let w0 = 1.0 / (1e-6f64 * 1e-9).sqrt();
        for t in [0.03e-6, 0.1e-6, 0.5e-6] {
            let (v, _) = textbook_second_order(w0, w0, true, 1.0, 0.0, 0.01 / 1e-9, t);
            close("out", t, at(&cf, t).get("out"), v, 1.0, 1e-8);
        }
    }
}

// ------------------------------------------------------------------------------------------------
// Parallel RLC (Nilsson & Riedel, ch. 8: the inductor current of the parallel RLC step response)

fn parallel_text(r: &str, src_nodes: &str, wave: &str, run: &str, inits: (&str, &str)) -> String {
    format!(
        "name: prlc\nelements:\n  - {{ kind: current_source, name: i1, nodes: {src_nodes}, waveform: {wave} }}\n  - {{ kind: resistor, name: r1, nodes: [top, gnd], value: {r} }}\n  - {{ kind: inductor, name: l1, nodes: [top, gnd], value: 1u{} }}\n  - {{ kind: capacitor, name: c1, nodes: [top, gnd], value: 1n{} }}\nrun: {run}\nwatch: [top, i1.current, r1.current, l1.current, c1.current]\nreference: {{ closed_form: parallel_rlc_step, source: i1, resistor: r1, inductor: l1, capacitor: c1 }}\n",
        inits.0, inits.1
    )
}

/// Compares every signal with the textbook inductor current: v = L di/dt, the resistor's v/R and the
/// capacitor's current from KCL at top, I = v/R + i_C + i_L.
fn check_parallel(
    cf: &ClosedForm,
    r: f64,
    push: f64,
    times: &[f64],
    expect: impl Fn(f64) -> (f64, f64, f64),
) {
    let l = 1e-6;
    for &t in times {
        let s = at(cf, t);
        let (source, il, dil) = expect(t);
        let v = l * dil;
        let scale_v = 1.0;
        close("top", t, s.get("top"), v, scale_v, ROUNDING);
        close("l1.current", t, s.get("l1.current"), il, 1e-2, ROUNDING);
        close("r1.current", t, s.get("r1.current"), v / r, 1e-2, ROUNDING);
        close("i1.current", t, s.get("i1.current"), source, 1e-2, ROUNDING);
        close(
            "c1.current",
            t,
            s.get("c1.current"),
            push * source - v / r - il,
            1e-2,
            1e-11,
        );
    }
}

#[test]
fn parallel_rlc_underdamped_from_initial_conditions() {
    // R = 1 kohm, L = 1 uH, C = 1 nF: alpha = 1/2RC = 5e5 /s < w0. i_L(0) = 2 mA, v(0) = 1 V, so
    // di_L/dt(0) = v(0)/L. The source, written [gnd, top], drives 10 mA into top.
    let cf = ok(&parallel_text(
        "1k",
        "[gnd, top]",
        "{ step: { from: 0, to: 10m } }",
        "{ stop: 5u, start: initial_conditions }",
        (", initial_current: 2m", ", initial_voltage: 1"),
    ));
    let (alpha, w0) = (5e5, 1.0 / (1e-6f64 * 1e-9).sqrt());
    let times = [0.0, 0.07e-6, 0.4e-6, 2e-6, 5e-6];
    check_parallel(&cf, 1e3, 1.0, &times, |t| {
        let src = if t > 0.0 { 10e-3 } else { 0.0 };
        let (il, dil) = textbook_second_order(alpha, w0, false, 10e-3, 2e-3, 1.0 / 1e-6, t);
        (src, il, dil)
    });
}

#[test]
fn parallel_rlc_overdamped_from_the_operating_point_with_a_reversed_source() {
    // R = 10 ohm: alpha = 5e7 /s > w0 = 3.16e7. The source is written [top, gnd], so it pulls its
    // current out of top: the operating point has i_L = -1 mA (the inductor carries the source current),
    // v = 0; after the step at 0.2 us i_L heads for -3 mA.
    let cf = ok(&parallel_text(
        "10",
        "[top, gnd]",
        "{ step: { from: 1m, to: 3m, at: 0.2u } }",
        "{ stop: 2u }",
        ("", ""),
    ));
    let (alpha, w0) = (5e7, 1.0 / (1e-6f64 * 1e-9).sqrt());
    let times = [0.0, 0.1e-6, 0.2e-6, 0.23e-6, 0.5e-6, 2e-6];
    check_parallel(&cf, 10.0, -1.0, &times, |t| {
        if t <= 0.2e-6 {
            (1e-3, -1e-3, 0.0)
        } else {
            let (il, dil) = textbook_second_order(alpha, w0, false, -3e-3, -1e-3, 0.0, t - 0.2e-6);
            (3e-3, il, dil)
        }
    });
}

#[test]
fn parallel_rlc_critically_damped() {
    // R = 1/2 sqrt(L/C): alpha = 1/2RC = w0. From i_L(0) = -4 mA, v(0) = -0.5 V towards 6 mA.
    let r = 0.5 * (1e-6f64 / 1e-9).sqrt();
    let cf = ok(&parallel_text(
        &format!("{r}"),
        "[gnd, top]",
        "{ constant: 6m }",
        "{ stop: 1u, start: initial_conditions }",
        (", initial_current: -4m", ", initial_voltage: -0.5"),
    ));
    let alpha = 1.0 / (2.0 * r * 1e-9);
    let w0 = 1.0 / (1e-6f64 * 1e-9).sqrt();
    let times = [0.0, 0.02e-6, 0.1e-6, 0.35e-6, 1e-6];
    check_parallel(&cf, r, 1.0, &times, |t| {
        let (il, dil) = textbook_second_order(alpha, w0, true, 6e-3, -4e-3, -0.5 / 1e-6, t);
        (6e-3, il, dil)
    });
}

// ------------------------------------------------------------------------------------------------
// LC release

fn lc_text(ind_nodes: &str, run: &str) -> String {
    format!(
        "name: lc\nelements:\n  - {{ kind: inductor, name: l1, nodes: {ind_nodes}, value: 1u, initial_current: 10m }}\n  - {{ kind: capacitor, name: c1, nodes: [top, gnd], value: 1n, initial_voltage: 2 }}\nrun: {run}\nwatch: [top, l1.current, c1.current]\nreference: {{ closed_form: lc_release, inductor: l1, capacitor: c1 }}\n"
    )
}

#[test]
fn lc_release_keeps_its_energy_and_starts_from_its_initial_conditions() {
    // 1/2 C v^2 + 1/2 L i^2 is constant in a lossless LC (conservation of energy); v and i start at the
    // given initial values and return to them after one period 2 pi sqrt(LC).
    for (nodes, sign) in [("[top, gnd]", 1.0), ("[gnd, top]", -1.0)] {
        let cf = ok(&lc_text(nodes, "{ stop: 1u, start: initial_conditions }"));
        let (l, c) = (1e-6, 1e-9);
        let energy = |v: f64, i: f64| 0.5 * c * v * v + 0.5 * l * i * i;
        let e0 = energy(2.0, 10e-3);
        let period = 2.0 * PI * (l * c).sqrt();
        let s = at(&cf, 0.0);
        close("top", 0.0, s.get("top"), 2.0, 2.0, ROUNDING);
        close(
            "l1.current",
            0.0,
            s.get("l1.current"),
            10e-3,
            0.07,
            ROUNDING,
        );
        let s = at(&cf, period);
        close("top", period, s.get("top"), 2.0, 2.0, 1e-11);
        close(
            "l1.current",
            period,
            s.get("l1.current"),
            10e-3,
            0.07,
            1e-11,
        );
        for t in [0.013e-6, 0.1e-6, 0.29e-6, 0.77e-6, 1e-6] {
            let s = at(&cf, t);
            let (v, i) = (s.get("top"), s.get("l1.current"));
            close("energy", t, energy(v, i), e0, e0, ROUNDING);
            // KCL at top: the capacitor's and the inductor's currents (both top -> gnd) sum to zero
            close(
                "c1.current + l1.current",
                t,
                s.get("c1.current") + sign * i,
                0.0,
                0.07,
                ROUNDING,
            );
        }
        // The capacitor starts by discharging through the inductor when the inductor current flows
        // top -> gnd: dv/dt(0) = -i_L(0)/C, with i_L(0) = 10 mA in the inductor's own direction.
        let h = 1e-12;
        let dv = (at(&cf, h).get("top") - at(&cf, -h).get("top")) / (2.0 * h);
        close("dv/dt(0)", 0.0, dv, -sign * 10e-3 / c, 1e7, 1e-5);
    }
}

#[test]
fn lc_release_matches_the_oscillation_formula() {
    // C dv/dt = -i_L and L di_L/dt = v (i_L top -> gnd): v = v0 cos wt - i0/(wC) sin wt,
    // i_L = i0 cos wt + v0/(wL) sin wt, w = 1/sqrt(LC) (derived from the conventions, checked above by
    // the energy relation).
    let cf = ok(&lc_text(
        "[top, gnd]",
        "{ stop: 1u, start: initial_conditions }",
    ));
    let (l, c, v0, i0): (f64, f64, f64, f64) = (1e-6, 1e-9, 2.0, 10e-3);
    let w = 1.0 / (l * c).sqrt();
    for t in [0.05e-6, 0.4e-6, 0.9e-6] {
        let s = at(&cf, t);
        let v = v0 * (w * t).cos() - i0 / (w * c) * (w * t).sin();
        let i = i0 * (w * t).cos() + v0 / (w * l) * (w * t).sin();
        close("top", t, s.get("top"), v, 2.5, ROUNDING);
        close("l1.current", t, s.get("l1.current"), i, 0.07, ROUNDING);
    }
}

// ------------------------------------------------------------------------------------------------
// Each formula satisfies its own circuit equations (central differences, loose tolerance).

fn derivative(cf: &ClosedForm, label: &str, t: f64, h: f64) -> f64 {
    (at(cf, t + h).get(label) - at(cf, t - h).get(label)) / (2.0 * h)
}

#[test]
fn every_formula_satisfies_its_differential_equations() {
    let tol = 1e-6;
    // first order: C dv/dt = i_C and (v_in - v_out)/R = i_R; L di/dt = v_mid and v_in - v_mid = R i
    let rc = [
        rc_text(
            "{ step: { from: 1, to: 5, at: 1u } }",
            "{ stop: 5u }",
            "rc_step",
        ),
        rc_text(
            "{ piecewise_linear: [[0, 1], [5u, 3]] }",
            "{ stop: 5u }",
            "rc_ramp",
        ),
        rc_text(
            "{ sine: { offset: 1, amplitude: 2, frequency: 300k, phase_deg: -40 } }",
            "{ stop: 5u, start: initial_conditions }",
            "rc_sine",
        ),
    ];
    for text in &rc {
        let cf = ok(text);
        for t in [0.3e-6, 1.6e-6, 4.1e-6] {
            let s = at(&cf, t);
            let h = 1e-10;
            close(
                "C dv/dt",
                t,
                1e-9 * derivative(&cf, "out", t, h),
                s.get("c1.current"),
                4e-3,
                tol,
            );
            close(
                "Ohm",
                t,
                (s.get("in") - s.get("out")) / 1e3,
                s.get("r1.current"),
                4e-3,
                tol,
            );
        }
    }
    let rl = [
        rl_text(
            "{ step: { from: 0, to: 10, at: 1u } }",
            "{ stop: 5u }",
            "rl_step",
            "",
        ),
        rl_text(
            "{ piecewise_linear: [[0, 1], [5u, 3]] }",
            "{ stop: 5u }",
            "rl_ramp",
            "",
        ),
        rl_text(
            "{ sine: { offset: 1, amplitude: 2, frequency: 300k, phase_deg: -40 } }",
            "{ stop: 5u, start: initial_conditions }",
            "rl_sine",
            ", initial_current: -0.1",
        ),
    ];
    for text in &rl {
        let cf = ok(text);
        for t in [0.3e-6, 1.6e-6, 4.1e-6] {
            let s = at(&cf, t);
            let h = 1e-10;
            close(
                "L di/dt",
                t,
                10e-6 * derivative(&cf, "l1.current", t, h),
                s.get("mid"),
                10.0,
                tol,
            );
            close(
                "Ohm",
                t,
                (s.get("in") - s.get("mid")) / 10.0,
                s.get("r1.current"),
                1.0,
                tol,
            );
        }
    }
    // series RLC in each regime: L di/dt = v_a - v_out, C dv_out/dt = i
    for r in ["10", "63.2455532033676", "200"] {
        let cf = ok(&series_text(
            r,
            "{ step: { from: 0.5, to: 1, at: 0.4u } }",
            "{ stop: 3u, start: initial_conditions }",
            (", initial_current: 20m", ", initial_voltage: -1"),
        ));
        for t in [0.15e-6, 0.9e-6, 2.2e-6] {
            let s = at(&cf, t);
            let h = 1e-11;
            let i = s.get("l1.current");
            close(
                "L di/dt",
                t,
                1e-6 * derivative(&cf, "l1.current", t, h),
                s.get("a") - s.get("out"),
                2.0,
                tol,
            );
            close(
                "C dv/dt",
                t,
                1e-9 * derivative(&cf, "out", t, h),
                i,
                0.05,
                tol,
            );
        }
    }
    // parallel RLC in each regime: L di/dt = v, C dv/dt = i_C, KCL at top
    for r in ["1k", "15.8113883008419", "10"] {
        let cf = ok(&parallel_text(
            r,
            "[gnd, top]",
            "{ step: { from: 1m, to: 4m, at: 0.3u } }",
            "{ stop: 3u, start: initial_conditions }",
            (", initial_current: 2m", ", initial_voltage: 0.5"),
        ));
        for t in [0.12e-6, 0.8e-6, 2.6e-6] {
            let s = at(&cf, t);
            let h = 1e-11;
            close(
                "L di/dt",
                t,
                1e-6 * derivative(&cf, "l1.current", t, h),
                s.get("top"),
                1.0,
                tol,
            );
            close(
                "C dv/dt",
                t,
                1e-9 * derivative(&cf, "top", t, h),
                s.get("c1.current"),
                1e-2,
                tol,
            );
            let kcl = s.get("i1.current")
                - s.get("r1.current")
                - s.get("l1.current")
                - s.get("c1.current");
            close("KCL", t, kcl, 0.0, 1e-2, 1e-11);
        }
    }
    // LC: L di/dt = v, C dv/dt = i_C
    let cf = ok(&lc_text(
        "[top, gnd]",
        "{ stop: 1u, start: initial_conditions }",
    ));
    for t in [0.1e-6, 0.55e-6] {
        let s = at(&cf, t);
        let h = 1e-11;
        close(
            "L di/dt",
            t,
            1e-6 * derivative(&cf, "l1.current", t, h),
            s.get("top"),
            2.5,
            tol,
        );
        close(
            "C dv/dt",
            t,
            1e-9 * derivative(&cf, "top", t, h),
            s.get("c1.current"),
            0.07,
            tol,
        );
    }
}

// ------------------------------------------------------------------------------------------------
// The reference as the rest of the program builds it

#[test]
fn reference_build_uses_the_closed_form_and_keeps_the_watch_order() {
    let text = rc_text("{ step: { from: 0, to: 1 } }", "{ stop: 5u }", "rc_step");
    let c = circuit(&text);
    let s = settings(&c, MethodName::Bdf2, |_| {});
    let r = Reference::build(&c, &s).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(r.kind.label(), "closed_form:rc_step");
    assert_eq!(
        r.labels,
        ["in", "out", "v1.current", "r1.current", "c1.current"]
    );
    let out = r.evaluate(&[0.0, 1e-6]);
    assert_eq!(out.len(), 5);
    // v(tau) = 1 - 1/e (Nilsson & Riedel, ch. 7)
    close("out", 1e-6, out[1][1], 1.0 - (-1.0f64).exp(), 1.0, ROUNDING);
}

#[test]
fn default_watch_gives_every_node() {
    let text = "name: rc\nelements:\n  - { kind: voltage_source, name: v1, nodes: [in, gnd], waveform: { step: { to: 1 } } }\n  - { kind: resistor, name: r1, nodes: [in, out], value: 1k }\n  - { kind: capacitor, name: c1, nodes: [out, gnd], value: 1n }\nrun: { stop: 5u }\nreference: { closed_form: rc_step, source: v1, resistor: r1, capacitor: c1 }\n";
    let cf = ok(text);
    assert_eq!(cf.labels(), ["in", "out"]);
    let s = at(&cf, 2e-6);
    close(
        "out",
        2e-6,
        s.get("out"),
        1.0 - (-2.0f64).exp(),
        1.0,
        ROUNDING,
    );
}

// ------------------------------------------------------------------------------------------------
// Refusals: each a returned error that names the element and says what to change.

#[test]
fn refuses_a_role_of_the_wrong_kind() {
    let text = rc_text("{ step: { to: 1 } }", "{ stop: 5u }", "rc_step")
        .replace("capacitor: c1 }", "capacitor: r1 }");
    let m = refused(&text);
    assert!(
        m.contains("role 'capacitor' names r1, which is a resistor; name a capacitor between node out and ground"),
        "{m}"
    );
}

#[test]
fn refuses_an_extra_element() {
    let text = rc_text("{ step: { to: 1 } }", "{ stop: 5u }", "rc_step").replace(
        "\nrun:",
        "\n  - { kind: resistor, name: rload, nodes: [out, gnd], value: 10k }\nrun:",
    );
    let m = refused(&text);
    assert!(
        m.contains("element rload") && m.contains("reference: exact"),
        "{m}"
    );
}

#[test]
fn refuses_unsupported_waveforms() {
    let cases = [
        (
            rc_text(
                "{ pulse: { high: 1, width: 1u, period: 2u } }",
                "{ stop: 5u }",
                "rc_step",
            ),
            "pulse",
        ),
        (
            rc_text("{ step: { to: 1, rise: 10n } }", "{ stop: 5u }", "rc_step"),
            "rise 1e-8",
        ),
        (
            rc_text(
                "{ piecewise_linear: [[0, 0], [1u, 1], [5u, 1]] }",
                "{ stop: 5u }",
                "rc_ramp",
            ),
            "3 points",
        ),
        (
            rc_text(
                "{ piecewise_linear: [[0, 0], [1u, 1]] }",
                "{ stop: 5u }",
                "rc_ramp",
            ),
            "at or after stop",
        ),
        (
            rc_text("{ step: { to: 1, rise: 1u } }", "{ stop: 5u }", "rc_ramp"),
            "rise of at least stop",
        ),
        (
            rl_text(
                "{ sine: { amplitude: 1, frequency: 1M, delay: 1u } }",
                "{ stop: 5u }",
                "rl_sine",
                "",
            ),
            "delay: 0",
        ),
        (
            rl_text("{ constant: 1 }", "{ stop: 5u }", "rl_sine", ""),
            "constant",
        ),
        (
            series_text(
                "10",
                "{ sine: { amplitude: 1, frequency: 1M } }",
                "{ stop: 1u }",
                ("", ""),
            ),
            "sine",
        ),
    ];
    for (text, needle) in cases {
        let m = refused(&text);
        assert!(m.contains(needle) && m.contains("v1"), "{needle}: {m}");
    }
}

#[test]
fn refuses_a_source_written_upside_down() {
    let text = rc_text("{ step: { to: 1 } }", "{ stop: 5u }", "rc_step")
        .replace("nodes: [in, gnd]", "nodes: [gnd, in]");
    let m = refused(&text);
    assert!(m.contains("v1") && m.contains("nodes: [in, gnd]"), "{m}");
}

#[test]
fn refuses_misnamed_missing_and_unknown_roles_and_formulas() {
    let base = rc_text("{ step: { to: 1 } }", "{ stop: 5u }", "rc_step");
    let m = refused(&base.replace("capacitor: c1 }", "capacitor: c9 }"));
    assert!(m.contains("c9") && m.contains("not an element"), "{m}");
    let m = refused(&base.replace(", capacitor: c1 }", " }"));
    assert!(m.contains("role 'capacitor' is missing"), "{m}");
    let m = refused(&base.replace("capacitor: c1 }", "capacitor: c1, diode: d1 }"));
    assert!(
        m.contains("'diode'") && m.contains("source, resistor, capacitor"),
        "{m}"
    );
    let m = refused(&base.replace("closed_form: rc_step", "closed_form: rc_stepp"));
    assert!(
        m.contains("rc_step, rc_ramp") && m.contains("lc_release"),
        "{m}"
    );
    // the rc roles on an rl formula: the capacitor role is not one of rl_step's
    let m = refused(&base.replace("closed_form: rc_step", "closed_form: rl_step"));
    assert!(m.contains("'capacitor'") && m.contains("inductor"), "{m}");
}

#[test]
fn refuses_a_series_rlc_in_the_wrong_order() {
    // source - resistor - capacitor - inductor: not the circuit series_rlc_step describes
    let text = "name: rlc\nelements:\n  - { kind: voltage_source, name: v1, nodes: [in, gnd], waveform: { step: { to: 1 } } }\n  - { kind: resistor, name: r1, nodes: [in, a], value: 10 }\n  - { kind: capacitor, name: c1, nodes: [a, out], value: 1n }\n  - { kind: inductor, name: l1, nodes: [out, gnd], value: 1u }\nrun: { stop: 1u }\nreference: { closed_form: series_rlc_step, source: v1, resistor: r1, inductor: l1, capacitor: c1 }\n";
    let m = refused(text);
    assert!(
        m.contains("l1") && m.contains("connects out and gnd") && m.contains("node a"),
        "{m}"
    );
}

#[test]
fn refuses_lc_release_from_the_operating_point() {
    let m = refused(&lc_text("[top, gnd]", "{ stop: 1u }"));
    assert!(m.contains("initial_conditions"), "{m}");
}

#[test]
fn refuses_a_parallel_rlc_with_a_voltage_source() {
    let text = "name: prlc\nelements:\n  - { kind: voltage_source, name: v1, nodes: [top, gnd], waveform: { step: { to: 1 } } }\n  - { kind: resistor, name: r1, nodes: [top, gnd], value: 10 }\n  - { kind: inductor, name: l1, nodes: [top, x], value: 1u }\n  - { kind: capacitor, name: c1, nodes: [x, gnd], value: 1n }\nrun: { stop: 1u }\nreference: { closed_form: parallel_rlc_step, source: v1, resistor: r1, inductor: l1, capacitor: c1 }\n";
    let m = refused(text);
    assert!(
        m.contains("role 'source' names v1, which is a voltage_source; name a current_source"),
        "{m}"
    );
}

#[test]
fn initial_conditions_follow_each_elements_own_orientation() {
    // The same physical state written with the storage elements reversed and their initial values
    // negated (initial_voltage is v(first) - v(second), initial_current flows first -> second) must give
    // the same node voltages and the negated currents of the reversed elements.
    let pairs = [
        (
            rl_text(
                "{ step: { to: 10 } }",
                "{ stop: 5u, start: initial_conditions }",
                "rl_step",
                ", initial_current: 0.3",
            ),
            rl_text(
                "{ step: { to: 10 } }",
                "{ stop: 5u, start: initial_conditions }",
                "rl_step",
                ", initial_current: -0.3",
            )
            .replace("nodes: [mid, gnd]", "nodes: [gnd, mid]"),
            vec!["l1.current"],
        ),
        (
            series_text(
                "10",
                "{ step: { to: 1 } }",
                "{ stop: 3u, start: initial_conditions }",
                (", initial_current: 20m", ", initial_voltage: 0.5"),
            ),
            series_text(
                "10",
                "{ step: { to: 1 } }",
                "{ stop: 3u, start: initial_conditions }",
                (", initial_current: -20m", ", initial_voltage: -0.5"),
            )
            .replace("nodes: [a, out]", "nodes: [out, a]")
            .replace("nodes: [out, gnd]", "nodes: [gnd, out]"),
            vec!["l1.current", "c1.current"],
        ),
        (
            parallel_text(
                "1k",
                "[gnd, top]",
                "{ step: { to: 10m } }",
                "{ stop: 5u, start: initial_conditions }",
                (", initial_current: 2m", ", initial_voltage: 1"),
            ),
            parallel_text(
                "1k",
                "[gnd, top]",
                "{ step: { to: 10m } }",
                "{ stop: 5u, start: initial_conditions }",
                (", initial_current: -2m", ", initial_voltage: -1"),
            )
            .replace("name: l1, nodes: [top, gnd]", "name: l1, nodes: [gnd, top]")
            .replace("name: c1, nodes: [top, gnd]", "name: c1, nodes: [gnd, top]"),
            vec!["l1.current", "c1.current"],
        ),
    ];
    for (plain, reversed, flipped) in &pairs {
        assert_ne!(plain, reversed, "the replacements must change the circuit");
        let (a, b) = (ok(plain), ok(reversed));
        for t in [0.0, 0.13e-6, 0.9e-6, 2.4e-6] {
            let (sa, sb) = (at(&a, t), at(&b, t));
            for (label, va) in &sa.0 {
                let sign = if flipped.contains(&label.as_str()) {
                    -1.0
                } else {
                    1.0
                };
                let scale = sa.0.iter().map(|(_, v)| v.abs()).fold(1e-3, f64::max);
                close(label, t, sb.get(label), sign * va, scale, ROUNDING);
            }
        }
    }
}
