//! The engine's time per accepted step against its floor: one numeric refactorization of the step's
//! Jacobian plus the solves the method needs per step, timed alone on the same matrix. Also the time per
//! step against the number of unknowns, and the process's peak memory.
//!
//! Run with `cargo bench --bench floor -- FILE.yaml...` (circuit files, e.g. from `ringtrue generate`);
//! `--rtol X` (default 1e-4) and `--scale S` (default circuit_peak) set the runs. Without files it
//! measures RC ladders of 1000 and 10000 stages from the catalogue.

use ringtrue::catalogue::rc_ladder;
use ringtrue::circuit;
use ringtrue::equations::System;
use ringtrue::integrate;
use ringtrue::settings::{MethodName, Scale, Settings};
use std::time::Instant;

/// Solves per accepted step: one Newton update per stage of a linear circuit (TR-BDF2 has two stages,
/// and its error estimate one more solve).
fn solves_per_step(m: MethodName) -> usize {
    match m {
        MethodName::TrBdf2 => 3,
        _ => 1,
    }
}

fn best_of<T>(repeats: usize, mut f: impl FnMut() -> T) -> (f64, T) {
    let mut best = f64::INFINITY;
    let mut out = None;
    for _ in 0..repeats {
        let t0 = Instant::now();
        let r = f();
        best = best.min(t0.elapsed().as_secs_f64());
        out = Some(r);
    }
    (best, out.expect("at least one repeat"))
}

fn peak_rss_mb() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb / 1024.0)
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let mut rtol = 1e-4;
    let mut scale = Scale::CircuitPeak;
    let mut files = Vec::new();
    let mut it = args.iter();
    while let Some(a) = it.next() {
        match a.as_str() {
            "--rtol" => rtol = it.next().and_then(|v| v.parse().ok()).expect("--rtol X"),
            "--scale" => scale = it.next().and_then(|v| v.parse().ok()).expect("--scale S"),
            "--bench" => {}
            f => files.push(f.to_string()),
        }
    }
    let cases: Vec<(String, String)> = if files.is_empty() {
        [1000usize, 10000]
            .iter()
            .map(|&n| (format!("catalogue ladder {n}"), rc_ladder(n)))
            .collect()
    } else {
        files
            .iter()
            .map(|f| {
                (
                    f.clone(),
                    std::fs::read_to_string(f).expect("readable file"),
                )
            })
            .collect()
    };
    println!(
        "{:<34} {:>8} {:>9} {:>7} {:>7} {:>10} {:>10} {:>10} {:>10} {:>6}",
        "circuit",
        "unknowns",
        "method",
        "steps",
        "factors",
        "s/step",
        "factor s",
        "solve s",
        "floor s",
        "ratio"
    );
    for (label, text) in cases {
        let c = circuit::parse(&text, &label).expect("the circuit parses");
        let sys = System::new(&c);
        let n = sys.size();
        for m in [MethodName::Trapezoidal, MethodName::TrBdf2] {
            let mut s = Settings::new(m);
            s.tolerances.rtol = rtol;
            s.tolerances.scale = scale;
            let (run_s, run) =
                best_of(3, || integrate::simulate(&c, &s).expect("the circuit runs"));
            let st = run.stats;
            // The floor: the Jacobian of a step of the run's typical size, factored and solved alone.
            let h = c.run.stop / st.steps as f64;
            let alpha = match m {
                MethodName::TrBdf2 => 2.0 / (integrate::methods::GAMMA * h),
                _ => 2.0 / h,
            };
            let mut jac = sys.jacobian.clone();
            jac.set_combination(alpha, sys.c(), sys.g());
            let reps = 20;
            let (factor_s, lu) = best_of(reps, || jac.factor().expect("the Jacobian factors"));
            // A fresh right-hand side each time (repeated in-place solves would grow it to inf/NaN);
            // the copy costs about 3% of a solve at 10^4 unknowns.
            let rhs = vec![1.0; n];
            let mut b = rhs.clone();
            let (solve_s, ()) = best_of(reps, || {
                b.copy_from_slice(&rhs);
                lu.solve(&mut b)
            });
            assert!(b.iter().all(|v| v.is_finite()), "the solve is finite");
            let floor = factor_s + solves_per_step(m) as f64 * solve_s;
            let per_step = run_s / st.steps as f64;
            println!(
                "{:<34} {n:>8} {:>9} {:>7} {:>7} {per_step:>10.3e} {factor_s:>10.3e} {solve_s:>10.3e} {floor:>10.3e} {:>6.2}",
                label,
                m.as_str(),
                st.steps,
                st.factorizations,
                per_step / floor
            );
        }
    }
    if let Some(mb) = peak_rss_mb() {
        println!("peak resident memory of this process: {mb:.0} MB");
    }
}
