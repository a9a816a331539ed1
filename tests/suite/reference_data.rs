//! The references against independent data made with general-purpose libraries: mpmath's 40-digit
//! matrix exponential for the linear circuits and scipy's Radau at rtol 1e-12, cross-checked by DOP853,
//! for the nonlinear ones. Script, versions and command: tests/reference_data/README.md.

use ringtrue::circuit;
use ringtrue::reference::{Reference, ReferenceKind};
use ringtrue::settings::{MethodName, Settings};
use std::path::PathBuf;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// (times, columns by label) of a committed data file.
fn read_data(name: &str) -> (Vec<f64>, Vec<(String, Vec<f64>)>) {
    let path = root()
        .join("tests/reference_data")
        .join(format!("{name}.csv"));
    let mut rdr = csv::Reader::from_path(&path).expect("data file");
    let labels: Vec<String> = rdr
        .headers()
        .unwrap()
        .iter()
        .skip(1)
        .map(String::from)
        .collect();
    let mut times = Vec::new();
    let mut cols = vec![Vec::new(); labels.len()];
    for rec in rdr.records() {
        let rec = rec.unwrap();
        times.push(rec[0].parse().unwrap());
        for (k, c) in cols.iter_mut().enumerate() {
            c.push(rec[k + 1].parse().unwrap());
        }
    }
    (times, labels.into_iter().zip(cols).collect())
}

/// max |reference - data| / peak |data| over every signal, and the reference itself.
fn compare(name: &str) -> (f64, Reference) {
    let (c, _) = circuit::load(
        &root()
            .join("reference_circuits")
            .join(format!("{name}.yaml")),
    )
    .expect("circuit");
    let mut s = Settings::new(MethodName::TrBdf2);
    s.apply(&c.run.settings);
    let r = Reference::build(&c, &s).expect("reference");
    let (times, data) = read_data(name);
    let got = r.evaluate(&times);
    let mut worst: f64 = 0.0;
    for (label, col) in &data {
        let k = r
            .labels
            .iter()
            .position(|l| l == label)
            .expect("same signals");
        let peak = col.iter().fold(0.0f64, |a, v| a.max(v.abs()));
        let e = got[k]
            .iter()
            .zip(col)
            .fold(0.0f64, |a, (x, y)| a.max((x - y).abs()))
            / peak;
        worst = worst.max(e);
    }
    eprintln!(
        "measured: {name}: max |reference - data| / peak = {worst:.2e}, claimed bound {:.2e}",
        r.error_bound
    );
    (worst, r)
}

#[test]
fn exact_matches_40_digit_data_on_the_stiff_circuit() {
    let (e, r) = compare("stiff-two-rc");
    assert_eq!(r.kind, ReferenceKind::Exact);
    assert!(e <= 1e-10, "max error {e:e} of the peak");
}

#[test]
fn exact_matches_40_digit_data_on_the_20_stage_ladder() {
    let (e, r) = compare("rc-ladder-20");
    assert_eq!(r.kind, ReferenceKind::Exact);
    assert!(e <= 1e-10, "max error {e:e} of the peak");
}

#[test]
fn converged_matches_radau_data_on_the_rectifier_within_its_bound() {
    let (e, r) = compare("usb-rectifier");
    assert_eq!(r.kind, ReferenceKind::Converged);
    assert!(
        r.error_bound <= 1e-7,
        "bound {:e} is looser than 1e-7",
        r.error_bound
    );
    assert!(
        e <= r.error_bound,
        "error {e:e} exceeds the claimed bound {:e}",
        r.error_bound
    );
}

#[test]
fn converged_matches_radau_data_on_the_clamp_within_its_bound() {
    let (e, r) = compare("diode-clamp");
    assert_eq!(r.kind, ReferenceKind::Converged);
    assert!(
        r.error_bound <= 1e-7,
        "bound {:e} is looser than 1e-7",
        r.error_bound
    );
    assert!(
        e <= r.error_bound,
        "error {e:e} exceeds the claimed bound {:e}",
        r.error_bound
    );
}

/// Regression: the converged reference's rungs used a budget of 2e7 steps whatever the file said,
/// while its budget message told the user to raise run.step_budget; a larger budget now counts.
#[test]
fn the_converged_reference_honours_a_larger_step_budget() {
    use ringtrue::reference::converged::{rung_settings, RUNG_STEP_BUDGET};
    let (c, _) = circuit::load(&root().join("reference_circuits/usb-rectifier.yaml")).unwrap();
    let mut base = Settings::new(MethodName::Trapezoidal);
    let rung = rung_settings(&c, &base, 1e-9, (1.0, 1e-3));
    assert_eq!(rung.steps.step_budget, RUNG_STEP_BUDGET);
    base.steps.step_budget = 3 * RUNG_STEP_BUDGET;
    let rung = rung_settings(&c, &base, 1e-9, (1.0, 1e-3));
    assert_eq!(rung.steps.step_budget, 3 * RUNG_STEP_BUDGET);
}
