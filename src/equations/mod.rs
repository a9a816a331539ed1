//! Modified nodal analysis: the circuit as d/dt q(x) + i(x, t) = b(t).
//!
//! `x` holds node voltages then branch currents. The linear part is q = C x and i = G x with constant
//! matrices; diodes add nonlinear currents and charges, switches a time-varying conductance. Row `r` of
//! the equations is a current balance (Kirchhoff's current law at a node) or a branch voltage equation.
//!
//! Sign conventions: a branch current flows from the element's first node through the element to its
//! second; a current source drives its current from its first node through itself to its second.

pub mod devices;
pub mod matrix;
pub mod sparse_lu;

use crate::circuit::{Circuit, DiodeModel, ElementKind, Probe, SwitchModel, Waveform};
use matrix::{Matrix, Packed};
use std::collections::HashMap;

/// What an unknown measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum UnknownKind {
    Voltage,
    Current,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Unknown {
    /// A node name, `ELEMENT.current`, or an internal name such as `d1#junction`.
    pub name: String,
    pub kind: UnknownKind,
    /// False for the currents of the zero-volt probes added to measure a capacitor's current: they are
    /// reported but do not take part in step control, so watching a signal never changes the run.
    pub controls_step: bool,
}

#[derive(Debug, Clone)]
struct SourceStamp {
    waveform: Waveform,
    /// (row, sign): the waveform value times sign is added to b[row].
    rows: Vec<(usize, f64)>,
}

#[derive(Debug, Clone)]
pub struct DiodeStamp {
    pub name: String,
    pub anode: Option<usize>,
    pub cathode: Option<usize>,
    pub model: DiodeModel,
}

#[derive(Debug, Clone)]
struct SwitchStamp {
    a: Option<usize>,
    b: Option<usize>,
    model: SwitchModel,
}

/// How a watched signal is computed from the unknowns.
#[derive(Debug, Clone)]
enum ProbeExpr {
    Unknown(usize),
    Conductance {
        a: Option<usize>,
        b: Option<usize>,
        g: f64,
    },
    Source {
        index: usize,
        sign: f64,
    },
    Transconductance {
        c: [Option<usize>; 2],
        g: f64,
    },
    CurrentGain {
        unknown: usize,
        gain: f64,
    },
    Diode {
        index: usize,
    },
    Switch {
        index: usize,
    },
}

/// A capacitor whose voltage is held at t = 0 under `start: initial_conditions`.
#[derive(Debug, Clone)]
pub struct HeldVoltage {
    pub element: String,
    pub a: Option<usize>,
    pub b: Option<usize>,
    pub voltage: f64,
    /// False when the capacitor closes a loop of held voltages: it then takes the loop's voltage and its
    /// own initial voltage, if given, is checked against it.
    pub held: bool,
    pub given: bool,
}

/// An inductor whose current is held at t = 0 under `start: initial_conditions`.
#[derive(Debug, Clone)]
pub struct HeldCurrent {
    pub element: String,
    pub unknown: usize,
    pub current: f64,
}

/// The assembled equations of one circuit.
#[derive(Debug, Clone)]
pub struct System {
    pub unknowns: Vec<Unknown>,
    /// Row kinds: `Current` for a current balance, `Voltage` for a branch equation.
    pub row_kinds: Vec<UnknownKind>,
    /// Rows that hold a charge or flux; the others are algebraic.
    pub dynamic_rows: Vec<bool>,
    /// The conductance and capacitance matrices, fixed once built (read them with `g()` and `c()`).
    g: Matrix,
    c: Matrix,
    /// Packed copies of `g` and `c` for the products of every step.
    g_packed: Packed,
    c_packed: Packed,
    sources: Vec<SourceStamp>,
    pub diodes: Vec<DiodeStamp>,
    switches: Vec<SwitchStamp>,
    probes: Vec<(String, ProbeExpr)>,
    pub held_voltages: Vec<HeldVoltage>,
    pub held_currents: Vec<HeldCurrent>,
    /// Linear and time-invariant: the Jacobian depends on nothing but the step.
    pub linear: bool,
    /// An all-zero matrix with the pattern of every Jacobian of these equations (G, C, the diagonal and
    /// the nonlinear stamps), its sparse symbolic analysis done once: Newton starts from a clone.
    pub jacobian: Matrix,
    pub node_count: usize,
}

fn stamp2(m: &mut Matrix, a: Option<usize>, b: Option<usize>, v: f64) {
    if let Some(a) = a {
        m.add(a, a, v);
    }
    if let Some(b) = b {
        m.add(b, b, v);
    }
    if let (Some(a), Some(b)) = (a, b) {
        m.add(a, b, -v);
        m.add(b, a, -v);
    }
}

/// Adds `v` at (row, col) when both exist.
fn put(m: &mut Matrix, row: Option<usize>, col: Option<usize>, v: f64) {
    if let (Some(r), Some(c)) = (row, col) {
        m.add(r, c, v);
    }
}

#[inline]
fn volt(x: &[f64], n: Option<usize>) -> f64 {
    n.map_or(0.0, |i| x[i])
}

impl System {
    /// Builds the equations for a checked circuit.
    pub fn new(circuit: &Circuit) -> System {
        let ground = circuit.ground.as_str();
        let watched_currents: Vec<&str> = circuit
            .watch
            .iter()
            .filter_map(|p| match p {
                Probe::Current(e) => Some(e.as_str()),
                Probe::Node(_) => None,
            })
            .collect();
        let needs_probe = |name: &str, kind: &ElementKind| -> bool {
            watched_currents.contains(&name)
                && match kind {
                    ElementKind::Capacitor { .. } => true,
                    ElementKind::Diode { model, .. } => {
                        model.series_resistance.is_none()
                            && (model.junction_capacitance > 0.0 || model.transit_time > 0.0)
                    }
                    _ => false,
                }
        };

        // Node numbering: circuit nodes in order of appearance, then internal nodes.
        let mut node_names: Vec<String> = circuit.nodes();
        let mut node_index: HashMap<String, usize> = node_names
            .iter()
            .enumerate()
            .map(|(i, n)| (n.clone(), i))
            .collect();
        let mut internal = |name: String, names: &mut Vec<String>| -> usize {
            let i = names.len();
            names.push(name.clone());
            node_index.insert(name, i);
            i
        };
        // Per element: its effective first terminal (after a probe or series resistance).
        let mut first_terminal: HashMap<String, usize> = HashMap::new();
        let mut junction_node: HashMap<String, usize> = HashMap::new();
        for e in &circuit.elements {
            if needs_probe(&e.name, &e.kind) {
                let i = internal(format!("{}#probe", e.name), &mut node_names);
                first_terminal.insert(e.name.clone(), i);
            }
            if let ElementKind::Diode { model, .. } = &e.kind {
                if model.series_resistance.is_some() {
                    let i = internal(format!("{}#junction", e.name), &mut node_names);
                    junction_node.insert(e.name.clone(), i);
                }
            }
        }
        let node_count = node_names.len();
        let node = |n: &str| -> Option<usize> {
            if n == ground {
                None
            } else {
                Some(node_index[n])
            }
        };

        // Branch currents after the nodes.
        let mut unknowns: Vec<Unknown> = node_names
            .iter()
            .map(|n| Unknown {
                name: n.clone(),
                kind: UnknownKind::Voltage,
                controls_step: true,
            })
            .collect();
        let mut branch: HashMap<String, usize> = HashMap::new();
        let mut probe_branch: HashMap<String, usize> = HashMap::new();
        for e in &circuit.elements {
            if e.kind.has_branch_current() {
                branch.insert(e.name.clone(), unknowns.len());
                unknowns.push(Unknown {
                    name: format!("{}.current", e.name),
                    kind: UnknownKind::Current,
                    controls_step: true,
                });
            }
            if first_terminal.contains_key(&e.name) {
                probe_branch.insert(e.name.clone(), unknowns.len());
                unknowns.push(Unknown {
                    name: format!("{}.current", e.name),
                    kind: UnknownKind::Current,
                    controls_step: false,
                });
            }
        }
        let n = unknowns.len();
        let mut row_kinds = vec![UnknownKind::Current; n];
        for rk in row_kinds.iter_mut().skip(node_count) {
            *rk = UnknownKind::Voltage;
        }
        let mut g = Matrix::new(n);
        let mut c = Matrix::new(n);
        let mut sources = Vec::new();
        let mut diodes = Vec::new();
        let mut switches = Vec::new();
        let mut held_voltages = Vec::new();
        let mut held_currents = Vec::new();

        // Zero-volt probes: from the element's node through the probe to the internal node.
        for (name, &k) in &probe_branch {
            let e = circuit.element(name).expect("probe of a known element");
            let [a, _] = e.kind.terminals().expect("probed elements have terminals");
            let (p, m) = (node(a), Some(first_terminal[name]));
            put(&mut g, p, Some(k), 1.0);
            put(&mut g, m, Some(k), -1.0);
            put(&mut g, Some(k), p, 1.0);
            put(&mut g, Some(k), m, -1.0);
        }

        for e in &circuit.elements {
            let terms = e.kind.terminals();
            let (a, b) = match terms {
                Some([a, b]) => (
                    first_terminal.get(&e.name).copied().or_else(|| node(a)),
                    node(b),
                ),
                None => (None, None),
            };
            match &e.kind {
                ElementKind::Resistor { resistance, .. } => stamp2(&mut g, a, b, 1.0 / resistance),
                ElementKind::Capacitor {
                    capacitance,
                    initial_voltage,
                    ..
                } => {
                    stamp2(&mut c, a, b, *capacitance);
                    held_voltages.push(HeldVoltage {
                        element: e.name.clone(),
                        a,
                        b,
                        voltage: initial_voltage.unwrap_or(0.0),
                        held: true,
                        given: initial_voltage.is_some(),
                    });
                }
                ElementKind::Inductor {
                    inductance,
                    initial_current,
                    ..
                } => {
                    let k = branch[&e.name];
                    put(&mut g, a, Some(k), 1.0);
                    put(&mut g, b, Some(k), -1.0);
                    put(&mut g, Some(k), a, -1.0);
                    put(&mut g, Some(k), b, 1.0);
                    c.add(k, k, *inductance);
                    held_currents.push(HeldCurrent {
                        element: e.name.clone(),
                        unknown: k,
                        current: initial_current.unwrap_or(0.0),
                    });
                }
                ElementKind::Coupling { inductors, k } => {
                    let l = |name: &str| match &circuit.element(name).map(|x| &x.kind) {
                        Some(ElementKind::Inductor { inductance, .. }) => *inductance,
                        _ => unreachable!("checked: couplings name inductors"),
                    };
                    let m = k * (l(&inductors[0]) * l(&inductors[1])).sqrt();
                    let (k1, k2) = (branch[&inductors[0]], branch[&inductors[1]]);
                    c.add(k1, k2, m);
                    c.add(k2, k1, m);
                }
                ElementKind::VoltageSource { waveform, .. } => {
                    let k = branch[&e.name];
                    put(&mut g, a, Some(k), 1.0);
                    put(&mut g, b, Some(k), -1.0);
                    put(&mut g, Some(k), a, 1.0);
                    put(&mut g, Some(k), b, -1.0);
                    sources.push(SourceStamp {
                        waveform: waveform.clone(),
                        rows: vec![(k, 1.0)],
                    });
                }
                ElementKind::CurrentSource { waveform, .. } => {
                    let mut rows = Vec::new();
                    if let Some(a) = a {
                        rows.push((a, -1.0));
                    }
                    if let Some(b) = b {
                        rows.push((b, 1.0));
                    }
                    sources.push(SourceStamp {
                        waveform: waveform.clone(),
                        rows,
                    });
                }
                ElementKind::Diode { model, .. } => {
                    let anode = match (model.series_resistance, junction_node.get(&e.name)) {
                        (Some(rs), Some(&j)) => {
                            stamp2(&mut g, a, Some(j), 1.0 / rs);
                            Some(j)
                        }
                        _ => a,
                    };
                    diodes.push(DiodeStamp {
                        name: e.name.clone(),
                        anode,
                        cathode: b,
                        model: model.clone(),
                    });
                }
                ElementKind::Vcvs { control, gain, .. } => {
                    let k = branch[&e.name];
                    put(&mut g, a, Some(k), 1.0);
                    put(&mut g, b, Some(k), -1.0);
                    put(&mut g, Some(k), a, 1.0);
                    put(&mut g, Some(k), b, -1.0);
                    put(&mut g, Some(k), node(&control[0]), -gain);
                    put(&mut g, Some(k), node(&control[1]), *gain);
                }
                ElementKind::Vccs { control, gain, .. } => {
                    let (cp, cn) = (node(&control[0]), node(&control[1]));
                    put(&mut g, a, cp, *gain);
                    put(&mut g, a, cn, -gain);
                    put(&mut g, b, cp, -gain);
                    put(&mut g, b, cn, *gain);
                }
                ElementKind::Cccs { control, gain, .. } => {
                    let kc = branch[control];
                    put(&mut g, a, Some(kc), *gain);
                    put(&mut g, b, Some(kc), -gain);
                }
                ElementKind::Ccvs { control, gain, .. } => {
                    let k = branch[&e.name];
                    let kc = branch[control];
                    put(&mut g, a, Some(k), 1.0);
                    put(&mut g, b, Some(k), -1.0);
                    put(&mut g, Some(k), a, 1.0);
                    put(&mut g, Some(k), b, -1.0);
                    g.add(k, kc, -gain);
                }
                ElementKind::Switch { model, .. } => switches.push(SwitchStamp {
                    a,
                    b,
                    model: model.clone(),
                }),
            }
        }

        // Capacitors that close a loop of held voltages take the loop's voltage at t = 0.
        mark_loop_capacitors(circuit, &node_index, ground, &mut held_voltages);

        // Probes for watched signals.
        let mut probes = Vec::new();
        for p in &circuit.watch {
            let expr = match p {
                Probe::Node(nm) => ProbeExpr::Unknown(node_index[nm.as_str()]),
                Probe::Current(el) => {
                    let e = circuit
                        .element(el)
                        .expect("checked: watched elements exist");
                    let [na, nb] = e.kind.terminals().expect("checked: not a coupling");
                    let (a, b) = (node(na), node(nb));
                    if let Some(&k) = branch.get(el).or_else(|| probe_branch.get(el)) {
                        ProbeExpr::Unknown(k)
                    } else {
                        match &e.kind {
                            ElementKind::Resistor { resistance, .. } => ProbeExpr::Conductance {
                                a,
                                b,
                                g: 1.0 / resistance,
                            },
                            ElementKind::CurrentSource { .. } => ProbeExpr::Source {
                                index: source_index(circuit, el),
                                sign: 1.0,
                            },
                            ElementKind::Vccs { control, gain, .. } => {
                                ProbeExpr::Transconductance {
                                    c: [node(&control[0]), node(&control[1])],
                                    g: *gain,
                                }
                            }
                            ElementKind::Cccs { control, gain, .. } => ProbeExpr::CurrentGain {
                                unknown: branch[control],
                                gain: *gain,
                            },
                            ElementKind::Diode { model, .. } => match model.series_resistance {
                                Some(rs) => ProbeExpr::Conductance {
                                    a,
                                    b: junction_node.get(el).copied(),
                                    g: 1.0 / rs,
                                },
                                None => ProbeExpr::Diode {
                                    index: diodes
                                        .iter()
                                        .position(|d| d.name == *el)
                                        .expect("diode stamped"),
                                },
                            },
                            ElementKind::Switch { .. } => ProbeExpr::Switch {
                                index: circuit
                                    .elements
                                    .iter()
                                    .filter(|x| matches!(x.kind, ElementKind::Switch { .. }))
                                    .position(|x| x.name == *el)
                                    .expect("switch stamped"),
                            },
                            _ => unreachable!(
                                "elements with branch currents or probes are handled above"
                            ),
                        }
                    }
                }
            };
            probes.push((p.label(), expr));
        }

        let mut dynamic_rows: Vec<bool> = (0..n).map(|r| c.row_is_nonzero(r)).collect();
        for d in &diodes {
            if d.model.junction_capacitance > 0.0 || d.model.transit_time > 0.0 {
                for r in [d.anode, d.cathode].into_iter().flatten() {
                    dynamic_rows[r] = true;
                }
            }
        }
        let linear = diodes.is_empty() && switches.is_empty();
        let mut jacobian = Matrix::with_diagonal(n);
        jacobian.set_combination(1.0, &c, &g);
        for d in &diodes {
            stamp2(&mut jacobian, d.anode, d.cathode, 0.0);
        }
        for s in &switches {
            stamp2(&mut jacobian, s.a, s.b, 0.0);
        }
        jacobian.zero();
        jacobian.prepare();
        System {
            unknowns,
            row_kinds,
            dynamic_rows,
            g_packed: g.packed(),
            c_packed: c.packed(),
            g,
            c,
            sources,
            diodes,
            switches,
            probes,
            held_voltages,
            held_currents,
            linear,
            jacobian,
            node_count,
        }
    }

    pub fn size(&self) -> usize {
        self.unknowns.len()
    }

    /// The constant conductances: i(x) = G x plus the nonlinear currents.
    pub fn g(&self) -> &Matrix {
        &self.g
    }

    /// The constant capacitances and inductances: q(x) = C x plus the nonlinear charges.
    pub fn c(&self) -> &Matrix {
        &self.c
    }

    /// `g` and `c` packed, as the step matrices of a linear circuit combine them
    /// (`Matrix::factor_combination`).
    pub fn packed_g_c(&self) -> (&Packed, &Packed) {
        (&self.g_packed, &self.c_packed)
    }

    /// The source vector b(t), every waveform scaled by `factor` (1 except during source stepping).
    pub fn sources_into(&self, t: f64, factor: f64, b: &mut [f64]) {
        b.fill(0.0);
        for s in &self.sources {
            let v = s.waveform.value(t) * factor;
            for &(r, sign) in &s.rows {
                b[r] += sign * v;
            }
        }
    }

    /// Each independent source's waveform with the rows it drives and the sign on each.
    pub fn source_stamps(&self) -> impl Iterator<Item = (&Waveform, &[(usize, f64)])> {
        self.sources
            .iter()
            .map(|s| (&s.waveform, s.rows.as_slice()))
    }

    /// q(x): the linear charges and fluxes plus the diodes' stored charge.
    pub fn charge_into(&self, x: &[f64], q: &mut [f64]) {
        q.fill(0.0);
        self.c_packed.mul_vec_add(x, q);
        for d in &self.diodes {
            if d.model.junction_capacitance == 0.0 && d.model.transit_time == 0.0 {
                continue;
            }
            let v = volt(x, d.anode) - volt(x, d.cathode);
            let p = devices::junction(&d.model, v);
            if let Some(a) = d.anode {
                q[a] += p.charge;
            }
            if let Some(k) = d.cathode {
                q[k] -= p.charge;
            }
        }
    }

    /// i(x, t) into `out`, and when `jac` is given, adds d i / d x to it (the nonlinear and
    /// time-varying part; the caller adds the constant G).
    pub fn current_into(&self, x: &[f64], t: f64, out: &mut [f64], mut jac: Option<&mut Matrix>) {
        out.fill(0.0);
        self.g_packed.mul_vec_add(x, out);
        for d in &self.diodes {
            let v = volt(x, d.anode) - volt(x, d.cathode);
            let p = devices::junction(&d.model, v);
            if let Some(a) = d.anode {
                out[a] += p.current;
            }
            if let Some(k) = d.cathode {
                out[k] -= p.current;
            }
            if let Some(j) = jac.as_deref_mut() {
                stamp2(j, d.anode, d.cathode, p.conductance);
            }
        }
        for s in &self.switches {
            let gs = s.model.conductance(t);
            let i = gs * (volt(x, s.a) - volt(x, s.b));
            if let Some(a) = s.a {
                out[a] += i;
            }
            if let Some(b) = s.b {
                out[b] -= i;
            }
            if let Some(j) = jac.as_deref_mut() {
                stamp2(j, s.a, s.b, gs);
            }
        }
    }

    /// The magnitude of the terms that make up each row of alpha q(x) + i(x, t): the sum of |G_rj x_j|,
    /// |alpha C_rj x_j| and the nonlinear contributions, without cancellation. A residual smaller than a
    /// few rounding errors of this is as converged as the arithmetic allows.
    pub fn term_magnitudes(&self, x: &[f64], t: f64, alpha: f64, out: &mut [f64]) {
        out.fill(0.0);
        self.g_packed.abs_terms_add(x, 1.0, out);
        if alpha != 0.0 {
            self.c_packed.abs_terms_add(x, alpha, out);
        }
        for d in &self.diodes {
            let v = volt(x, d.anode) - volt(x, d.cathode);
            let p = devices::junction(&d.model, v);
            let m = p.current.abs() + (alpha * p.charge).abs();
            for r in [d.anode, d.cathode].into_iter().flatten() {
                out[r] += m;
            }
        }
        for s in &self.switches {
            let m = (s.model.conductance(t) * (volt(x, s.a) - volt(x, s.b))).abs();
            for r in [s.a, s.b].into_iter().flatten() {
                out[r] += m;
            }
        }
    }

    /// Adds alpha * d q / d x of the nonlinear charges to `jac`.
    pub fn add_charge_jacobian(&self, x: &[f64], alpha: f64, jac: &mut Matrix) {
        for d in &self.diodes {
            if d.model.junction_capacitance == 0.0 && d.model.transit_time == 0.0 {
                continue;
            }
            let v = volt(x, d.anode) - volt(x, d.cathode);
            let p = devices::junction(&d.model, v);
            stamp2(jac, d.anode, d.cathode, alpha * p.capacitance);
        }
    }

    /// The largest damping factor in (0, 1] that keeps every junction's voltage step within the limit.
    pub fn junction_damping(&self, x: &[f64], dx: &[f64]) -> f64 {
        let mut lambda: f64 = 1.0;
        for d in &self.diodes {
            let old = volt(x, d.anode) - volt(x, d.cathode);
            let step = volt(dx, d.anode) - volt(dx, d.cathode);
            if step == 0.0 {
                continue;
            }
            let new = old + step;
            let lim = devices::limit_junction_voltage(&d.model, old, new);
            if lim != new {
                lambda = lambda.min(((lim - old) / step).clamp(1e-3, 1.0));
            }
        }
        lambda
    }

    /// Labels of the watched signals, in file order.
    pub fn probe_labels(&self) -> Vec<String> {
        self.probes.iter().map(|(l, _)| l.clone()).collect()
    }

    /// The watched signals at one accepted point.
    pub fn probe_values(&self, x: &[f64], t: f64) -> Vec<f64> {
        self.probes
            .iter()
            .map(|(_, p)| match *p {
                ProbeExpr::Unknown(i) => x[i],
                ProbeExpr::Conductance { a, b, g } => g * (volt(x, a) - volt(x, b)),
                ProbeExpr::Source { index, sign } => sign * self.sources[index].waveform.value(t),
                ProbeExpr::Transconductance { c, g } => g * (volt(x, c[0]) - volt(x, c[1])),
                ProbeExpr::CurrentGain { unknown, gain } => gain * x[unknown],
                ProbeExpr::Diode { index } => {
                    let d = &self.diodes[index];
                    devices::junction(&d.model, volt(x, d.anode) - volt(x, d.cathode)).current
                }
                ProbeExpr::Switch { index } => {
                    let s = &self.switches[index];
                    s.model.conductance(t) * (volt(x, s.a) - volt(x, s.b))
                }
            })
            .collect()
    }

    /// The index of the unknown a probe reads directly, when it reads one.
    pub fn probe_unknown(&self, label: &str) -> Option<usize> {
        self.probes
            .iter()
            .find(|(l, _)| l == label)
            .and_then(|(_, p)| match p {
                ProbeExpr::Unknown(i) => Some(*i),
                _ => None,
            })
    }

    /// The name a person would use for unknown `i` (an internal node is named by its element).
    pub fn describe_unknown(&self, i: usize) -> String {
        let u = &self.unknowns[i];
        match u.kind {
            UnknownKind::Voltage => match u.name.split_once('#') {
                Some((el, what)) => format!("the {what} node of element {el}"),
                None => format!("node {}", u.name),
            },
            UnknownKind::Current => format!(
                "the current of element {}",
                u.name.trim_end_matches(".current")
            ),
        }
    }
}

fn source_index(circuit: &Circuit, name: &str) -> usize {
    circuit
        .elements
        .iter()
        .filter(|e| {
            matches!(
                e.kind,
                ElementKind::VoltageSource { .. } | ElementKind::CurrentSource { .. }
            )
        })
        .position(|e| e.name == name)
        .expect("source stamped")
}

/// Marks capacitors that close a loop of voltage-fixing elements (sources and held capacitors) as not
/// held: their voltage at t = 0 follows from the loop.
fn mark_loop_capacitors(
    circuit: &Circuit,
    node_index: &HashMap<String, usize>,
    ground: &str,
    held: &mut [HeldVoltage],
) {
    let n = node_index.len() + 1;
    let mut parent: Vec<usize> = (0..n).collect();
    fn find(p: &mut [usize], mut a: usize) -> usize {
        while p[a] != a {
            p[a] = p[p[a]];
            a = p[a];
        }
        a
    }
    let id = |s: &str| if s == ground { 0 } else { node_index[s] + 1 };
    let terminals: HashMap<&str, &[String; 2]> = circuit
        .elements
        .iter()
        .filter_map(|e| e.kind.terminals().map(|t| (e.name.as_str(), t)))
        .collect();
    for e in &circuit.elements {
        if let ElementKind::VoltageSource { nodes, .. }
        | ElementKind::Vcvs { nodes, .. }
        | ElementKind::Ccvs { nodes, .. } = &e.kind
        {
            let (ra, rb) = (
                find(&mut parent, id(&nodes[0])),
                find(&mut parent, id(&nodes[1])),
            );
            parent[ra] = rb;
        }
    }
    for h in held.iter_mut() {
        let nodes = terminals[h.element.as_str()];
        let (ra, rb) = (
            find(&mut parent, id(&nodes[0])),
            find(&mut parent, id(&nodes[1])),
        );
        if ra == rb {
            h.held = false;
        } else {
            parent[ra] = rb;
        }
    }
}
