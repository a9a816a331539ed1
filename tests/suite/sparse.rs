//! The sparse and dense LU paths agree. Each step's linear system, solved both ways, agrees to 1e-12 of
//! the solution's largest entry; whole runs take the same steps and agree to 1e-7 of each signal's peak when linear
//! (runs of up to 10^5 steps accumulate the rounding of every solve, and a lightly damped circuit
//! carries it along: the worst measured is 2.8e-8, backward Euler on the gate-drive RLC). Both factorizations are backward stable with
//! partial pivoting (Golub & Van Loan, Matrix Computations, 3.4), so they may differ only by rounding.

use crate::common::{circuit, run};
use ringtrue::catalogue::rc_ladder;
use ringtrue::equations::System;
use ringtrue::settings::{Backend, MethodName};

/// The step matrix alpha C + G at steps from 1e-6 to 1e-1 of the run, with the diodes' and switches'
/// stamps at zero volts, solved dense and sparse for a right-hand side with entries of both signs.
fn compare_solves(label: &str, text: &str) {
    let c = circuit(text);
    let sys = System::new(&c);
    let n = sys.size();
    let rhs: Vec<f64> = (0..n)
        .map(|i| 1.0 + ((i * 7919) % 13) as f64 - 6.0)
        .collect();
    for frac in [1e-6, 1e-4, 1e-2, 1e-1] {
        let alpha = 1.0 / (frac * c.run.stop);
        let mut jac = sys.jacobian.clone();
        jac.set_combination(alpha, sys.c(), sys.g());
        let mut scratch = vec![0.0; n];
        sys.current_into(&vec![0.0; n], 0.0, &mut scratch, Some(&mut jac));
        let solve = |b: Backend| {
            let mut m = jac.clone();
            m.set_backend(b);
            let mut x = rhs.clone();
            m.factor().expect("the step matrix factors").solve(&mut x);
            x
        };
        let (d, s) = (solve(Backend::Dense), solve(Backend::Sparse));
        let peak = d.iter().fold(0.0f64, |p, v| p.max(v.abs()));
        let worst = d
            .iter()
            .zip(&s)
            .fold(0.0f64, |w, (a, b)| w.max((a - b).abs() / peak));
        println!("{label} h = {frac:e} * stop: sparse vs dense solve {worst:.2e}");
        assert!(worst <= 1e-12, "{label} h = {frac:e} * stop: {worst:e}");
    }
}

const SHIPPED: [&str; 6] = [
    "rc-ladder-20",
    "gate-drive-rlc",
    "usb-rectifier",
    "diode-clamp",
    "relay-contact-opening",
    "coupled-coil-resonators",
];

fn shipped(name: &str) -> String {
    let path = format!(
        "{}/reference_circuits/{name}.yaml",
        env!("CARGO_MANIFEST_DIR")
    );
    std::fs::read_to_string(&path).expect("shipped circuit")
}

#[test]
fn sparse_and_dense_solves_agree_to_1e_12() {
    for name in SHIPPED {
        compare_solves(name, &shipped(name));
    }
    compare_solves("ladder-148", &rc_ladder(148));
}

fn compare(label: &str, text: &str) {
    let c = circuit(text);
    // A nonlinear run stops Newton at its tolerance (1e-2 of rtol, integrate/newton.rs), so rounding
    // may end an iteration one step earlier or later: agreement is then that tolerance, not rounding.
    let bound = if c.is_linear() { 1e-7 } else { 1e-4 };
    for m in MethodName::ALL {
        let dense = run(&c, m, |s| s.linear_solver = Backend::Dense);
        let sparse = run(&c, m, |s| s.linear_solver = Backend::Sparse);
        let (mut a, mut b) = (dense.trajectory, sparse.trajectory);
        let mut bound = bound;
        if !c.is_linear() && a.times.len() != b.times.len() {
            // Newton's stopping point, or whether a far-off iterate's Jacobian counts as singular (a
            // cut step), can move by rounding, and with it a later accept/reject choice. The step
            // sequences then part: the runs are two valid solutions at the run's rtol (1e-3), compared
            // at 200 common times to ten times that (the solves above carry the 1e-12 agreement).
            let times: Vec<f64> = (0..200).map(|k| c.run.stop * k as f64 / 199.0).collect();
            let bps = c.breakpoints();
            a = a.resample(&bps, &times);
            b = b.resample(&bps, &times);
            bound = 1e-2;
        }
        let (a, b) = (&a, &b);
        assert_eq!(
            a.times.len(),
            b.times.len(),
            "{label} {}: step counts differ",
            m.as_str()
        );
        let mut worst: f64 = 0.0;
        for (ta, tb) in a.times.iter().zip(&b.times) {
            worst = worst.max((ta - tb).abs() / c.run.stop);
        }
        for (va, vb) in a.values.iter().zip(&b.values) {
            let peak = va.iter().fold(0.0f64, |p, v| p.max(v.abs())).max(1e-300);
            for (x, y) in va.iter().zip(vb) {
                worst = worst.max((x - y).abs() / peak);
            }
        }
        println!("{label} {}: sparse vs dense {worst:.2e}", m.as_str());
        assert!(
            worst <= bound,
            "{label} {}: {worst:e} > {bound:e}",
            m.as_str()
        );
    }
}

#[test]
fn sparse_and_dense_agree_on_shipped_circuits() {
    for name in SHIPPED {
        compare(name, &shipped(name));
    }
}

#[test]
fn sparse_and_dense_agree_above_the_automatic_limit() {
    // 150 unknowns: the automatic choice is sparse here, and the dense path still runs quickly.
    compare("ladder-148", &rc_ladder(148));
}

/// The bit patterns of a vector, so that comparing them tells signed zeros apart.
fn bits(v: &[f64]) -> Vec<u64> {
    v.iter().map(|x| x.to_bits()).collect()
}

/// `factor_combination` factors alpha C + G without assembling it. On the step-matrix pattern its
/// solves must be bit-equal to those of the same matrix assembled with the same history of learned
/// pivots (the same sums, (0 + alpha c) + g, then the same LU), for both LUs and for later alphas through
/// the laid-out copy. A matrix whose pattern lacks the entries assembles them instead; its pattern, and
/// so its column order, differs, so it agrees to 1e-12 of the solution's largest entry, as the LUs do.
#[test]
fn factoring_a_combination_equals_factoring_the_assembled_matrix() {
    let texts = [
        ("rc-ladder-20", shipped("rc-ladder-20")),
        ("gate-drive-rlc", shipped("gate-drive-rlc")),
        (
            "coupled-coil-resonators",
            shipped("coupled-coil-resonators"),
        ),
        ("ladder-148", rc_ladder(148)),
    ];
    for (label, text) in texts {
        let c = circuit(&text);
        let sys = System::new(&c);
        assert!(sys.linear, "{label} is linear");
        let n = sys.size();
        let (g, cp) = sys.packed_g_c();
        let rhs: Vec<f64> = (0..n).map(|i| ((i * 7919) % 13) as f64 - 6.0).collect();
        let solve = |lu: ringtrue::equations::matrix::Lu| {
            let mut x = rhs.clone();
            lu.solve(&mut x);
            x
        };
        for backend in [Backend::Dense, Backend::Sparse] {
            let mut assembled = sys.jacobian.clone();
            let mut direct = sys.jacobian.clone();
            let mut bare = ringtrue::equations::matrix::Matrix::new(n);
            for m in [&mut assembled, &mut direct, &mut bare] {
                m.set_backend(backend);
            }
            for frac in [1e-6, 1e-2, 1e-1, 1e-6] {
                let alpha = 1.0 / (frac * c.run.stop);
                assembled.set_combination(alpha, sys.c(), sys.g());
                let want = solve(assembled.factor().expect("the step matrix factors"));
                let at = format!("{label} {backend:?} h = {frac:e} * stop");
                let got = solve(
                    direct
                        .factor_combination(alpha, cp, g, None)
                        .expect("factors"),
                );
                assert!(bits(&got) == bits(&want), "{at}: solves differ");
                let got = solve(
                    bare.factor_combination(alpha, cp, g, None)
                        .expect("factors"),
                );
                let peak = want.iter().fold(0.0f64, |p, v| p.max(v.abs()));
                let worst = want
                    .iter()
                    .zip(&got)
                    .fold(0.0f64, |w, (a, b)| w.max((a - b).abs() / peak));
                assert!(worst <= 1e-12, "{at}, bare pattern: {worst:e}");
            }
        }
    }
}

/// Regression: `factor_combination` once summed alpha c + g, where assembling sums (0 + alpha c) + g;
/// with stored negative zeros in C and G (a zero-valued element across two nodes) the two differ in the
/// sign of a zero, and the solution with them (reported by an independent review).
#[test]
fn a_combination_keeps_the_signed_zeros_of_the_assembled_matrix() {
    use ringtrue::equations::matrix::Matrix;
    let n = 20;
    let (mut c, mut g) = (Matrix::new(n), Matrix::new(n));
    for i in 0..n {
        g.add(i, i, 1.0);
    }
    for (r, col) in [(0, 1), (1, 0)] {
        g.add(r, col, -0.0);
        c.add(r, col, -0.0);
    }
    for i in 2..n - 1 {
        // a 1 mF capacitor from node i to node i + 1
        for (r, col, v) in [
            (i, i, 1e-3),
            (i + 1, i + 1, 1e-3),
            (i, i + 1, -1e-3),
            (i + 1, i, -1e-3),
        ] {
            c.add(r, col, v);
        }
    }
    let mut pattern = Matrix::with_diagonal(n);
    pattern.set_backend(Backend::Sparse);
    pattern.set_combination(1.0, &c, &g);
    let (cp, gp) = (c.packed(), g.packed());
    let mut rhs = vec![0.0; n];
    rhs[0] = -0.0;
    rhs[1] = 1.0;
    rhs[5] = 2.0;
    for alpha in [1.0, 2.0] {
        let mut assembled = pattern.clone();
        assembled.set_combination(alpha, &c, &g);
        let mut direct = pattern.clone();
        let mut want = rhs.clone();
        assembled.factor().expect("factors").solve(&mut want);
        let mut got = rhs.clone();
        direct
            .factor_combination(alpha, &cp, &gp, None)
            .expect("factors")
            .solve(&mut got);
        assert_eq!(bits(&got), bits(&want), "alpha = {alpha}");
    }
}
