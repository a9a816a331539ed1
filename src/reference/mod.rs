//! The truth each run is measured against, and how good that truth is.
//!
//! - `exact`: for linear circuits, the solution computed between breakpoints with matrix exponentials.
//! - `closed_form`: a textbook formula named in the circuit file with the elements it reads.
//! - `converged`: for nonlinear circuits, the engine's most accurate method down a tolerance ladder, with
//!   its error estimated from successive rungs.
//!
//! Every reference evaluates at any requested times; `error_bound` is the largest error it may have,
//! relative to each signal's peak.

pub mod closed_form;
pub mod converged;
pub mod exact;

use crate::circuit::{Circuit, ReferenceSpec};
use crate::equations::System;
use crate::integrate::RunError;
use crate::settings::Settings;

/// Which kind of truth a reference is.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ReferenceKind {
    Exact,
    ClosedForm(String),
    Converged,
}

impl ReferenceKind {
    pub fn label(&self) -> String {
        match self {
            ReferenceKind::Exact => "exact".into(),
            ReferenceKind::ClosedForm(f) => format!("closed_form:{f}"),
            ReferenceKind::Converged => "converged".into(),
        }
    }
}

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ReferenceError {
    #[error("the exact reference needs a linear circuit, but {} nonlinear or time-varying; use reference: converged", list(elements))]
    NotLinear { elements: Vec<String> },
    #[error("the circuit has index 2 (a loop of capacitors and voltage sources, or a cutset of inductors and current sources): the exact reference cannot split it; add a small series resistance to the loop or a large resistance across the cutset, or use reference: converged")]
    IndexTwo,
    #[error("the circuit's equations cannot be scaled for the exact reference: at {unknown}, {what} is {value:e} once scaled, beyond double precision (a capacitance, inductance or resistance there near 1e-308 or 1e308); correct the value, or use reference: converged")]
    OutOfRange {
        what: &'static str,
        /// The unknown (row or column of the equations) whose scale overflowed.
        index: usize,
        /// How messages name it: `row N` until `named` gives the circuit's name.
        unknown: String,
        value: f64,
    },
    #[error("the exact reference's {what} did not converge in {iterations} iterations; check the circuit's values for extremes, or use reference: converged")]
    NoConvergence {
        what: &'static str,
        iterations: usize,
    },
    #[error("the exact reference cannot span the interval from {} s to {} s: the circuit's fastest rate times its length overflows double precision; shorten the run's stop time, or use reference: converged", crate::units::shortest(*t0), crate::units::shortest(*t1))]
    SpanTooLong { t0: f64, t1: f64 },
    #[error("the exact reference would walk more than {limit} pieces by t = {} s (the circuit's fastest rate times the length of each interval between breakpoints); shorten the run's stop time, or use reference: converged", crate::units::shortest(*time))]
    TooManySegments { limit: usize, time: f64 },
    #[error("the state at t = 0 could not be found: {0}")]
    Start(RunError),
    #[error("closed form '{formula}': {message}")]
    ClosedForm { formula: String, message: String },
    #[error("the converged reference failed at rtol {rtol:e}: {error}")]
    ConvergedRun { rtol: f64, error: RunError },
    #[error("the converged reference did not converge: successive tolerance rungs differ by {}, {} of the peak of {signal}, which is not below the previous difference; tighten the ladder or check the circuit", crate::units::shortest(*last), crate::units::shortest(*previous))]
    NotConverged {
        signal: String,
        previous: f64,
        last: f64,
    },
    #[error("{signal} is not a signal of this reference (it has {})", available.join(", "))]
    UnknownSignal {
        signal: String,
        available: Vec<String>,
    },
}

impl ReferenceError {
    /// Names the unknown of an `OutOfRange` error after the circuit's node or element.
    pub fn named(self, sys: &System) -> Self {
        match self {
            ReferenceError::OutOfRange {
                what, index, value, ..
            } if index < sys.size() => ReferenceError::OutOfRange {
                what,
                index,
                unknown: sys.describe_unknown(index),
                value,
            },
            other => other,
        }
    }
}

fn list(v: &[String]) -> String {
    match v.len() {
        1 => format!("{} is", v[0]),
        _ => format!("{} are", v.join(", ")),
    }
}

enum Evaluator {
    Exact(Box<exact::Exact>),
    ClosedForm(closed_form::ClosedForm),
    Converged(Box<converged::Converged>),
}

/// A reference solution for the watched signals of one circuit.
pub struct Reference {
    pub kind: ReferenceKind,
    /// The largest error of the reference relative to each signal's peak.
    pub error_bound: f64,
    pub labels: Vec<String>,
    /// Something a reader of the results must know (for example a reference that barely converged).
    pub warning: Option<String>,
    evaluator: Evaluator,
}

impl Reference {
    /// Builds the reference the circuit asks for (`exact` for linear circuits and `converged` otherwise
    /// when it asks for none). `settings` gives the start (operating point or initial conditions).
    pub fn build(circuit: &Circuit, settings: &Settings) -> Result<Reference, ReferenceError> {
        let spec = match &circuit.reference {
            ReferenceSpec::Default if circuit.is_linear() => ReferenceSpec::Exact,
            ReferenceSpec::Default => ReferenceSpec::Converged,
            other => other.clone(),
        };
        match spec {
            ReferenceSpec::Exact | ReferenceSpec::Default => {
                let e = exact::Exact::new(circuit, settings)?;
                Ok(Reference {
                    kind: ReferenceKind::Exact,
                    // rounding in the exponentials (see Exact::rounding), never claimed below 1e-13
                    error_bound: e.rounding.max(1e-13),
                    labels: e.labels(),
                    warning: None,
                    evaluator: Evaluator::Exact(Box::new(e)),
                })
            }
            ReferenceSpec::ClosedForm { formula, roles } => {
                let cf = closed_form::ClosedForm::new(circuit, settings, &formula, &roles)?;
                Ok(Reference {
                    kind: ReferenceKind::ClosedForm(formula),
                    error_bound: 1e-13,
                    labels: cf.labels(),
                    warning: None,
                    evaluator: Evaluator::ClosedForm(cf),
                })
            }
            ReferenceSpec::Converged => {
                let c = converged::Converged::new(circuit, settings)?;
                Ok(Reference {
                    kind: ReferenceKind::Converged,
                    error_bound: c.error_bound,
                    labels: c.labels(),
                    warning: c.warning.clone(),
                    evaluator: Evaluator::Converged(Box::new(c)),
                })
            }
        }
    }

    /// The watched signals at each of `times`: `out[k][j]` is signal `k` at `times[j]`.
    pub fn evaluate(&self, times: &[f64]) -> Vec<Vec<f64>> {
        match &self.evaluator {
            Evaluator::Exact(e) => e.signals(times),
            Evaluator::ClosedForm(c) => c.signals(times),
            Evaluator::Converged(c) => c.signals(times),
        }
    }

    /// N uniform times over [0, stop], the first 0 and the last exactly stop.
    pub fn uniform_times(stop: f64, n: usize) -> Vec<f64> {
        match n {
            0 => Vec::new(),
            1 => vec![0.0],
            _ => (0..n)
                .map(|k| {
                    if k + 1 == n {
                        stop
                    } else {
                        stop * k as f64 / (n - 1) as f64
                    }
                })
                .collect(),
        }
    }
}
