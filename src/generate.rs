//! Benchmark circuits written as circuit-file text, so that large uniform networks (RC ladders, RC
//! meshes, LC lines) need no hand-written files: each generator checks its arguments, builds the
//! element list and works out the run's stop time from the network itself.
//!
//! The stop time of the RC networks is five times their slowest time constant, computed for the network
//! as generated, with the source replaced by a short:
//!
//! - ladder: the conductance matrix is (1/R) T with T tridiagonal (2 on the diagonal, 1 in the last
//!   row's, -1 beside it); its eigenvalues have the closed form 4 sin^2((2j - 1) pi / (4N + 2)),
//!   j = 1..N (Dirichlet at the source end, open far end; from memory, and checked in the tests against
//!   a dense symmetric eigensolver and against the circuit's poles);
//! - mesh: the conductance matrix is (1/R) (L + e e^T), L the Laplacian of the K x K grid and e the
//!   driven corner. L's eigenvectors are products of cosines (the Neumann second difference on each
//!   axis), so the smallest eigenvalue of the rank-one update is the root of a secular equation with
//!   K^2 terms, found by safeguarded Newton iteration: O(K^2) work per evaluation and no matrix at all,
//!   which stays cheap at 10^6 nodes.
//!
//! Pure functions: nothing here prints or touches files.

use crate::units::shortest;
use std::f64::consts::PI;
use std::fmt::Write as _;
use thiserror::Error;

/// Most stages of a ladder (and sections of a line): 10^6 stages already give 2 * 10^6 element lines.
pub const MAX_STAGES: usize = 1_000_000;
/// Largest mesh side: 1000 x 1000 is 10^6 nodes and about 3 * 10^6 elements.
pub const MAX_MESH_SIZE: usize = 1000;

/// The step amplitude of every generated source (V).
pub const STEP_VOLTS: f64 = 1.0;

/// Rise of the line's source edge in section delays sqrt(L C). A ramp of duration t_r carries, relative
/// to an ideal step, at most 2 / (omega t_r) of its amplitude at frequency omega; at the lumped line's
/// cutoff 2 / sqrt(L C) that is sqrt(L C) / t_r = 0.1 (ten sections per rise: common practice).
pub const LINE_RISE_SECTIONS: f64 = 10.0;

/// A network to generate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Network {
    /// `stages` x (series resistance, capacitance to ground), driven at node `in`.
    Ladder {
        stages: usize,
        resistance: f64,
        capacitance: f64,
    },
    /// A `size` x `size` grid: resistance between horizontal and vertical neighbours, capacitance
    /// from every node to ground, one corner driven through one resistance.
    Mesh {
        size: usize,
        resistance: f64,
        capacitance: f64,
    },
    /// `sections` x (series inductance, shunt capacitance), driven and terminated in sqrt(L / C).
    Line {
        sections: usize,
        inductance: f64,
        capacitance: f64,
    },
}

/// Why a network cannot be generated; each message states the valid range.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum GenerateError {
    #[error("{what} {got} is out of range: give a whole number from {min} to {max}")]
    Count {
        what: &'static str,
        got: usize,
        min: usize,
        max: usize,
    },
    #[error("{what} {} is not usable: give a positive, finite value, e.g. {example}", shortest(*.got))]
    Value {
        what: &'static str,
        got: f64,
        example: &'static str,
    },
    #[error("{what} from these values, {} s, is not a usable time: choose values that give times between 1e-300 s and 1e300 s", shortest(*.got))]
    Time { what: &'static str, got: f64 },
}

/// A generated circuit file and what was computed for it.
#[derive(Debug, Clone, PartialEq)]
pub struct Generated {
    /// The circuit file text (YAML).
    pub text: String,
    /// The circuit's `name:`.
    pub name: String,
    /// Nodes besides ground.
    pub nodes: usize,
    pub elements: usize,
    /// The watched node.
    pub watched: String,
    /// The run's stop time (s).
    pub stop: f64,
    /// The slowest time constant with the source shorted (s); the RC networks only.
    pub slowest_time_constant: Option<f64>,
    /// The line's one-way delay N sqrt(L C) (s); the line only.
    pub delay: Option<f64>,
}

fn check_count(
    what: &'static str,
    got: usize,
    min: usize,
    max: usize,
) -> Result<(), GenerateError> {
    if (min..=max).contains(&got) {
        Ok(())
    } else {
        Err(GenerateError::Count {
            what,
            got,
            min,
            max,
        })
    }
}

fn check_value(what: &'static str, got: f64, example: &'static str) -> Result<(), GenerateError> {
    if got.is_finite() && got >= f64::MIN_POSITIVE {
        Ok(())
    } else {
        Err(GenerateError::Value { what, got, example })
    }
}

fn check_time(what: &'static str, got: f64) -> Result<(), GenerateError> {
    if got.is_finite() && (1e-300..=1e300).contains(&got) {
        Ok(())
    } else {
        Err(GenerateError::Time { what, got })
    }
}

/// The `j`-th smallest eigenvalue (1-based) of the ladder's T (see the module comment):
/// 4 sin^2((2j - 1) pi / (4N + 2)).
pub fn ladder_eigenvalue(stages: usize, j: usize) -> f64 {
    let s = ((2 * j - 1) as f64 * PI / (4.0 * stages as f64 + 2.0)).sin();
    4.0 * s * s
}

/// Every eigenvalue of the ladder's T, ascending.
pub fn ladder_eigenvalues(stages: usize) -> Vec<f64> {
    (1..=stages).map(|j| ladder_eigenvalue(stages, j)).collect()
}

/// The slowest time constant of an N-stage ladder with the source shorted: R C / lambda_min(T).
pub fn ladder_slowest_time_constant(stages: usize, resistance: f64, capacitance: f64) -> f64 {
    resistance * capacitance / ladder_eigenvalue(stages, 1)
}

/// The smallest eigenvalue of L + e e^T, L the Laplacian of the `size` x `size` grid graph and e the
/// unit vector of one corner (`size` >= 2).
///
/// The Neumann second difference on K points has eigenvalues a_j = 4 sin^2(pi j / (2K)) and
/// eigenvectors cos(pi j (m + 1/2) / K), m = 0..K-1 (the DCT-II basis; from memory, checked in the
/// tests against a dense eigensolver), whose squared normalized value at the end m = 0 is c_0 = 1/K and
/// c_j = (2/K) cos^2(pi j / (2K)). The grid's eigenpairs are the products, so an eigenvalue lambda of
/// L + e e^T that is not one of L's solves f(lambda) = 1 + sum_{j,l} c_j c_l / (a_j + a_l - lambda) = 0.
/// Every weight c_j c_l is positive, f rises from -inf at 0 to +inf at a_1 (the smallest nonzero
/// a_j + a_l), and by interlacing the smallest eigenvalue is that one root.
pub fn mesh_smallest_eigenvalue(size: usize) -> f64 {
    let k = size.max(2);
    let kf = k as f64;
    let a: Vec<f64> = (0..k)
        .map(|j| {
            let s = (PI * j as f64 / (2.0 * kf)).sin();
            4.0 * s * s
        })
        .collect();
    let c: Vec<f64> = (0..k)
        .map(|j| {
            if j == 0 {
                1.0 / kf
            } else {
                let co = (PI * j as f64 / (2.0 * kf)).cos();
                2.0 / kf * co * co
            }
        })
        .collect();
    // f and f' at lambda, the (0, 0) term kept apart: f = 1 - w00 / lambda + rest.
    let w00 = c[0] * c[0];
    let eval = |lam: f64| -> (f64, f64) {
        let (mut f, mut df) = (1.0 - w00 / lam, w00 / (lam * lam));
        for (j, (&aj, &cj)) in a.iter().zip(&c).enumerate() {
            let start = usize::from(j == 0);
            for (&al, &cl) in a[start..].iter().zip(&c[start..]) {
                let d = aj + al - lam;
                let w = cj * cl;
                f += w / d;
                df += w / (d * d);
            }
        }
        (f, df)
    };
    // Bracket (lo, hi) with f(lo) < 0 < f(hi). f(lam) > 1 - w00/lam, so the root exceeds w00/(1+...)
    // > 0; start from the whole interval and let Newton (from the left, where f is concave in the
    // pole's neighbourhood) do the work, falling back to bisection when a step leaves the bracket.
    let (mut lo, mut hi) = (0.0, a[1]);
    let mut lam = w00.min(0.5 * a[1]);
    for _ in 0..200 {
        let (f, df) = eval(lam);
        if f == 0.0 {
            return lam;
        }
        if f < 0.0 {
            lo = lam;
        } else {
            hi = lam;
        }
        let newton = lam - f / df;
        let next = if newton > lo && newton < hi {
            newton
        } else {
            0.5 * (lo + hi)
        };
        if (next - lam).abs() <= 4.0 * f64::EPSILON * lam || hi - lo <= 4.0 * f64::EPSILON * hi {
            return next;
        }
        lam = next;
    }
    lam
}

/// The slowest time constant of the `size` x `size` mesh with the source shorted:
/// R C / lambda_min(L + e e^T).
pub fn mesh_slowest_time_constant(size: usize, resistance: f64, capacitance: f64) -> f64 {
    resistance * capacitance / mesh_smallest_eigenvalue(size)
}

/// The step source every generator starts with: 0 to 1 V at t = 0. Waveforms are left-continuous, so
/// the value at t = 0 is 0 (the operating point is all zero) and the jump happens just after.
fn step_source(out: &mut String, rise: f64) {
    let _ = writeln!(
        out,
        "  - {{ kind: voltage_source, name: vin, nodes: [in, gnd], waveform: {{ step: {{ from: 0, to: {}, at: 0, rise: {} }} }} }}",
        shortest(STEP_VOLTS),
        shortest(rise)
    );
}

fn element(out: &mut String, kind: &str, name: &str, a: &str, b: &str, value: f64) {
    let _ = writeln!(
        out,
        "  - {{ kind: {kind}, name: {name}, nodes: [{a}, {b}], value: {} }}",
        shortest(value)
    );
}

fn tail(out: &mut String, stop: f64, watched: &str) {
    let _ = writeln!(out, "run:\n  stop: {}\nwatch: [{watched}]", shortest(stop));
}

/// Generates the circuit file for `network`.
pub fn generate(network: &Network) -> Result<Generated, GenerateError> {
    match *network {
        Network::Ladder {
            stages,
            resistance,
            capacitance,
        } => ladder(stages, resistance, capacitance),
        Network::Mesh {
            size,
            resistance,
            capacitance,
        } => mesh(size, resistance, capacitance),
        Network::Line {
            sections,
            inductance,
            capacitance,
        } => line(sections, inductance, capacitance),
    }
}

fn ladder(n: usize, r: f64, c: f64) -> Result<Generated, GenerateError> {
    check_count("stages", n, 1, MAX_STAGES)?;
    check_value("resistance", r, "1k")?;
    check_value("capacitance", c, "1p")?;
    let tau = ladder_slowest_time_constant(n, r, c);
    check_time("the slowest time constant", tau)?;
    let stop = 5.0 * tau;
    check_time("the stop time", stop)?;
    let name = format!("rc-ladder-{n}");
    let watched = format!("n{n}");
    let mut t = String::with_capacity(64 * (2 * n + 16));
    let _ = writeln!(
        t,
        "# RC ladder: {n} stages of {} ohm in series and {} F to ground, driven at node `in` by a",
        shortest(r),
        shortest(c)
    );
    let _ = writeln!(
        t,
        "# 1 V step at t = 0 (rise 0); the far end {watched} is watched."
    );
    let _ = writeln!(
        t,
        "# slowest time constant (source shorted): {} s = R C / (4 sin^2(pi / (4 N + 2)))",
        shortest(tau)
    );
    let _ = writeln!(t, "# stop: five slowest time constants.");
    let _ = writeln!(t, "name: {name}");
    let _ = writeln!(
        t,
        "title: \"RC ladder, {n} stages of {} ohm and {} F, 1 V step at t = 0\"",
        shortest(r),
        shortest(c)
    );
    let _ = writeln!(t, "elements:");
    step_source(&mut t, 0.0);
    for k in 1..=n {
        let prev = if k == 1 {
            "in".to_string()
        } else {
            format!("n{}", k - 1)
        };
        element(
            &mut t,
            "resistor",
            &format!("r{k}"),
            &prev,
            &format!("n{k}"),
            r,
        );
        element(
            &mut t,
            "capacitor",
            &format!("c{k}"),
            &format!("n{k}"),
            "gnd",
            c,
        );
    }
    tail(&mut t, stop, &watched);
    Ok(Generated {
        text: t,
        name,
        nodes: n + 1,
        elements: 2 * n + 1,
        watched,
        stop,
        slowest_time_constant: Some(tau),
        delay: None,
    })
}

/// The node at row `i`, column `j` (1-based) of a mesh.
pub fn mesh_node(i: usize, j: usize) -> String {
    format!("n{i}_{j}")
}

fn mesh(k: usize, r: f64, c: f64) -> Result<Generated, GenerateError> {
    check_count("the mesh size", k, 2, MAX_MESH_SIZE)?;
    check_value("resistance", r, "1k")?;
    check_value("capacitance", c, "1p")?;
    let tau = mesh_slowest_time_constant(k, r, c);
    check_time("the slowest time constant", tau)?;
    let stop = 5.0 * tau;
    check_time("the stop time", stop)?;
    let name = format!("rc-mesh-{k}");
    let watched = mesh_node(k, k);
    let elements = 2 + 2 * k * (k - 1) + k * k;
    let mut t = String::with_capacity(64 * (elements + 16));
    let _ = writeln!(
        t,
        "# RC mesh: {k} x {k} nodes n<row>_<column>, {} ohm between horizontal and vertical",
        shortest(r)
    );
    let _ = writeln!(
        t,
        "# neighbours and {} F from every node to ground; node n1_1 is driven through {} ohm (rdrv)",
        shortest(c),
        shortest(r)
    );
    let _ = writeln!(
        t,
        "# from a 1 V step at t = 0 (rise 0) at node `in`; the opposite corner {watched} is watched."
    );
    let _ = writeln!(
        t,
        "# slowest time constant (source shorted): {} s = R C / lambda_min(grid Laplacian + corner)",
        shortest(tau)
    );
    let _ = writeln!(t, "# stop: five slowest time constants.");
    let _ = writeln!(t, "name: {name}");
    let _ = writeln!(
        t,
        "title: \"RC mesh, {k} x {k} nodes, {} ohm and {} F, driven at a corner by a 1 V step at t = 0\"",
        shortest(r),
        shortest(c)
    );
    let _ = writeln!(t, "elements:");
    step_source(&mut t, 0.0);
    element(&mut t, "resistor", "rdrv", "in", &mesh_node(1, 1), r);
    for i in 1..=k {
        for j in 1..=k {
            let here = mesh_node(i, j);
            if j < k {
                let name = format!("rh{i}_{j}");
                element(&mut t, "resistor", &name, &here, &mesh_node(i, j + 1), r);
            }
            if i < k {
                let name = format!("rv{i}_{j}");
                element(&mut t, "resistor", &name, &here, &mesh_node(i + 1, j), r);
            }
            element(&mut t, "capacitor", &format!("c{i}_{j}"), &here, "gnd", c);
        }
    }
    tail(&mut t, stop, &watched);
    Ok(Generated {
        text: t,
        name,
        nodes: k * k + 1,
        elements,
        watched,
        stop,
        slowest_time_constant: Some(tau),
        delay: None,
    })
}

fn line(n: usize, l: f64, c: f64) -> Result<Generated, GenerateError> {
    check_count("sections", n, 1, MAX_STAGES)?;
    check_value("inductance", l, "2.5n")?;
    check_value("capacitance", c, "1p")?;
    let z0 = (l / c).sqrt();
    check_value("the characteristic resistance sqrt(L / C)", z0, "50")?;
    let section = (l * c).sqrt();
    check_time("the section delay sqrt(L C)", section)?;
    let delay = n as f64 * section;
    let rise = LINE_RISE_SECTIONS * section;
    let stop = rise + 3.0 * delay;
    check_time("the stop time", stop)?;
    let name = format!("lc-line-{n}");
    let watched = format!("n{n}");
    let mut t = String::with_capacity(64 * (2 * n + 16));
    let _ = writeln!(
        t,
        "# LC line model: {n} sections of {} H in series and {} F to ground, driven from node `in`",
        shortest(l),
        shortest(c)
    );
    let _ = writeln!(
        t,
        "# through rsrc = sqrt(L / C) = {} ohm and terminated in rload of the same resistance; the far",
        shortest(z0)
    );
    let _ = writeln!(t, "# end {watched} is watched (it settles at 0.5 V).");
    let _ = writeln!(
        t,
        "# one-way delay N sqrt(L C): {} s; section delay {} s; cutoff 2 / sqrt(L C) = {} rad/s",
        shortest(delay),
        shortest(section),
        shortest(2.0 / section)
    );
    let _ = writeln!(
        t,
        "# source: 1 V step at t = 0 rising over {} s = {} section delays, so the edge's content at the",
        shortest(rise),
        shortest(LINE_RISE_SECTIONS)
    );
    let _ = writeln!(
        t,
        "# cutoff is at most a tenth of an ideal step's and the waveform is the line's delayed edge rather"
    );
    let _ = writeln!(
        t,
        "# than ringing at the cutoff of the lumped model; stop: the rise plus three one-way delays."
    );
    let _ = writeln!(t, "name: {name}");
    let _ = writeln!(
        t,
        "title: \"LC line model, {n} sections of {} H and {} F, matched at both ends\"",
        shortest(l),
        shortest(c)
    );
    let _ = writeln!(t, "elements:");
    step_source(&mut t, rise);
    element(&mut t, "resistor", "rsrc", "in", "n0", z0);
    for k in 1..=n {
        let (a, b) = (format!("n{}", k - 1), format!("n{k}"));
        element(&mut t, "inductor", &format!("l{k}"), &a, &b, l);
        element(&mut t, "capacitor", &format!("c{k}"), &b, "gnd", c);
    }
    element(&mut t, "resistor", "rload", &watched, "gnd", z0);
    tail(&mut t, stop, &watched);
    Ok(Generated {
        text: t,
        name,
        nodes: n + 2,
        elements: 2 * n + 3,
        watched,
        stop,
        slowest_time_constant: None,
        delay: Some(delay),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_stage_ladder_is_one_rc() {
        // A single R and C: tau = R C (Nilsson & Riedel, the natural response of an RC circuit).
        assert!((ladder_slowest_time_constant(1, 1e3, 1e-12) / 1e-9 - 1.0).abs() < 1e-15);
    }

    #[test]
    fn mesh_root_of_two_by_two() {
        // 2 x 2 grid plus a grounded corner: the eigenvalues of [[3,-1,-1,0],[-1,2,0,-1],[-1,0,2,-1],
        // [0,-1,-1,2]]; the antisymmetric vector (0,1,-1,0) gives 2, the symmetric part is the 3 x 3
        // matrix [[3,-sqrt2,0],[-sqrt2,2,-sqrt2],[0,-sqrt2,2]] with characteristic polynomial
        // -(l^3 - 7 l^2 + 12 l - 2) (expanded by hand), whose smallest root is below.
        let l = mesh_smallest_eigenvalue(2);
        let p = l * l * l - 7.0 * l * l + 12.0 * l - 2.0;
        assert!(p.abs() < 1e-14, "p({l}) = {p}");
        assert!(l > 0.0 && l < 0.5);
    }
}
