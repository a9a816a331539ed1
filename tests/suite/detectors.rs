//! The detectors against published method properties: the amplitude lost per period on a lossless
//! oscillator equals 1 - |R(i w h)|^(T/h) from each method's stability function (Hairer & Wanner,
//! *Solving ODEs II*, IV.3 for backward Euler, trapezoidal, TR-BDF2's R(z) from Hosea & Shampine 1996;
//! V.1 for BDF2's characteristic root); the trapezoidal rule, |R(i y)| = 1, loses none.

use crate::common::{circuit, run};
use ringtrue::audit::FlagKind;
use ringtrue::detect;
use ringtrue::poles::Pole;
use ringtrue::reference::Reference;
use ringtrue::settings::{MethodName, Restart, Start};

const LC: &str = "name: lc\nelements:\n  - { kind: inductor, name: l1, nodes: [top, gnd], value: 1u }\n  - { kind: capacitor, name: c1, nodes: [top, gnd], value: 1n, initial_voltage: 1 }\nrun: { stop: STOP, start: initial_conditions }\nwatch: [top]\nreference: { closed_form: lc_release, inductor: l1, capacitor: c1 }\n";

fn lc_run(
    method: MethodName,
    points_per_period: f64,
    periods: f64,
) -> (Vec<f64>, Vec<f64>, Vec<f64>, f64, Pole) {
    let w = 1.0 / (1e-6f64 * 1e-9).sqrt();
    let period = 2.0 * std::f64::consts::PI / w;
    let c = circuit(&LC.replace("STOP", &format!("{:e}", periods * period)));
    let h = period / points_per_period;
    let r = run(&c, method, |s| {
        s.steps.fixed_step = Some(h);
        s.steps.restart = Restart::Same;
        s.start = Start::InitialConditions;
    });
    let mut s = ringtrue::settings::Settings::new(method);
    s.start = Start::InitialConditions;
    let reference = Reference::build(&c, &s).unwrap();
    let t = r.trajectory.times.clone();
    let refv = reference.evaluate(&t).remove(0);
    (
        t,
        r.trajectory.values[0].clone(),
        refv,
        h,
        Pole { re: 0.0, im: w },
    )
}

#[test]
fn measured_loss_per_period_matches_the_stability_function() {
    for m in [
        MethodName::BackwardEuler,
        MethodName::Bdf2,
        MethodName::TrBdf2,
    ] {
        for ppp in [10.0, 20.0, 50.0, 100.0] {
            let (t, v, r, h, pole) = lc_run(m, ppp, 40.0);
            let period = 2.0 * std::f64::consts::PI / pole.im;
            let d = detect::measure_decay(&t, &v, &r, period, 1.0).expect("decay measured");
            let theory = detect::theoretical_loss_per_period(m, pole, h);
            let rel = (d.loss_per_period - theory).abs() / theory;
            eprintln!(
                "{} {ppp} points/period: measured {:.4e} theory {theory:.4e}",
                m.as_str(),
                d.loss_per_period
            );
            assert!(
                rel <= 0.05,
                "{} at {ppp} points per period: measured loss {:.4e}, theory {theory:.4e} ({:.1}% apart)",
                m.as_str(),
                d.loss_per_period,
                100.0 * rel
            );
        }
    }
}

#[test]
fn trapezoidal_shows_no_damping_and_the_others_are_flagged() {
    let poles = [
        Pole {
            re: 0.0,
            im: 1.0 / (1e-6f64 * 1e-9).sqrt(),
        },
        Pole {
            re: 0.0,
            im: -1.0 / (1e-6f64 * 1e-9).sqrt(),
        },
    ];
    for ppp in [10.0, 20.0, 50.0, 100.0] {
        let (t, v, r, _, _) = lc_run(MethodName::Trapezoidal, ppp, 40.0);
        let f = detect::artificial_damping(
            "top",
            &t,
            &v,
            &r,
            1.0,
            1e-3,
            &poles,
            MethodName::Trapezoidal,
        );
        assert!(
            f.is_empty(),
            "trapezoidal flagged at {ppp} points per period: {f:?}"
        );
        for m in [MethodName::BackwardEuler, MethodName::Bdf2] {
            let (t, v, r, _, _) = lc_run(m, ppp, 40.0);
            let f = detect::artificial_damping("top", &t, &v, &r, 1.0, 1e-3, &poles, m);
            assert!(
                f.iter().any(|x| x.kind == FlagKind::ArtificialDamping),
                "{} not flagged at {ppp}",
                m.as_str()
            );
        }
    }
}
