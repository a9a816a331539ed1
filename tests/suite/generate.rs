//! `ringtrue generate`: the files it writes are valid circuits with the right counts, and the slowest
//! time constant it computes (and the stop time built on it) agrees to 1e-9 relative with independent
//! computations: nalgebra's dense symmetric eigensolver on the conductance matrix assembled here from
//! the network's definition, and the circuit's own poles (`ringtrue::poles`, through the parser, MNA
//! assembly and the index-1 reduction) on the generated file. Bad arguments exit 2 without a panic.

use crate::common::{circuit, ringtrue, scratch};
use nalgebra::{DMatrix, SymmetricEigen};
use ringtrue::generate::{
    generate, ladder_eigenvalues, ladder_slowest_time_constant, mesh_smallest_eigenvalue, Network,
};
use ringtrue::settings::{MethodName, Settings};

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

/// The smallest eigenvalue of a symmetric matrix by nalgebra's dense solver.
fn dense_min(m: DMatrix<f64>) -> f64 {
    SymmetricEigen::new(m)
        .eigenvalues
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min)
}

/// R G of an N-stage ladder with the source shorted: node k (1..N) joins k - 1 (ground for k = 1).
fn ladder_matrix(n: usize) -> DMatrix<f64> {
    let mut m = DMatrix::zeros(n, n);
    for k in 0..n {
        // the resistor from the previous node (or the shorted source) to node k
        m[(k, k)] += 1.0;
        if k > 0 {
            m[(k - 1, k - 1)] += 1.0;
            m[(k, k - 1)] -= 1.0;
            m[(k - 1, k)] -= 1.0;
        }
    }
    m
}

/// R G of a K x K mesh with the source shorted: a resistor between grid neighbours, one from the
/// corner (0, 0) to ground.
fn mesh_matrix(k: usize) -> DMatrix<f64> {
    let n = k * k;
    let idx = |i: usize, j: usize| i * k + j;
    let mut m = DMatrix::zeros(n, n);
    let mut join = |a: usize, b: usize| {
        m[(a, a)] += 1.0;
        m[(b, b)] += 1.0;
        m[(a, b)] -= 1.0;
        m[(b, a)] -= 1.0;
    };
    for i in 0..k {
        for j in 0..k {
            if j + 1 < k {
                join(idx(i, j), idx(i, j + 1));
            }
            if i + 1 < k {
                join(idx(i, j), idx(i + 1, j));
            }
        }
    }
    m[(0, 0)] += 1.0;
    m
}

/// The slowest time constant the file states in its header comment.
fn stated_time_constant(text: &str) -> f64 {
    let line = text
        .lines()
        .find(|l| l.starts_with("# slowest time constant (source shorted): "))
        .expect("the header states the slowest time constant");
    line.trim_start_matches("# slowest time constant (source shorted): ")
        .split(' ')
        .next()
        .and_then(|x| x.parse().ok())
        .expect("a number")
}

/// The largest time constant among the circuit's poles.
fn slowest_pole_time_constant(text: &str) -> f64 {
    let c = circuit(text);
    let mut s = Settings::new(MethodName::TrBdf2);
    s.apply(&c.run.settings);
    ringtrue::poles::poles(&c, &s)
        .expect("poles")
        .iter()
        .filter_map(|p| p.time_constant())
        .fold(0.0, f64::max)
}

/// Runs `ringtrue generate ARGS`, then `ringtrue check` on the file it wrote; returns the text and the
/// check's standard output.
fn generate_and_check(name: &str, args: &[&str]) -> (String, String) {
    let dir = scratch(&format!("generate-{name}"));
    let file = dir.join(format!("{name}.yaml"));
    let file_s = file.to_str().unwrap();
    let mut full = vec!["generate"];
    full.extend_from_slice(args);
    let stdout = ringtrue(&full);
    assert_eq!(stdout.code, 0, "{}", stdout.stderr);
    full.extend_from_slice(&["--out", file_s]);
    let out = ringtrue(&full);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let text = std::fs::read_to_string(&file).unwrap();
    assert_eq!(
        text, stdout.stdout,
        "--out writes what standard output shows"
    );
    let check = ringtrue(&["check", file_s]);
    assert_eq!(
        check.code, 0,
        "check failed:\n{}\n{}",
        check.stdout, check.stderr
    );
    (text, check.stdout)
}

/// The number before " (" on the check summary's line for `key`.
fn summary_count(check: &str, key: &str) -> usize {
    let line = check
        .lines()
        .find(|l| l.trim_start().starts_with(key))
        .unwrap_or_else(|| panic!("no {key} line in\n{check}"));
    line.trim_start()[key.len()..]
        .split_whitespace()
        .next()
        .and_then(|x| x.parse().ok())
        .unwrap_or_else(|| panic!("no count on {line}"))
}

fn count_kind(text: &str, kind: &str) -> usize {
    circuit(text)
        .elements
        .iter()
        .filter(|e| e.kind.kind_name() == kind)
        .count()
}

#[test]
fn ladder_eigenvalue_closed_form_matches_dense_eigensolver() {
    // Every eigenvalue, N = 1..40 and 200, against nalgebra's symmetric eigensolver.
    for n in (1..=40).chain([200]) {
        let mut dense: Vec<f64> = SymmetricEigen::new(ladder_matrix(n))
            .eigenvalues
            .iter()
            .copied()
            .collect();
        dense.sort_by(f64::total_cmp);
        let closed = ladder_eigenvalues(n);
        assert_eq!(closed.len(), n);
        for (j, (a, b)) in closed.iter().zip(&dense).enumerate() {
            // the smallest one sets the time constant: 1e-9 relative; the rest to 1e-12 of the largest
            let tol = if j == 0 { 1e-9 * b } else { 1e-12 * 4.0 };
            assert!((a - b).abs() <= tol, "N = {n}, j = {j}: {a} vs {b}");
        }
    }
}

#[test]
fn mesh_eigenvalue_matches_dense_eigensolver() {
    let mut worst = 0.0f64;
    for k in (2..=10).chain([16, 24]) {
        let secular = mesh_smallest_eigenvalue(k);
        let dense = dense_min(mesh_matrix(k));
        let e = rel(secular, dense);
        worst = worst.max(e);
        assert!(e < 1e-9, "K = {k}: secular {secular} vs dense {dense}");
    }
    println!("mesh smallest eigenvalue, K = 2..10, 16, 24: worst relative difference {worst:.1e}");
}

#[test]
fn ladder_file_counts_time_constant_and_stop() {
    let (text, check) = generate_and_check(
        "ladder",
        &[
            "ladder",
            "--stages",
            "12",
            "--resistance",
            "2k",
            "--capacitance",
            "0.5p",
        ],
    );
    assert_eq!(summary_count(&check, "nodes:"), 13); // in, n1..n12
    assert_eq!(summary_count(&check, "elements:"), 25);
    assert_eq!(count_kind(&text, "resistor"), 12);
    assert_eq!(count_kind(&text, "capacitor"), 12);
    assert_eq!(count_kind(&text, "voltage_source"), 1);
    let c = circuit(&text);
    assert_eq!(c.watch.len(), 1);
    assert_eq!(c.watch[0].label(), "n12");
    let tau = stated_time_constant(&text);
    let dense = 2e3 * 0.5e-12 / dense_min(ladder_matrix(12));
    let from_poles = slowest_pole_time_constant(&text);
    println!("ladder 12: stated {tau:e}, dense {dense:e}, poles {from_poles:e}");
    assert!(rel(tau, dense) < 1e-9, "{tau} vs dense {dense}");
    assert!(rel(tau, from_poles) < 1e-9, "{tau} vs poles {from_poles}");
    assert!(rel(c.run.stop, 5.0 * dense) < 1e-9);
    assert_eq!(tau, ladder_slowest_time_constant(12, 2e3, 0.5e-12));
    // the source: 0 to 1 V at t = 0 with no rise, so the run starts from zero
    assert!(text.contains("step: { from: 0, to: 1, at: 0, rise: 0 }"));
}

#[test]
fn mesh_file_counts_time_constant_and_stop() {
    let k = 5;
    let (text, check) = generate_and_check("mesh", &["mesh", "--size", "5"]);
    assert_eq!(summary_count(&check, "nodes:"), k * k + 1);
    // source, drive resistor, 2 K (K - 1) neighbour resistors, K^2 capacitors
    assert_eq!(
        summary_count(&check, "elements:"),
        2 + 2 * k * (k - 1) + k * k
    );
    assert_eq!(count_kind(&text, "resistor"), 1 + 2 * k * (k - 1));
    assert_eq!(count_kind(&text, "capacitor"), k * k);
    let c = circuit(&text);
    assert_eq!(c.watch[0].label(), "n5_5");
    let tau = stated_time_constant(&text);
    let dense = 1e3 * 1e-12 / dense_min(mesh_matrix(k));
    let from_poles = slowest_pole_time_constant(&text);
    println!("mesh 5: stated {tau:e}, dense {dense:e}, poles {from_poles:e}");
    assert!(rel(tau, dense) < 1e-9, "{tau} vs dense {dense}");
    assert!(rel(tau, from_poles) < 1e-9, "{tau} vs poles {from_poles}");
    assert!(rel(c.run.stop, 5.0 * dense) < 1e-9);
}

#[test]
fn line_file_counts_terminations_and_stop() {
    let (text, check) = generate_and_check(
        "line",
        &[
            "line",
            "--sections",
            "8",
            "--inductance",
            "4n",
            "--capacitance",
            "1.6p",
        ],
    );
    assert_eq!(summary_count(&check, "nodes:"), 10); // in, n0..n8
    assert_eq!(summary_count(&check, "elements:"), 19);
    assert_eq!(count_kind(&text, "inductor"), 8);
    assert_eq!(count_kind(&text, "capacitor"), 8);
    assert_eq!(count_kind(&text, "resistor"), 2);
    let c = circuit(&text);
    assert_eq!(c.watch[0].label(), "n8");
    // sqrt(4n / 1.6p) = 50 ohm at both ends; section delay sqrt(4n * 1.6p) = 80 ps
    for e in c
        .elements
        .iter()
        .filter(|e| e.kind.kind_name() == "resistor")
    {
        let ringtrue::circuit::ElementKind::Resistor {
            resistance: value, ..
        } = e.kind
        else {
            unreachable!()
        };
        assert!(rel(value, 50.0) < 1e-12, "{}: {value}", e.name);
    }
    let section = 80e-12;
    assert!(rel(c.run.stop, 10.0 * section + 3.0 * 8.0 * section) < 1e-12);
    let g = generate(&Network::Line {
        sections: 8,
        inductance: 4e-9,
        capacitance: 1.6e-12,
    })
    .unwrap();
    assert!(rel(g.delay.unwrap(), 8.0 * section) < 1e-12);
}

#[test]
fn large_mesh_is_generated_and_parses() {
    // 100 x 100: 10^4 nodes, about 3 * 10^4 elements; the file must parse (the check's element
    // lookup once read the text once per element).
    let g = generate(&Network::Mesh {
        size: 100,
        resistance: 1e3,
        capacitance: 1e-12,
    })
    .unwrap();
    let c = circuit(&g.text);
    assert_eq!(c.elements.len(), g.elements);
    assert_eq!(c.nodes().len(), g.nodes);
}

#[test]
fn bad_arguments_exit_2_with_the_valid_range() {
    let cases: &[(&[&str], &str)] = &[
        (&["ladder", "--stages", "0"], "from 1 to 1000000"),
        (&["ladder", "--stages", "1000001"], "from 1 to 1000000"),
        (&["ladder", "--stages", "-3"], "--stages"),
        (
            &["ladder", "--stages", "3", "--resistance", "-1k"],
            "positive",
        ),
        (
            &["ladder", "--stages", "3", "--resistance", "0"],
            "positive",
        ),
        (
            &["ladder", "--stages", "3", "--capacitance", "1nH"],
            "capacitance (F)",
        ),
        (
            &["ladder", "--stages", "3", "--capacitance", "abc"],
            "does not start with a number",
        ),
        (
            &[
                "ladder",
                "--stages",
                "3",
                "--resistance",
                "1e300",
                "--capacitance",
                "1e300",
            ],
            "between 1e-300 s and 1e300 s",
        ),
        (&["mesh", "--size", "1"], "from 2 to 1000"),
        (&["mesh", "--size", "1001"], "from 2 to 1000"),
        (&["mesh", "--size", "3", "--capacitance", "-1p"], "positive"),
        (&["line", "--sections", "0"], "from 1 to 1000000"),
        (
            &["line", "--sections", "4", "--inductance", "0"],
            "positive",
        ),
        (
            &[
                "line",
                "--sections",
                "4",
                "--inductance",
                "1e-200",
                "--capacitance",
                "1e200",
            ],
            "sqrt(L / C)",
        ),
        (&["ladder"], "--stages"),
        (&["ring", "--stages", "3"], "unrecognized subcommand"),
    ];
    for (args, needle) in cases {
        let mut full = vec!["generate"];
        full.extend_from_slice(args);
        let out = ringtrue(&full);
        assert_eq!(out.code, 2, "{full:?}: {}", out.stderr);
        assert!(!out.stderr.contains("panicked"), "{full:?}: {}", out.stderr);
        assert!(
            out.stderr.contains(needle),
            "{full:?}: '{needle}' not in {}",
            out.stderr
        );
        assert!(out.stdout.is_empty(), "{full:?} wrote {}", out.stdout);
    }
}
