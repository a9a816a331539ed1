//! The circuit as the rest of the program sees it: named elements between named nodes, the run's
//! settings, what to watch and what to compare against, all checked before any equation is built.
//!
//! `parse` turns the text of a circuit file into a `Circuit` or into every problem found, each naming the
//! file, the line where one is known, the element or node, and what to change.

mod build;
pub mod raw;
mod topology;
pub mod waveform;
pub mod yaml;

use crate::settings::{Overrides, Start};
pub use build::{resolve_watch, WatchProblem};
use std::fmt;
pub use waveform::Waveform;

/// A circuit ready for assembly.
#[derive(Debug, Clone)]
pub struct Circuit {
    pub name: String,
    pub title: String,
    pub ground: String,
    pub elements: Vec<Element>,
    pub run: RunSpec,
    pub watch: Vec<Probe>,
    pub reference: ReferenceSpec,
    pub plan: Option<raw::RawPlan>,
    /// Where the circuit came from, for messages.
    pub file: String,
}

/// When the run stops, how it starts, and the settings the file gives.
#[derive(Debug, Clone, Copy)]
pub struct RunSpec {
    pub stop: f64,
    pub start: Start,
    pub settings: Overrides,
}

/// A watched signal.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Probe {
    /// The voltage of a node against ground.
    Node(String),
    /// The current through an element from its first node to its second.
    Current(String),
}

impl Probe {
    pub fn label(&self) -> String {
        match self {
            Probe::Node(n) => n.clone(),
            Probe::Current(e) => format!("{e}.current"),
        }
    }
}

/// What the run is measured against.
#[derive(Debug, Clone, PartialEq)]
pub enum ReferenceSpec {
    /// `exact` for linear circuits, `converged` otherwise.
    Default,
    Exact,
    Converged,
    ClosedForm {
        formula: String,
        roles: Vec<(String, String)>,
    },
}

#[derive(Debug, Clone, PartialEq)]
pub struct Element {
    pub name: String,
    /// The line of the circuit file that declares the element, when it could be found.
    pub line: Option<usize>,
    pub kind: ElementKind,
}

#[derive(Debug, Clone, PartialEq)]
pub struct DiodeModel {
    pub saturation_current: f64,
    pub emission_coefficient: f64,
    pub temperature: f64,
    pub series_resistance: Option<f64>,
    pub junction_capacitance: f64,
    pub transit_time: f64,
}

impl DiodeModel {
    /// n k T / q with the CODATA 2018 exact values of k and q.
    pub fn thermal_voltage(&self) -> f64 {
        const BOLTZMANN: f64 = 1.380_649e-23; // J/K, exact since the 2019 SI redefinition
        const ELEMENTARY_CHARGE: f64 = 1.602_176_634e-19; // C, exact since the 2019 SI redefinition
        self.emission_coefficient * BOLTZMANN * self.temperature / ELEMENTARY_CHARGE
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct SwitchModel {
    pub on_resistance: f64,
    pub off_resistance: f64,
    pub initially_on: bool,
    pub toggle_at: Vec<f64>,
    pub transition: f64,
}

impl SwitchModel {
    /// The conductance at time `t`: constant between toggles, moving geometrically (linear in
    /// log-conductance) over `transition` after each toggle.
    pub fn conductance(&self, t: f64) -> f64 {
        let (g_on, g_off) = (1.0 / self.on_resistance, 1.0 / self.off_resistance);
        let mut on = self.initially_on;
        let mut g = if on { g_on } else { g_off };
        for &tt in &self.toggle_at {
            if t <= tt {
                break;
            }
            let (from, to) = if on { (g_on, g_off) } else { (g_off, g_on) };
            on = !on;
            if t < tt + self.transition {
                let f = (t - tt) / self.transition;
                return from * (to / from).powf(f);
            }
            g = to;
        }
        g
    }

    pub fn corners(&self) -> Vec<f64> {
        self.toggle_at
            .iter()
            .flat_map(|&t| [t, t + self.transition])
            .collect()
    }
}

#[derive(Debug, Clone, PartialEq)]
pub enum ElementKind {
    Resistor {
        nodes: [String; 2],
        resistance: f64,
    },
    Capacitor {
        nodes: [String; 2],
        capacitance: f64,
        initial_voltage: Option<f64>,
    },
    Inductor {
        nodes: [String; 2],
        inductance: f64,
        initial_current: Option<f64>,
    },
    Coupling {
        inductors: [String; 2],
        k: f64,
    },
    VoltageSource {
        nodes: [String; 2],
        waveform: Waveform,
    },
    CurrentSource {
        nodes: [String; 2],
        waveform: Waveform,
    },
    Diode {
        nodes: [String; 2],
        model: DiodeModel,
    },
    Vcvs {
        nodes: [String; 2],
        control: [String; 2],
        gain: f64,
    },
    Vccs {
        nodes: [String; 2],
        control: [String; 2],
        gain: f64,
    },
    Cccs {
        nodes: [String; 2],
        control: String,
        gain: f64,
    },
    Ccvs {
        nodes: [String; 2],
        control: String,
        gain: f64,
    },
    Switch {
        nodes: [String; 2],
        model: SwitchModel,
    },
}

impl ElementKind {
    pub fn kind_name(&self) -> &'static str {
        match self {
            ElementKind::Resistor { .. } => "resistor",
            ElementKind::Capacitor { .. } => "capacitor",
            ElementKind::Inductor { .. } => "inductor",
            ElementKind::Coupling { .. } => "coupling",
            ElementKind::VoltageSource { .. } => "voltage_source",
            ElementKind::CurrentSource { .. } => "current_source",
            ElementKind::Diode { .. } => "diode",
            ElementKind::Vcvs { .. } => "vcvs",
            ElementKind::Vccs { .. } => "vccs",
            ElementKind::Cccs { .. } => "cccs",
            ElementKind::Ccvs { .. } => "ccvs",
            ElementKind::Switch { .. } => "switch",
        }
    }

    /// The two nodes the element connects (none for a coupling).
    pub fn terminals(&self) -> Option<&[String; 2]> {
        match self {
            ElementKind::Coupling { .. } => None,
            ElementKind::Resistor { nodes, .. }
            | ElementKind::Capacitor { nodes, .. }
            | ElementKind::Inductor { nodes, .. }
            | ElementKind::VoltageSource { nodes, .. }
            | ElementKind::CurrentSource { nodes, .. }
            | ElementKind::Diode { nodes, .. }
            | ElementKind::Vcvs { nodes, .. }
            | ElementKind::Vccs { nodes, .. }
            | ElementKind::Cccs { nodes, .. }
            | ElementKind::Ccvs { nodes, .. }
            | ElementKind::Switch { nodes, .. } => Some(nodes),
        }
    }

    /// True for elements whose current is an unknown of the equations.
    pub fn has_branch_current(&self) -> bool {
        matches!(
            self,
            ElementKind::Inductor { .. }
                | ElementKind::VoltageSource { .. }
                | ElementKind::Vcvs { .. }
                | ElementKind::Ccvs { .. }
        )
    }

    /// True for elements whose equations are linear and time-invariant.
    pub fn is_linear(&self) -> bool {
        !matches!(self, ElementKind::Diode { .. } | ElementKind::Switch { .. })
    }
}

impl Circuit {
    /// Node names other than ground, in order of first appearance.
    pub fn nodes(&self) -> Vec<String> {
        distinct_nodes(&self.elements, &self.ground)
            .into_iter()
            .map(str::to_string)
            .collect()
    }

    /// The element called `name` (a linear search: build a map for many lookups).
    pub fn element(&self, name: &str) -> Option<&Element> {
        self.elements.iter().find(|e| e.name == name)
    }

    /// True when every element is linear and time-invariant.
    pub fn is_linear(&self) -> bool {
        self.elements.iter().all(|e| e.kind.is_linear())
    }

    /// Every waveform and switch corner in [0, stop], plus stop, sorted without duplicates.
    pub fn breakpoints(&self) -> Vec<f64> {
        let stop = self.run.stop;
        let mut out = vec![stop];
        for e in &self.elements {
            match &e.kind {
                ElementKind::VoltageSource { waveform, .. }
                | ElementKind::CurrentSource { waveform, .. } => {
                    out.extend(waveform.corners(stop));
                }
                ElementKind::Switch { model, .. } => out.extend(model.corners()),
                _ => {}
            }
        }
        out.retain(|&t| t > 0.0 && t <= stop);
        out.sort_by(f64::total_cmp);
        // Merge corners closer than a part in 1e12 of the run: no step could resolve them.
        let tiny = stop * 1e-12;
        let mut merged: Vec<f64> = Vec::with_capacity(out.len());
        for t in out {
            match merged.last() {
                Some(&last) if t - last <= tiny => {}
                _ => merged.push(t),
            }
        }
        if let Some(last) = merged.last_mut() {
            if stop - *last <= tiny {
                *last = stop;
            }
        }
        merged
    }
}

/// One problem found in a circuit file.
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    pub line: Option<usize>,
    pub column: Option<usize>,
    /// The element or node the problem is about, e.g. `element r1` or `node out`.
    pub subject: Option<String>,
    pub message: String,
    /// What to change.
    pub hint: String,
}

/// Every problem found in one circuit file.
#[derive(Debug, Clone, PartialEq)]
pub struct CircuitError {
    pub file: String,
    pub problems: Vec<Problem>,
}

impl fmt::Display for CircuitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, p) in self.problems.iter().enumerate() {
            if i > 0 {
                writeln!(f)?;
            }
            write!(f, "{}", self.file)?;
            if let Some(l) = p.line {
                write!(f, ":{l}")?;
                if let Some(c) = p.column {
                    write!(f, ":{c}")?;
                }
            }
            write!(f, ": ")?;
            if let Some(s) = &p.subject {
                write!(f, "{s}: ")?;
            }
            write!(f, "{}", p.message)?;
            if !p.hint.is_empty() {
                write!(f, "; {}", p.hint)?;
            }
        }
        Ok(())
    }
}

impl std::error::Error for CircuitError {}

/// The most elements a circuit may have. An element adds at most five unknowns (two terminals, an
/// internal node, a branch current and a probe's), so this keeps a circuit's unknowns within what the
/// sparse LU numbers (`equations::sparse_lu::MAX_UNKNOWNS`, rows stored in 32 bits).
pub const MAX_ELEMENTS: usize = u32::MAX as usize / 8;

/// The most breakpoints (source and switch corners) a run may have up to its stop time. Every
/// breakpoint costs at least one step of every run of an audit and one segment of the exact
/// reference; a million is already half the default step budget, and a file past it is nearly always
/// a stop time that lost its unit (0.5 for 0.5u).
pub const MAX_BREAKPOINTS: f64 = 1e6;

/// Reads and checks the text of a circuit file; `file` names it in messages.
pub fn parse(text: &str, file: &str) -> Result<Circuit, CircuitError> {
    let raw: raw::RawCircuit = yaml::from_str(text).map_err(|e| {
        let subject = e
            .line
            .and_then(|l| yaml::element_at_line(text, l))
            .filter(|_| e.message.contains("unknown field") || e.message.contains("elements"))
            .map(|n| format!("element {n}"));
        let hint = if e.message.contains("unknown field") {
            "remove the key or correct its spelling".to_string()
        } else if e.message.contains("missing field") {
            "add the missing key".to_string()
        } else {
            "correct the YAML at that position".to_string()
        };
        CircuitError {
            file: file.to_string(),
            problems: vec![Problem {
                line: e.line,
                column: e.column,
                subject,
                message: e.message,
                hint,
            }],
        }
    })?;
    let circuit = build::build(raw, text, file)?;
    topology::check(&circuit)?;
    Ok(circuit)
}

/// Reads a circuit file from disk.
pub fn load(path: &std::path::Path) -> Result<(Circuit, String), LoadError> {
    let text = std::fs::read_to_string(path).map_err(|e| LoadError::Io {
        path: path.display().to_string(),
        message: e.to_string(),
    })?;
    let circuit = parse(&text, &path.display().to_string()).map_err(LoadError::Circuit)?;
    Ok((circuit, text))
}

#[derive(Debug, thiserror::Error)]
pub enum LoadError {
    #[error("cannot read {path}: {message}")]
    Io { path: String, message: String },
    #[error("{0}")]
    Circuit(CircuitError),
}

/// The nodes the elements connect to, ground left out, in order of first appearance (in one pass with
/// a set: circuits may have 10^5 nodes).
pub fn distinct_nodes<'a>(elements: &'a [Element], ground: &str) -> Vec<&'a str> {
    let mut seen = std::collections::HashSet::new();
    let mut out = Vec::new();
    for n in elements.iter().filter_map(|e| e.kind.terminals()).flatten() {
        if n != ground && seen.insert(n.as_str()) {
            out.push(n.as_str());
        }
    }
    out
}
