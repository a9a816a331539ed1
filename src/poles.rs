//! The circuit's natural frequencies: the finite generalized eigenvalues of the pencil C s + G,
//! linearized at the state the run starts from (so diodes count with their small-signal conductance
//! and charge, switches with their conductance at t = 0).
//!
//! The pencil is split by the same index-1 reduction as the exact reference; the infinite eigenvalues a
//! singular C brings are the algebraic part and drop out, and the finite ones are the eigenvalues of
//! the reduced dynamic matrix.

use crate::circuit::Circuit;
use crate::equations::matrix::Matrix;
use crate::equations::System;
use crate::integrate::{self, newton::Newton};
use crate::reference::exact::Reduction;
use crate::reference::ReferenceError;
use crate::settings::Settings;
use nalgebra::DMatrix;
use std::f64::consts::PI;

/// One natural frequency s = re + j im (in 1/s).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Pole {
    pub re: f64,
    pub im: f64,
}

impl Pole {
    pub fn magnitude(&self) -> f64 {
        self.re.hypot(self.im)
    }
    /// |im| / 2 pi.
    pub fn frequency_hz(&self) -> f64 {
        self.im.abs() / (2.0 * PI)
    }
    /// -re / |s| (1 for a real stable pole, 0 for an undamped one).
    pub fn damping_ratio(&self) -> f64 {
        let m = self.magnitude();
        if m == 0.0 {
            1.0
        } else {
            -self.re / m
        }
    }
    /// |s| / (-2 re): infinite (None) for an undamped pole.
    pub fn q(&self) -> Option<f64> {
        (self.re != 0.0).then(|| self.magnitude() / (-2.0 * self.re))
    }
    /// -1 / re: None for a pole on the imaginary axis.
    pub fn time_constant(&self) -> Option<f64> {
        (self.re != 0.0).then(|| -1.0 / self.re)
    }
}

/// The poles of `circuit` linearized at its start state, sorted by magnitude then imaginary part.
pub fn poles(circuit: &Circuit, settings: &Settings) -> Result<Vec<Pole>, ReferenceError> {
    let sys = System::new(circuit);
    let n = sys.size();
    let mut newton = Newton::new(n);
    let x0 =
        integrate::initial_state(&sys, settings, &mut newton).map_err(ReferenceError::Start)?;
    let mut gj = Matrix::new(n);
    gj.set_combination(0.0, sys.c(), sys.g());
    let mut scratch = vec![0.0; n];
    sys.current_into(&x0, 0.0, &mut scratch, Some(&mut gj));
    let mut cj = Matrix::new(n);
    cj.set_combination(1.0, sys.c(), &Matrix::new(n));
    sys.add_charge_jacobian(&x0, 1.0, &mut cj);
    let c = cj.to_dense();
    let g = gj.to_dense();
    pencil_poles(&c, &g).map_err(|e| e.named(&sys))
}

/// The finite generalized eigenvalues of C s + G (C x' + G x = 0).
pub fn pencil_poles(c: &DMatrix<f64>, g: &DMatrix<f64>) -> Result<Vec<Pole>, ReferenceError> {
    let red = Reduction::new(c, g)?;
    if red.r == 0 {
        return Ok(Vec::new());
    }
    let iterations = crate::reference::exact::decomposition_iterations(red.r);
    let eig = nalgebra::Schur::try_new(red.a.clone(), f64::EPSILON, iterations)
        .ok_or(ReferenceError::NoConvergence {
            what: "Schur decomposition of the dynamic part",
            iterations,
        })?
        .complex_eigenvalues();
    let mut out: Vec<Pole> = eig.iter().map(|z| Pole { re: z.re, im: z.im }).collect();
    out.sort_by(|a, b| {
        a.magnitude()
            .total_cmp(&b.magnitude())
            .then(a.im.total_cmp(&b.im))
    });
    Ok(out)
}

/// The pole nearest to a frequency in Hz (on the positive imaginary half plane), with its distance
/// relative to the frequency.
pub fn nearest_pole(poles: &[Pole], frequency_hz: f64) -> Option<(Pole, f64)> {
    poles
        .iter()
        .map(|p| {
            (
                *p,
                (p.frequency_hz() - frequency_hz).abs() / frequency_hz.max(f64::MIN_POSITIVE),
            )
        })
        .min_by(|a, b| a.1.total_cmp(&b.1))
}

/// The poles as the JSON the `poles` command writes: {"poles": [{re, im, frequency_hz, damping_ratio,
/// q, time_constant}, ...]} (q and time_constant are null for undamped poles).
pub fn poles_json(poles: &[Pole]) -> serde_json::Value {
    let num = crate::audit::results::num;
    let opt = |x: Option<f64>| x.map_or(serde_json::Value::Null, num);
    serde_json::json!({
        "poles": poles.iter().map(|p| serde_json::json!({
            "re": num(p.re),
            "im": num(p.im),
            "frequency_hz": num(p.frequency_hz()),
            "damping_ratio": num(p.damping_ratio()),
            "q": opt(p.q()),
            "time_constant": opt(p.time_constant()),
        })).collect::<Vec<_>>()
    })
}
