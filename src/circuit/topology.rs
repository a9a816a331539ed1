//! Topology checks that make the circuit equations solvable: every node reaches ground; no loop of
//! elements that each fix a voltage; no group of nodes joined to the rest only by elements that each fix
//! a current. Which elements fix what depends on how the run starts: at the operating point an inductor
//! fixes a voltage (zero) and a capacitor a current (zero); under initial conditions an inductor fixes
//! its current.

use super::{Circuit, CircuitError, ElementKind, Problem};
use crate::settings::Start;
use std::collections::{HashMap, VecDeque};

struct Graph<'a> {
    index: HashMap<&'a str, usize>,
    names: Vec<&'a str>,
}

impl<'a> Graph<'a> {
    fn new(c: &'a Circuit) -> Self {
        let mut index = HashMap::new();
        let mut names = vec![c.ground.as_str()];
        index.insert(c.ground.as_str(), 0);
        for e in &c.elements {
            if let Some(t) = e.kind.terminals() {
                for n in t {
                    if !index.contains_key(n.as_str()) {
                        index.insert(n.as_str(), names.len());
                        names.push(n.as_str());
                    }
                }
            }
        }
        Graph { index, names }
    }
    fn id(&self, n: &str) -> usize {
        self.index[n]
    }
}

struct UnionFind(Vec<usize>);

impl UnionFind {
    fn new(n: usize) -> Self {
        UnionFind((0..n).collect())
    }
    fn find(&mut self, mut a: usize) -> usize {
        while self.0[a] != a {
            self.0[a] = self.0[self.0[a]];
            a = self.0[a];
        }
        a
    }
    fn union(&mut self, a: usize, b: usize) -> bool {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra == rb {
            return false;
        }
        self.0[ra.max(rb)] = ra.min(rb);
        true
    }
}

#[derive(Clone, Copy, PartialEq)]
enum Role {
    FixesVoltage,
    FixesCurrent,
    Free,
}

fn role(kind: &ElementKind, start: Option<Start>) -> Role {
    match kind {
        ElementKind::VoltageSource { .. } | ElementKind::Vcvs { .. } | ElementKind::Ccvs { .. } => {
            Role::FixesVoltage
        }
        ElementKind::CurrentSource { .. } | ElementKind::Vccs { .. } | ElementKind::Cccs { .. } => {
            Role::FixesCurrent
        }
        ElementKind::Inductor { .. } => match start {
            Some(Start::OperatingPoint) => Role::FixesVoltage,
            Some(Start::InitialConditions) => Role::FixesCurrent,
            None => Role::Free,
        },
        ElementKind::Capacitor { .. } => match start {
            Some(Start::OperatingPoint) => Role::FixesCurrent,
            // Under initial conditions a capacitor that closes a loop of fixed voltages takes the loop's
            // voltage instead of its own initial voltage, so it is never an error.
            _ => Role::Free,
        },
        _ => Role::Free,
    }
}

pub(super) fn check(c: &Circuit) -> Result<(), CircuitError> {
    if c.elements.len() > super::MAX_ELEMENTS {
        return Err(CircuitError {
            file: c.file.clone(),
            problems: vec![Problem {
                line: None,
                column: None,
                subject: None,
                message: format!(
                    "has {} elements, more than the {} ringtrue can number",
                    c.elements.len(),
                    super::MAX_ELEMENTS
                ),
                hint: "audit a smaller part of the circuit".to_string(),
            }],
        });
    }
    if let Some(p) = too_many_breakpoints(c) {
        return Err(CircuitError {
            file: c.file.clone(),
            problems: vec![p],
        });
    }
    let g = Graph::new(c);
    let mut problems = Vec::new();
    let start = c.run.start;
    let when = match start {
        Start::OperatingPoint => "at the operating point",
        Start::InitialConditions => "at t = 0 under initial conditions",
    };

    // 1. Every node reaches ground through some element.
    let mut uf = UnionFind::new(g.names.len());
    for e in &c.elements {
        if let Some([a, b]) = e.kind.terminals() {
            uf.union(g.id(a), g.id(b));
        }
    }
    let mut floating = Vec::new();
    for (i, n) in g.names.iter().enumerate().skip(1) {
        if uf.find(i) != uf.find(0) {
            floating.push(i);
            problems.push(Problem {
                line: first_line_touching(c, n),
                column: None,
                subject: Some(format!("node {n}")),
                message: format!("has no path to ground '{}' through any element", c.ground),
                hint: format!(
                    "connect it to {} (or rename its ground node to {})",
                    c.ground, c.ground
                ),
            });
        }
    }
    if !floating.is_empty() {
        return Err(CircuitError {
            file: c.file.clone(),
            problems,
        });
    }

    // 2. Loops of elements that fix a voltage: always for sources, and with inductors at the operating point.
    for (label, st) in [(None::<&str>, None), (Some(when), Some(start))] {
        if st == Some(Start::InitialConditions) {
            continue;
        }
        let mut uf = UnionFind::new(g.names.len());
        let mut adj: Vec<Vec<(usize, usize)>> = vec![Vec::new(); g.names.len()];
        for (ei, e) in c.elements.iter().enumerate() {
            if role(&e.kind, st) != Role::FixesVoltage {
                continue;
            }
            let [a, b] = e
                .kind
                .terminals()
                .expect("voltage-fixing elements have terminals");
            let (ia, ib) = (g.id(a), g.id(b));
            if !uf.union(ia, ib) {
                let mut names: Vec<String> = path(&adj, ia, ib)
                    .into_iter()
                    .map(|k| c.elements[k].name.clone())
                    .collect();
                names.push(e.name.clone());
                let has_inductor = names.iter().any(|n| {
                    matches!(
                        c.element(n).map(|x| &x.kind),
                        Some(ElementKind::Inductor { .. })
                    )
                });
                let (message, hint) = if has_inductor && label.is_some() {
                    (
                        format!("closes a loop of voltage sources and inductors ({}), which is a short circuit {}", names.join(", "), label.unwrap_or("")),
                        "add a small series resistance to one element of the loop, or start from initial_conditions",
                    )
                } else {
                    (
                        format!("closes a loop of voltage sources ({}): their voltages over-determine the loop", names.join(", ")),
                        "remove one source of the loop or put a resistance in series with it",
                    )
                };
                if !has_inductor && label.is_some() {
                    continue; // already reported by the unconditional pass
                }
                problems.push(Problem {
                    line: e.line,
                    column: None,
                    subject: Some(format!("element {}", e.name)),
                    message,
                    hint: hint.to_string(),
                });
                continue;
            }
            adj[ia].push((ib, ei));
            adj[ib].push((ia, ei));
        }
    }

    // 3. Groups of nodes cut off from ground by elements that fix a current.
    for st in [None, Some(start)] {
        let mut uf = UnionFind::new(g.names.len());
        for e in &c.elements {
            if let Some([a, b]) = e.kind.terminals() {
                if role(&e.kind, st) != Role::FixesCurrent {
                    uf.union(g.id(a), g.id(b));
                }
            }
        }
        for (i, n) in g.names.iter().enumerate().skip(1) {
            if uf.find(i) == uf.find(0) {
                continue;
            }
            let mut cut: Vec<String> = Vec::new();
            for e in &c.elements {
                if let Some([a, b]) = e.kind.terminals() {
                    let (ra, rb) = (uf.find(g.id(a)), uf.find(g.id(b)));
                    if role(&e.kind, st) == Role::FixesCurrent
                        && ra != rb
                        && (ra == uf.find(i) || rb == uf.find(i))
                    {
                        cut.push(e.name.clone());
                    }
                }
            }
            let subject = Some(format!("node {n}"));
            if problems.iter().any(|p: &Problem| p.subject == subject) {
                continue;
            }
            let (message, hint) = match st {
                None => (
                    format!("reaches ground only through current sources ({}): its voltage is undetermined", cut.join(", ")),
                    "add a resistance from this node to ground or to another node".to_string(),
                ),
                Some(Start::OperatingPoint) => (
                    format!("reaches ground only through capacitors and current sources ({}): its voltage is undetermined {when}", cut.join(", ")),
                    "add a DC path (for example a large resistance) to ground, or set run.start: initial_conditions".to_string(),
                ),
                Some(Start::InitialConditions) => (
                    format!("reaches ground only through inductors and current sources ({}): with their currents held, its voltage is undetermined {when}", cut.join(", ")),
                    "add a resistance across the inductor, or start from the operating point".to_string(),
                ),
            };
            problems.push(Problem {
                line: first_line_touching(c, n),
                column: None,
                subject,
                message,
                hint,
            });
        }
    }

    if problems.is_empty() {
        Ok(())
    } else {
        Err(CircuitError {
            file: c.file.clone(),
            problems,
        })
    }
}

/// Element indices on the forest path from `a` to `b`.
fn path(adj: &[Vec<(usize, usize)>], a: usize, b: usize) -> Vec<usize> {
    let mut prev: Vec<Option<(usize, usize)>> = vec![None; adj.len()];
    let mut seen = vec![false; adj.len()];
    let mut q = VecDeque::from([a]);
    seen[a] = true;
    while let Some(u) = q.pop_front() {
        if u == b {
            break;
        }
        for &(v, e) in &adj[u] {
            if !seen[v] {
                seen[v] = true;
                prev[v] = Some((u, e));
                q.push_back(v);
            }
        }
    }
    let mut out = Vec::new();
    let mut cur = b;
    while let Some((p, e)) = prev[cur] {
        out.push(e);
        cur = p;
    }
    out.reverse();
    out
}

/// The element at which the sources' and switches' corners up to the stop time exceed
/// `MAX_BREAKPOINTS` (a pulse train's counted without building them, so a stop of 1e30 s costs
/// nothing).
fn too_many_breakpoints(c: &Circuit) -> Option<Problem> {
    let stop = c.run.stop;
    let mut total = 0.0;
    for e in &c.elements {
        let count = match &e.kind {
            ElementKind::VoltageSource { waveform, .. }
            | ElementKind::CurrentSource { waveform, .. } => waveform.corner_count_estimate(stop),
            ElementKind::Switch { model, .. } => model.corners().len() as f64,
            _ => 0.0,
        };
        total += count;
        if count > super::MAX_BREAKPOINTS || total > super::MAX_BREAKPOINTS {
            return Some(Problem {
                line: e.line,
                column: None,
                subject: Some(format!("element {}", e.name)),
                message: format!(
                    "{} about {} breakpoints up to stop = {} s, more than the {} a run may have",
                    if count == total {
                        "gives"
                    } else {
                        "brings the sources to"
                    },
                    if total < 1e16 {
                        crate::units::shortest(total.round())
                    } else {
                        format!("{total:.2e}")
                    },
                    crate::units::shortest(stop),
                    crate::units::shortest(super::MAX_BREAKPOINTS)
                ),
                hint: "check run.stop and its unit (0.5u, not 0.5), or lengthen the pulse period"
                    .to_string(),
            });
        }
    }
    None
}

fn first_line_touching(c: &Circuit, node: &str) -> Option<usize> {
    c.elements
        .iter()
        .find(|e| {
            e.kind
                .terminals()
                .is_some_and(|t| t.iter().any(|n| n == node))
        })
        .and_then(|e| e.line)
}
