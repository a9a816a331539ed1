//! Every shipped circuit passes `check` and its reference evaluates; the exact reference agrees with
//! every shipped closed form (textbook formulas, Nilsson & Riedel, *Electric Circuits*, ch. 7-9) to
//! 1e-10 of each signal's peak.

use crate::common::{ringtrue, scratch};
use ringtrue::circuit::{self, ReferenceSpec};
use ringtrue::reference::Reference;
use ringtrue::settings::{MethodName, Settings};
use std::path::PathBuf;

fn shipped() -> Vec<PathBuf> {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("reference_circuits");
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "yaml"))
        .collect();
    v.sort();
    v
}

#[test]
fn at_least_twelve_circuits_each_checks_and_has_a_reference() {
    let files = shipped();
    assert!(files.len() >= 12, "only {} shipped circuits", files.len());
    let dir = scratch("shipped");
    for f in &files {
        let p = f.to_str().unwrap();
        let out = ringtrue(&["check", p]);
        assert_eq!(out.code, 0, "check {p}: {}", out.stderr);
        let text = std::fs::read_to_string(f).unwrap();
        assert!(
            text.starts_with('#'),
            "{p} must open with a comment saying what it exercises"
        );
        let csv = dir.join("r.csv");
        let out = ringtrue(&[
            "reference",
            p,
            "--points",
            "51",
            "--csv",
            csv.to_str().unwrap(),
        ]);
        assert_eq!(out.code, 0, "reference {p}: {}", out.stderr);
        let rows = std::fs::read_to_string(&csv).unwrap().lines().count();
        assert_eq!(rows, 52, "{p}: header and 51 rows");
    }
}

#[test]
fn exact_agrees_with_every_shipped_closed_form() {
    let mut checked = 0;
    for f in shipped() {
        let (c, _) = circuit::load(&f).unwrap();
        if !matches!(c.reference, ReferenceSpec::ClosedForm { .. }) {
            continue;
        }
        let mut s = Settings::new(MethodName::TrBdf2);
        s.apply(&c.run.settings);
        let cf = Reference::build(&c, &s).unwrap();
        let mut ce = c.clone();
        ce.reference = ReferenceSpec::Exact;
        let ex = Reference::build(&ce, &s).unwrap();
        let times = Reference::uniform_times(c.run.stop, 2001);
        let (a, b) = (cf.evaluate(&times), ex.evaluate(&times));
        for (k, label) in cf.labels.iter().enumerate() {
            let peak = a[k].iter().fold(0.0f64, |m, v| m.max(v.abs()));
            let e = a[k]
                .iter()
                .zip(&b[k])
                .fold(0.0f64, |m, (x, y)| m.max((x - y).abs()))
                / peak;
            eprintln!(
                "measured: {}: {label} exact vs closed form {e:.2e}",
                f.display()
            );
            assert!(
                e <= 1e-10,
                "{}: {label}: exact vs closed form differ by {e:e} of the peak",
                f.display()
            );
        }
        checked += 1;
    }
    assert!(checked >= 5, "only {checked} shipped closed-form circuits");
}
