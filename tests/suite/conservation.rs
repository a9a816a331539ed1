//! The trapezoidal rule conserves the energy of a lossless LC exactly, whatever the step sequence: on a
//! linear conservative system it is the Cayley transform (I - hA/2)^-1 (I + hA/2), which is orthogonal
//! in the energy norm for every h (Hairer, Lubich & Wanner, *Geometric Numerical Integration*, IV.2:
//! the implicit midpoint and trapezoidal rules conserve quadratic invariants of linear systems).

use crate::common::{circuit, run};
use ringtrue::settings::{MethodName, Restart, Start};

#[test]
fn trapezoidal_keeps_lc_energy_with_irregular_steps() {
    // A 0 A current source whose piecewise-linear corners at irregular times force steps to land there.
    let corners: Vec<String> = [0.13, 0.37, 0.41, 0.9, 1.55, 1.56, 2.2, 2.93, 3.7, 4.01, 4.6]
        .iter()
        .map(|t| format!("[{t}u, 0]"))
        .collect();
    let text = format!(
        "name: lc\nelements:\n  - {{ kind: inductor, name: l1, nodes: [top, gnd], value: 1u, initial_current: 2m }}\n  - {{ kind: capacitor, name: c1, nodes: [top, gnd], value: 1n, initial_voltage: 1 }}\n  - {{ kind: current_source, name: ipin, nodes: [top, gnd], waveform: {{ piecewise_linear: [{}] }} }}\nrun: {{ stop: 5u, start: initial_conditions }}\nwatch: [top, l1.current]\n",
        corners.join(", ")
    );
    let c = circuit(&text);
    let r = run(&c, MethodName::Trapezoidal, |s| {
        s.tolerances.rtol = 1e-4;
        s.steps.restart = Restart::Same;
        s.start = Start::InitialConditions;
    });
    let v = r.trajectory.signal("top").unwrap();
    let i = r.trajectory.signal("l1.current").unwrap();
    let energy = |k: usize| 0.5 * 1e-9 * v[k] * v[k] + 0.5 * 1e-6 * i[k] * i[k];
    let e0 = energy(0);
    let steps: Vec<f64> = r.trajectory.times.windows(2).map(|w| w[1] - w[0]).collect();
    let (hmin, hmax) = steps
        .iter()
        .fold((f64::MAX, 0.0f64), |(a, b), h| (a.min(*h), b.max(*h)));
    assert!(
        hmax / hmin > 10.0,
        "the step sequence must be irregular: {hmin:e}..{hmax:e}"
    );
    let worst = (0..v.len())
        .map(|k| (energy(k) - e0).abs() / e0)
        .fold(0.0f64, f64::max);
    eprintln!(
        "measured: {} steps, step ratio {:.1}, worst relative energy change {worst:.2e}",
        v.len() - 1,
        hmax / hmin
    );
    for k in 0..v.len() {
        let rel = (energy(k) - e0).abs() / e0;
        assert!(
            rel <= 1e-10,
            "t = {}: relative energy change {rel:e}",
            r.trajectory.times[k]
        );
    }
}
