//! Observed order of accuracy under fixed steps: the slope of log(max error) against log(h) over three
//! halvings, on a sine-driven RC whose exact response is known.
//!
//! Expected orders: backward Euler 1, trapezoidal 2, BDF2 2, TR-BDF2 2 (Hairer & Wanner, *Solving ODEs
//! I*, II.1 and III.1; *Solving ODEs II*, IV.3 and V.1; Hosea & Shampine 1996 for TR-BDF2), each within
//! +/- 0.2. The runs use `restart: same`, so the first step is the method's own (with the default
//! backward-Euler restart its O(h^2) local error would dominate and hide the method). Exact response of v' = (sin(w t) - v) / tau from v(0) = 0:
//! v(t) = [sin(w t) - w tau cos(w t) + w tau exp(-t / tau)] / (1 + (w tau)^2)
//! (Nilsson & Riedel, *Electric Circuits*, ch. 7 and 9: step-by-step solution of a first-order circuit
//! with a sinusoidal source).

use crate::common::{circuit, max_error, run};
use ringtrue::settings::MethodName;

const TEXT: &str = "name: rc-sine\nelements:\n  - { kind: voltage_source, name: v1, nodes: [in, gnd], waveform: { sine: { amplitude: 1, frequency: 0.5 } } }\n  - { kind: resistor, name: r1, nodes: [in, out], value: 1 }\n  - { kind: capacitor, name: c1, nodes: [out, gnd], value: 1 }\nrun: { stop: 4 }\nwatch: [out]\n";

fn exact(t: f64) -> f64 {
    let w = 2.0 * std::f64::consts::PI * 0.5;
    let wt = w * 1.0;
    ((w * t).sin() - wt * (w * t).cos() + wt * (-t).exp()) / (1.0 + wt * wt)
}

/// Slopes of log2(error) between successive halvings, starting from `h0`.
pub fn observed_orders(method: MethodName, h0: f64) -> Vec<f64> {
    let c = circuit(TEXT);
    let errors: Vec<f64> = (0..4)
        .map(|k| {
            let h = h0 / 2f64.powi(k);
            let r = run(&c, method, |s| {
                s.steps.fixed_step = Some(h);
                s.steps.restart = ringtrue::settings::Restart::Same;
            });
            max_error(&r, "out", exact)
        })
        .collect();
    errors.windows(2).map(|w| (w[0] / w[1]).log2()).collect()
}

#[test]
fn fixed_step_orders_match_theory() {
    for (m, p) in [
        (MethodName::BackwardEuler, 1.0),
        (MethodName::Trapezoidal, 2.0),
        (MethodName::Bdf2, 2.0),
        (MethodName::TrBdf2, 2.0),
    ] {
        let orders = observed_orders(m, 0.02);
        eprintln!("measured: {} fixed-step orders {orders:?}", m.as_str());
        for o in &orders {
            assert!(
                (o - p).abs() <= 0.2,
                "{}: observed orders {orders:?}, expected {p}",
                m.as_str()
            );
        }
    }
}
