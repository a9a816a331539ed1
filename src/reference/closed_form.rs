//! Textbook formulas a user names in the circuit file with the elements they read.
//!
//! Each formula describes one small linear circuit exactly, and `ClosedForm::new` refuses a circuit it
//! does not describe: the named elements must have the right kinds and connections, the circuit must hold
//! nothing else, and the source must have the shape the formula solves. Every node voltage and every
//! element current of that circuit can be watched.
//!
//! - `rc_step`, `rc_ramp`, `rc_sine`: a voltage source from node `a` to ground, a resistor from `a` to
//!   `b`, a capacitor from `b` to ground; tau = R C.
//! - `rl_step`, `rl_ramp`, `rl_sine`: the same with an inductor from `b` to ground; tau = L / R.
//! - `series_rlc_step`: a voltage source from `a` to ground, a resistor `a`-`b`, an inductor `b`-`c`, a
//!   capacitor `c`-ground.
//! - `parallel_rlc_step`: a current source, resistor, inductor and capacitor, all between `top` and ground.
//! - `lc_release`: an inductor and a capacitor between `top` and ground, released from initial conditions.
//!
//! The first-order circuits solve tau x' + x = u(t) exactly for inputs that are straight lines or
//! sinusoids (Nilsson & Riedel, *Electric Circuits*, ch. 7: x = x_forced + (x0 - x_forced(0)) e^(-t/tau)).
//! The second-order ones solve y'' + 2 alpha y' + w0^2 y = w0^2 u for piecewise-constant u from y(0),
//! y'(0) (ch. 8). With d = alpha^2 - w0^2 the free response is
//! e^(-alpha s) [z0 C(s) + (z0' + alpha z0) S(s)], where C = cos(wd s), S = sin(wd s) / wd when d < 0
//! (underdamped, wd^2 = -d), C = 1, S = s when d = 0 (critically damped) and C = cosh(beta s),
//! S = sinh(beta s) / beta when d > 0 (overdamped, beta^2 = d). These are the textbook forms of the three
//! regimes, and S(s) is evaluated without dividing a difference by a small beta, so the evaluation is
//! accurate to rounding on both sides of critical damping and needs no tolerance band around it.
//!
//! A step at `at` is left-continuous like the waveform itself: the state is carried from the first piece
//! to `at` and the formula restarts there with the new input.

use super::ReferenceError;
use crate::circuit::{Circuit, Element, ElementKind, Probe, Waveform};
use crate::settings::{Settings, Start};
use crate::units::shortest;
use std::f64::consts::PI;

type Formula = Box<dyn Fn(f64) -> Vec<f64> + Send + Sync>;

/// The formulas this module knows, for messages.
const FORMULAS: [&str; 9] = [
    "rc_step",
    "rc_ramp",
    "rc_sine",
    "rl_step",
    "rl_ramp",
    "rl_sine",
    "series_rlc_step",
    "parallel_rlc_step",
    "lc_release",
];

/// A closed-form solution of the watched signals.
pub struct ClosedForm {
    labels: Vec<String>,
    eval: Formula,
}

impl ClosedForm {
    pub fn new(
        circuit: &Circuit,
        settings: &Settings,
        formula: &str,
        roles: &[(String, String)],
    ) -> Result<ClosedForm, ReferenceError> {
        let cx = Cx {
            circuit,
            formula,
            roles,
            ground: circuit.ground.as_str(),
            start: settings.start,
        };
        let model = match formula {
            "rc_step" => first_order(&cx, Storage::Capacitor, Shape::Step),
            "rc_ramp" => first_order(&cx, Storage::Capacitor, Shape::Ramp),
            "rc_sine" => first_order(&cx, Storage::Capacitor, Shape::Sine),
            "rl_step" => first_order(&cx, Storage::Inductor, Shape::Step),
            "rl_ramp" => first_order(&cx, Storage::Inductor, Shape::Ramp),
            "rl_sine" => first_order(&cx, Storage::Inductor, Shape::Sine),
            "series_rlc_step" => series_rlc(&cx),
            "parallel_rlc_step" => parallel_rlc(&cx),
            "lc_release" => lc_release(&cx),
            _ => Err(cx.err(format!(
                "there is no closed form of that name; use one of: {}, or use reference: exact",
                FORMULAS.join(", ")
            ))),
        }?;
        let mut picks = Vec::with_capacity(circuit.watch.len());
        for probe in &circuit.watch {
            let label = probe.label();
            match model.labels.iter().position(|l| *l == label) {
                Some(k) => picks.push(k),
                None => {
                    return Err(cx.err(format!(
                        "the watched signal {label} is not given by this formula (it gives {}); \
                         watch one of those, or use reference: exact",
                        model.labels.join(", ")
                    )))
                }
            }
        }
        let all = model.eval;
        Ok(ClosedForm {
            labels: circuit.watch.iter().map(Probe::label).collect(),
            eval: Box::new(move |t| {
                let values = all(t);
                picks
                    .iter()
                    .map(|&k| values.get(k).copied().unwrap_or(f64::NAN))
                    .collect()
            }),
        })
    }

    pub fn labels(&self) -> Vec<String> {
        self.labels.clone()
    }

    pub fn signals(&self, times: &[f64]) -> Vec<Vec<f64>> {
        let mut out = vec![Vec::with_capacity(times.len()); self.labels.len()];
        for &t in times {
            for (k, v) in (self.eval)(t).into_iter().enumerate() {
                out[k].push(v);
            }
        }
        out
    }
}

/// Every signal a formula can give, with its label, before the watch list picks from them.
struct Model {
    labels: Vec<String>,
    eval: Formula,
}

#[derive(Clone, Copy, PartialEq, Eq)]
enum Storage {
    Capacitor,
    Inductor,
}

/// The source shape a formula solves.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Shape {
    /// A constant, or an ideal step (rise 0) at any time.
    Step,
    /// A straight line over the whole run.
    Ramp,
    /// A sine from t = 0 with no delay and no decay.
    Sine,
}

fn current(e: &Element) -> String {
    Probe::Current(e.name.clone()).label()
}

fn article(kind: &str) -> &'static str {
    match kind.chars().next() {
        Some('a' | 'e' | 'i' | 'o' | 'u') => "an",
        _ => "a",
    }
}

fn waveform_name(w: &Waveform) -> &'static str {
    match w {
        Waveform::Constant(_) => "constant",
        Waveform::Step { .. } => "step",
        Waveform::Pulse { .. } => "pulse",
        Waveform::Sine { .. } => "sine",
        Waveform::PiecewiseLinear(_) => "piecewise_linear",
    }
}

/// What one formula checks against: the circuit, the roles given and how the run starts.
struct Cx<'a> {
    circuit: &'a Circuit,
    formula: &'a str,
    roles: &'a [(String, String)],
    ground: &'a str,
    start: Start,
}

/// A role a formula needs: its name, the kind of element and where it sits.
struct RoleSpec {
    role: &'static str,
    kind: &'static str,
    place: &'static str,
}

impl<'a> Cx<'a> {
    fn err(&self, message: impl Into<String>) -> ReferenceError {
        ReferenceError::ClosedForm {
            formula: self.formula.to_string(),
            message: message.into(),
        }
    }

    /// The roles given must be exactly `wanted`, each once.
    fn check_roles(&self, wanted: &[RoleSpec]) -> Result<(), ReferenceError> {
        let list = wanted.iter().map(|r| r.role).collect::<Vec<_>>().join(", ");
        for (k, (role, name)) in self.roles.iter().enumerate() {
            if !wanted.iter().any(|w| w.role == role) {
                return Err(self.err(format!(
                    "'{role}' (naming {name}) is not one of its roles ({list}); remove it or \
                     correct its spelling"
                )));
            }
            if self.roles[..k].iter().any(|(r, _)| r == role) {
                return Err(self.err(format!(
                    "role '{role}' is given more than once; give it once"
                )));
            }
        }
        for w in wanted {
            if !self.roles.iter().any(|(r, _)| r == w.role) {
                return Err(self.err(format!(
                    "role '{}' is missing; add `{}: NAME` naming the {} {}",
                    w.role, w.role, w.kind, w.place
                )));
            }
        }
        Ok(())
    }

    /// The element a role names, which must exist and be of `kind`.
    fn lookup(&self, role: &str, kind: &str, place: &str) -> Result<&'a Element, ReferenceError> {
        let name = self
            .roles
            .iter()
            .find(|(r, _)| r == role)
            .map(|(_, n)| n.as_str())
            .unwrap_or("");
        let Some(e) = self.circuit.element(name) else {
            return Err(self.err(format!(
                "role '{role}' names {name}, which is not an element of this circuit; name the \
                 {kind} {place}"
            )));
        };
        if e.kind.kind_name() != kind {
            return Err(self.wrong_kind(role, e, kind, place));
        }
        Ok(e)
    }

    fn wrong_kind(&self, role: &str, e: &Element, kind: &str, place: &str) -> ReferenceError {
        let has = e.kind.kind_name();
        self.err(format!(
            "role '{role}' names {}, which is {} {has}; name {} {kind} {place}",
            e.name,
            article(has),
            article(kind)
        ))
    }

    fn positive(&self, e: &Element, what: &str, x: f64) -> Result<f64, ReferenceError> {
        if x.is_finite() && x > 0.0 {
            Ok(x)
        } else {
            Err(self.err(format!(
                "{} {} has {what} {}; the formula needs a positive, finite {what}",
                e.kind.kind_name(),
                e.name,
                shortest(x)
            )))
        }
    }

    fn finite(&self, e: &Element, what: &str, x: f64) -> Result<f64, ReferenceError> {
        if x.is_finite() {
            Ok(x)
        } else {
            Err(self.err(format!(
                "{} {} has {what} {}; give it a finite value",
                e.kind.kind_name(),
                e.name,
                shortest(x)
            )))
        }
    }

    fn connects(&self, role: &str, e: &Element, nodes: &[String; 2], need: &str) -> ReferenceError {
        self.err(format!(
            "role '{role}' names {}, which connects {} and {}; {need}",
            e.name, nodes[0], nodes[1]
        ))
    }

    /// The sign of the element's current relative to the direction p -> q, when it sits between p and q.
    fn across(
        &self,
        role: &str,
        e: &Element,
        nodes: &[String; 2],
        p: &str,
        q: &str,
    ) -> Result<f64, ReferenceError> {
        if nodes[0] == p && nodes[1] == q {
            Ok(1.0)
        } else if nodes[0] == q && nodes[1] == p {
            Ok(-1.0)
        } else {
            let (p, q) = (self.node_words(p), self.node_words(q));
            Err(self.connects(
                role,
                e,
                nodes,
                &format!(
                    "name {} {} between {p} and {q} (either order)",
                    article(e.kind.kind_name()),
                    e.kind.kind_name()
                ),
            ))
        }
    }

    fn node_words(&self, n: &str) -> String {
        if n == self.ground {
            format!("ground ({n})")
        } else {
            format!("node {n}")
        }
    }

    /// The element's far node when one end is `from` and the other is none of `taken`, with the sign of
    /// its current relative to the direction from -> far.
    fn leg(
        &self,
        role: &str,
        e: &Element,
        nodes: &[String; 2],
        from: &str,
        taken: &[&str],
        need: &str,
    ) -> Result<(String, f64), ReferenceError> {
        let free = |n: &String| n != from && !taken.contains(&n.as_str());
        if nodes[0] == from && free(&nodes[1]) {
            Ok((nodes[1].clone(), 1.0))
        } else if nodes[1] == from && free(&nodes[0]) {
            Ok((nodes[0].clone(), -1.0))
        } else {
            Err(self.connects(role, e, nodes, need))
        }
    }

    /// The voltage source of `role`, which must have its first node off ground and its second at ground.
    fn voltage_source(
        &self,
        role: &str,
    ) -> Result<(&'a Element, String, Waveform), ReferenceError> {
        let place = "from the input node (its first, positive node) to ground (its second node)";
        let e = self.lookup(role, "voltage_source", place)?;
        let ElementKind::VoltageSource { nodes, waveform } = &e.kind else {
            return Err(self.wrong_kind(role, e, "voltage_source", place));
        };
        let g = self.ground;
        if nodes[1] == g && nodes[0] != g {
            Ok((e, nodes[0].clone(), waveform.clone()))
        } else if nodes[0] == g && nodes[1] != g {
            Err(self.err(format!(
                "role '{role}' names {}, whose nodes are [{}, {}]: the formula needs its first \
                 (positive) node at the input and its second at ground {g}; write nodes: [{}, {}] \
                 and negate the waveform's values to keep the same circuit",
                e.name, nodes[0], nodes[1], nodes[1], nodes[0]
            )))
        } else {
            Err(self.connects(
                role,
                e,
                nodes,
                &format!("name a voltage_source {place}, ground being {g}"),
            ))
        }
    }

    /// An element of `kind` from some node `top` to ground (either order): the element, `top`, and the
    /// sign of its current relative to top -> ground.
    fn grounded(
        &self,
        role: &str,
        kind: &str,
        place: &str,
    ) -> Result<(&'a Element, &'a [String; 2], String, f64), ReferenceError> {
        let e = self.lookup(role, kind, place)?;
        let Some(nodes) = e.kind.terminals() else {
            return Err(self.wrong_kind(role, e, kind, place));
        };
        let g = self.ground;
        if nodes[1] == g && nodes[0] != g {
            Ok((e, nodes, nodes[0].clone(), 1.0))
        } else if nodes[0] == g && nodes[1] != g {
            Ok((e, nodes, nodes[1].clone(), -1.0))
        } else {
            Err(self.connects(
                role,
                e,
                nodes,
                &format!("name {} {kind} {place}, ground being {g}", article(kind)),
            ))
        }
    }

    fn resistor(
        &self,
        role: &str,
        place: &str,
    ) -> Result<(&'a Element, &'a [String; 2], f64), ReferenceError> {
        let e = self.lookup(role, "resistor", place)?;
        match &e.kind {
            ElementKind::Resistor { nodes, resistance } => {
                Ok((e, nodes, self.positive(e, "resistance", *resistance)?))
            }
            _ => Err(self.wrong_kind(role, e, "resistor", place)),
        }
    }

    /// A capacitor: the element, its nodes, its capacitance and its initial voltage (0 when not given).
    fn capacitor(
        &self,
        role: &str,
        place: &str,
    ) -> Result<(&'a Element, &'a [String; 2], f64, f64), ReferenceError> {
        let e = self.lookup(role, "capacitor", place)?;
        match &e.kind {
            ElementKind::Capacitor {
                nodes,
                capacitance,
                initial_voltage,
            } => Ok((
                e,
                nodes,
                self.positive(e, "capacitance", *capacitance)?,
                self.finite(e, "initial_voltage", initial_voltage.unwrap_or(0.0))?,
            )),
            _ => Err(self.wrong_kind(role, e, "capacitor", place)),
        }
    }

    /// An inductor: the element, its nodes, its inductance and its initial current (0 when not given).
    fn inductor(
        &self,
        role: &str,
        place: &str,
    ) -> Result<(&'a Element, &'a [String; 2], f64, f64), ReferenceError> {
        let e = self.lookup(role, "inductor", place)?;
        match &e.kind {
            ElementKind::Inductor {
                nodes,
                inductance,
                initial_current,
            } => Ok((
                e,
                nodes,
                self.positive(e, "inductance", *inductance)?,
                self.finite(e, "initial_current", initial_current.unwrap_or(0.0))?,
            )),
            _ => Err(self.wrong_kind(role, e, "inductor", place)),
        }
    }

    /// The circuit must hold the role elements and nothing else.
    fn nothing_else(&self, wanted: &[RoleSpec]) -> Result<(), ReferenceError> {
        for e in &self.circuit.elements {
            if !self.roles.iter().any(|(_, n)| *n == e.name) {
                let kind = e.kind.kind_name();
                let parts = wanted
                    .iter()
                    .map(|w| format!("{} {}", article(w.kind), w.kind))
                    .collect::<Vec<_>>();
                let parts = match parts.split_last() {
                    Some((last, rest)) if !rest.is_empty() => {
                        format!("{} and {last}", rest.join(", "))
                    }
                    _ => parts.join(""),
                };
                return Err(self.err(format!(
                    "element {} ({} {kind}) is not part of the circuit this formula describes \
                     ({parts}, nothing else); remove {}, or use reference: exact for this circuit",
                    e.name,
                    article(kind),
                    e.name
                )));
            }
        }
        Ok(())
    }

    /// The source's value over the run, as pieces the formulas solve exactly.
    fn pieces(&self, e: &Element, w: &Waveform, shape: Shape) -> Result<Pieces, ReferenceError> {
        let stop = self.circuit.run.stop;
        let name = &e.name;
        let found = waveform_name(w);
        let p = match (shape, w) {
            (Shape::Step, Waveform::Constant(v)) => Pieces::line(*v, 0.0),
            // an ideal step: left-continuous, `from` up to and including `at`, `to` after
            (Shape::Step, &Waveform::Step {
                from,
                to,
                at,
                rise: 0.0,
            }) => {
                if at < 0.0 {
                    Pieces::line(to, 0.0)
                } else {
                    Pieces::line(from, 0.0).then(at, Input::constant(to))
                }
            }
            (Shape::Step, Waveform::Step { rise, .. }) => {
                return Err(self.err(format!(
                    "source {name}'s step has rise {}; this formula needs an ideal step (rise: 0, \
                     any from, to and at) or a constant; set rise: 0, or use reference: exact for a \
                     finite rise",
                    shortest(*rise)
                )))
            }
            (Shape::Step, _) => {
                return Err(self.err(format!(
                    "source {name} has a {found} waveform; this formula needs a constant or a step \
                     with rise: 0 (any from, to and at); give the source one of those, or use \
                     reference: exact"
                )))
            }
            (Shape::Ramp, Waveform::PiecewiseLinear(pts)) => match pts[..] {
                [(t0, v0), (t1, v1)] if t0 == 0.0 && t1 >= stop && t1 > 0.0 => {
                    Pieces::line(v0, (v1 - v0) / t1).then(t1, Input::constant(v1))
                }
                [(t0, _), (t1, _)] => {
                    return Err(self.err(format!(
                        "source {name}'s piecewise_linear runs from t = {} to t = {}; this formula \
                         needs a straight line over the whole run: the first point at t = 0 and \
                         the last at or after stop = {}; move the points, or use reference: exact",
                        shortest(t0),
                        shortest(t1),
                        shortest(stop)
                    )))
                }
                _ => {
                    return Err(self.err(format!(
                        "source {name}'s piecewise_linear has {} points; this formula needs \
                         exactly two (a straight line over the whole run, the first at t = 0 and \
                         the last at or after stop = {}); use reference: exact for other shapes",
                        pts.len(),
                        shortest(stop)
                    )))
                }
            },
            (Shape::Ramp, &Waveform::Step { from, to, at, rise })
                if at == 0.0 && rise >= stop && rise > 0.0 =>
            {
                Pieces::line(from, (to - from) / rise).then(rise, Input::constant(to))
            }
            (Shape::Ramp, Waveform::Step { at, rise, .. }) => {
                return Err(self.err(format!(
                    "source {name}'s step has at = {} and rise = {}; as a ramp this formula needs \
                     at: 0 and a rise of at least stop = {} (a straight line over the whole run); \
                     change them, or use reference: exact",
                    shortest(*at),
                    shortest(*rise),
                    shortest(stop)
                )))
            }
            (Shape::Ramp, _) => {
                return Err(self.err(format!(
                    "source {name} has a {found} waveform; this formula needs a straight line over \
                     the whole run: a piecewise_linear with two points (the first at t = 0, the \
                     last at or after stop = {}) or a step with at: 0 and rise at least stop; give \
                     the source one of those, or use reference: exact",
                    shortest(stop)
                )))
            }
            (
                Shape::Sine,
                &Waveform::Sine {
                    offset,
                    amplitude,
                    frequency,
                    phase_deg,
                    delay,
                    decay,
                },
            ) if delay == 0.0 && decay == 0.0 => Pieces {
                first: Input::Sine {
                    offset,
                    amplitude,
                    // the same rounding as Waveform::value
                    omega: 2.0 * PI * frequency,
                    phase: phase_deg * PI / 180.0,
                },
                later: Vec::new(),
            },
            (Shape::Sine, Waveform::Sine { delay, decay, .. }) => {
                return Err(self.err(format!(
                    "source {name}'s sine has delay {} and decay {}; this formula needs delay: 0 \
                     and decay: 0 (a sine from t = 0 with constant amplitude); remove them, or use \
                     reference: exact",
                    shortest(*delay),
                    shortest(*decay)
                )))
            }
            (Shape::Sine, _) => {
                return Err(self.err(format!(
                    "source {name} has a {found} waveform; this formula needs a sine with delay: 0 \
                     and decay: 0 (any offset, amplitude, frequency and phase_deg); give the \
                     source one, or use reference: exact"
                )))
            }
        };
        if p.all_finite() {
            Ok(p)
        } else {
            Err(self.err(format!(
                "source {name}'s waveform has a value that is not finite; give it finite values"
            )))
        }
    }

    fn step_levels(&self, e: &Element, w: &Waveform, sign: f64) -> Result<Levels, ReferenceError> {
        let p = self.pieces(e, w, Shape::Step)?;
        let level = |i: &Input| match *i {
            Input::Line { value, .. } => sign * value,
            // the step shape only makes lines
            Input::Sine { .. } => f64::NAN,
        };
        Ok(Levels {
            first: level(&p.first),
            later: p.later.iter().map(|q| (q.start, level(&q.input))).collect(),
        })
    }
}

// ---------------------------------------------------------------------------------------------------
// First order: tau x' + x = u(t), u a line or a sinusoid on each piece.

#[derive(Debug, Clone, Copy)]
enum Input {
    /// u = value + slope (t - start of the piece).
    Line { value: f64, slope: f64 },
    /// u = offset + amplitude sin(omega t + phase), t absolute.
    Sine {
        offset: f64,
        amplitude: f64,
        omega: f64,
        phase: f64,
    },
}

impl Input {
    fn constant(v: f64) -> Input {
        Input::Line {
            value: v,
            slope: 0.0,
        }
    }

    fn scaled(self, k: f64) -> Input {
        match self {
            Input::Line { value, slope } => Input::Line {
                value: k * value,
                slope: k * slope,
            },
            Input::Sine {
                offset,
                amplitude,
                omega,
                phase,
            } => Input::Sine {
                offset: k * offset,
                amplitude: k * amplitude,
                omega,
                phase,
            },
        }
    }

    fn finite(&self) -> bool {
        match *self {
            Input::Line { value, slope } => value.is_finite() && slope.is_finite(),
            Input::Sine {
                offset,
                amplitude,
                omega,
                phase,
            } => [offset, amplitude, omega, phase]
                .iter()
                .all(|x| x.is_finite()),
        }
    }
}

#[derive(Debug, Clone, Copy)]
struct Piece {
    start: f64,
    input: Input,
}

/// The input from t = 0 (and before), then each later piece from its start (exclusive) on.
#[derive(Debug, Clone)]
struct Pieces {
    first: Input,
    later: Vec<Piece>,
}

impl Pieces {
    fn line(value: f64, slope: f64) -> Pieces {
        Pieces {
            first: Input::Line { value, slope },
            later: Vec::new(),
        }
    }

    fn then(mut self, start: f64, input: Input) -> Pieces {
        self.later.push(Piece { start, input });
        self
    }

    fn scaled(self, k: f64) -> Pieces {
        Pieces {
            first: self.first.scaled(k),
            later: self
                .later
                .into_iter()
                .map(|p| Piece {
                    start: p.start,
                    input: p.input.scaled(k),
                })
                .collect(),
        }
    }

    fn all_finite(&self) -> bool {
        self.first.finite()
            && self
                .later
                .iter()
                .all(|p| p.start.is_finite() && p.input.finite())
    }
}

/// Which piece holds `t`: piece k >= 1 covers (start_k, start_k+1], the first everything up to start_1.
fn piece_index(starts: impl Iterator<Item = f64>, t: f64) -> usize {
    starts.take_while(|&s| s < t).count()
}

/// tau x' + x = u(t) from x(t0) = x0 on one piece: (x, x') at t.
fn first_order_at(tau: f64, start: f64, input: Input, x0: f64, t: f64) -> (f64, f64) {
    let s = t - start;
    let decay = (-s / tau).exp();
    let rise = -(-s / tau).exp_m1(); // 1 - decay, accurate for small s
    match input {
        Input::Line { value, slope } => {
            // forced response value + slope (s - tau); Nilsson & Riedel ch. 7 for slope 0
            let x = x0 + (value - x0) * rise + slope * (s - tau * rise);
            let dx = (value - x0) * decay / tau + slope * rise;
            (x, dx)
        }
        Input::Sine {
            offset,
            amplitude,
            omega,
            phase,
        } => {
            let (xp, dxp) = sine_forced(tau, offset, amplitude, omega, phase, t);
            let (xp0, _) = sine_forced(tau, offset, amplitude, omega, phase, start);
            let gap = x0 - xp0;
            (xp + gap * decay, dxp - gap * decay / tau)
        }
    }
}

/// The sinusoidal steady state of tau x' + x = offset + amplitude sin(omega t + phase) and its
/// derivative: Im(amplitude e^(j(omega t + phase)) / (1 + j omega tau)) plus the offset.
fn sine_forced(
    tau: f64,
    offset: f64,
    amplitude: f64,
    omega: f64,
    phase: f64,
    t: f64,
) -> (f64, f64) {
    let k = omega * tau;
    let den = 1.0 + k * k;
    let (sin, cos) = (omega * t + phase).sin_cos();
    (
        offset + amplitude * (sin - k * cos) / den,
        amplitude * omega * (cos + k * sin) / den,
    )
}

/// tau x' + x = u(t) over the whole run.
struct FirstOrder {
    tau: f64,
    first: Input,
    x0: f64,
    /// Each later piece with the state at its start.
    later: Vec<(Piece, f64)>,
}

impl FirstOrder {
    fn new(tau: f64, x0: f64, pieces: Pieces) -> FirstOrder {
        let mut later = Vec::with_capacity(pieces.later.len());
        let (mut start, mut input, mut x) = (0.0, pieces.first, x0);
        for p in pieces.later {
            x = first_order_at(tau, start, input, x, p.start).0;
            later.push((p, x));
            (start, input) = (p.start, p.input);
        }
        FirstOrder {
            tau,
            first: pieces.first,
            x0,
            later,
        }
    }

    /// (x, x') at t.
    fn at(&self, t: f64) -> (f64, f64) {
        let k = piece_index(self.later.iter().map(|(p, _)| p.start), t);
        match k.checked_sub(1).and_then(|k| self.later.get(k)) {
            Some((p, x)) => first_order_at(self.tau, p.start, p.input, *x, t),
            None => first_order_at(self.tau, 0.0, self.first, self.x0, t),
        }
    }
}

// ---------------------------------------------------------------------------------------------------
// Second order: y'' + 2 alpha y' + w0^2 y = w0^2 u, u constant on each piece.

/// The input level from t = 0 (and before), then each later (start, level).
#[derive(Debug, Clone)]
struct Levels {
    first: f64,
    later: Vec<(f64, f64)>,
}

struct SecondOrder {
    alpha: f64,
    w0sq: f64,
    /// alpha^2 - w0^2, computed as (alpha - w0)(alpha + w0).
    d: f64,
    first: f64,
    y0: (f64, f64),
    /// Each later (start, level) with (y, y') at its start.
    later: Vec<(f64, f64, (f64, f64))>,
}

impl SecondOrder {
    fn new(alpha: f64, w0sq: f64, y0: f64, dy0: f64, levels: Levels) -> SecondOrder {
        let w0 = w0sq.sqrt();
        let mut s = SecondOrder {
            alpha,
            w0sq,
            d: (alpha - w0) * (alpha + w0),
            first: levels.first,
            y0: (y0, dy0),
            later: Vec::with_capacity(levels.later.len()),
        };
        let (mut start, mut level, mut state) = (0.0, levels.first, (y0, dy0));
        for (t, u) in levels.later {
            let (y, dy, _) = s.piece_at(start, level, state, t);
            state = (y, dy);
            s.later.push((t, u, state));
            (start, level) = (t, u);
        }
        s
    }

    /// (y, y', y'') at t.
    fn at(&self, t: f64) -> (f64, f64, f64) {
        let k = piece_index(self.later.iter().map(|p| p.0), t);
        match k.checked_sub(1).and_then(|k| self.later.get(k)) {
            Some(&(start, level, state)) => self.piece_at(start, level, state, t),
            None => self.piece_at(0.0, self.first, self.y0, t),
        }
    }

    /// From (y, y') at `start` with the input at `level`: z = y - level solves the free equation.
    fn piece_at(&self, start: f64, level: f64, state: (f64, f64), t: f64) -> (f64, f64, f64) {
        let (a, w0sq, d) = (self.alpha, self.w0sq, self.d);
        let (z0, p) = (state.0 - level, state.1);
        let (ec, es) = damped(a, w0sq, d, t - start);
        let q = a * p + w0sq * z0;
        let z = ec * z0 + es * (p + a * z0);
        let dz = ec * p - es * q;
        let ddz = -ec * (a * p + q) + es * (a * q + d * p);
        (level + z, dz, ddz)
    }
}

/// (e^(-alpha s) C(s), e^(-alpha s) S(s)) for the three regimes (see the module notes).
fn damped(alpha: f64, w0sq: f64, d: f64, s: f64) -> (f64, f64) {
    if d < 0.0 {
        let wd = (-d).sqrt();
        let e = (-alpha * s).exp();
        let (sin, cos) = (wd * s).sin_cos();
        (e * cos, e * sin / wd)
    } else if d > 0.0 {
        let beta = d.sqrt();
        if (beta * s).abs() < 1.0 {
            let e = (-alpha * s).exp();
            (e * (beta * s).cosh(), e * (beta * s).sinh() / beta)
        } else {
            // separate exponentials so that e^(-alpha s) cosh(beta s) cannot overflow to inf * 0;
            // the slow root without cancellation: s1 s2 = w0^2
            let s1 = -w0sq / (alpha + beta);
            let s2 = -(alpha + beta);
            let (e1, e2) = ((s1 * s).exp(), (s2 * s).exp());
            (0.5 * (e1 + e2), (e1 - e2) / (2.0 * beta))
        }
    } else {
        let e = (-alpha * s).exp();
        (e, e * s)
    }
}

// ---------------------------------------------------------------------------------------------------
// The formulas.

fn first_order(cx: &Cx, storage: Storage, shape: Shape) -> Result<Model, ReferenceError> {
    let (store_role, store_kind) = match storage {
        Storage::Capacitor => ("capacitor", "capacitor"),
        Storage::Inductor => ("inductor", "inductor"),
    };
    let wanted = [
        RoleSpec {
            role: "source",
            kind: "voltage_source",
            place: "from the input node (its first node) to ground (its second node)",
        },
        RoleSpec {
            role: "resistor",
            kind: "resistor",
            place: "from the source's first node to another node",
        },
        RoleSpec {
            role: store_role,
            kind: store_kind,
            place: "from the resistor's far node to ground",
        },
    ];
    cx.check_roles(&wanted)?;
    let g = cx.ground;
    let (src, a, wave) = cx.voltage_source("source")?;
    let place_r =
        format!("between node {a} (the source's first node) and another node, not ground");
    let (res, r_nodes, r) = cx.resistor("resistor", &place_r)?;
    let (b, s_r) = cx.leg(
        "resistor",
        res,
        r_nodes,
        &a,
        &[g],
        &format!("name a resistor {place_r}"),
    )?;
    let place_s = format!("between node {b} and ground ({g})");
    match storage {
        Storage::Capacitor => {
            let (cap, c_nodes, c, v_init) = cx.capacitor("capacitor", &place_s)?;
            let s_c = cx.across("capacitor", cap, c_nodes, &b, g)?;
            cx.nothing_else(&wanted)?;
            let pieces = cx.pieces(src, &wave, shape)?;
            // tau v' + v = u with tau = R C
            let v0 = match cx.start {
                Start::OperatingPoint => wave.value(0.0),
                Start::InitialConditions => s_c * v_init,
            };
            let labels = vec![a, b, current(src), current(res), current(cap)];
            let eng = FirstOrder::new(r * c, v0, pieces);
            let eval: Formula = Box::new(move |t| {
                let (v, dv) = eng.at(t);
                let i = c * dv; // a -> b through the resistor, b -> ground through the capacitor
                vec![wave.value(t), v, -i, s_r * i, s_c * i]
            });
            Ok(Model { labels, eval })
        }
        Storage::Inductor => {
            let (ind, l_nodes, l, i_init) = cx.inductor("inductor", &place_s)?;
            let s_l = cx.across("inductor", ind, l_nodes, &b, g)?;
            cx.nothing_else(&wanted)?;
            let pieces = cx.pieces(src, &wave, shape)?;
            // tau i' + i = u / R with tau = L / R
            let i0 = match cx.start {
                Start::OperatingPoint => wave.value(0.0) / r,
                Start::InitialConditions => s_l * i_init,
            };
            let labels = vec![a, b, current(src), current(res), current(ind)];
            let eng = FirstOrder::new(l / r, i0, pieces.scaled(1.0 / r));
            let eval: Formula = Box::new(move |t| {
                let (i, di) = eng.at(t); // a -> b -> ground
                vec![wave.value(t), l * di, -i, s_r * i, s_l * i]
            });
            Ok(Model { labels, eval })
        }
    }
}

fn series_rlc(cx: &Cx) -> Result<Model, ReferenceError> {
    let wanted = [
        RoleSpec {
            role: "source",
            kind: "voltage_source",
            place: "from the input node (its first node) to ground (its second node)",
        },
        RoleSpec {
            role: "resistor",
            kind: "resistor",
            place: "from the source's first node to another node",
        },
        RoleSpec {
            role: "inductor",
            kind: "inductor",
            place: "from the resistor's far node to the capacitor's node",
        },
        RoleSpec {
            role: "capacitor",
            kind: "capacitor",
            place: "from the inductor's far node to ground",
        },
    ];
    cx.check_roles(&wanted)?;
    let g = cx.ground;
    let (src, a, wave) = cx.voltage_source("source")?;
    let place_r =
        format!("between node {a} (the source's first node) and another node, not ground");
    let (res, r_nodes, r) = cx.resistor("resistor", &place_r)?;
    let (b, s_r) = cx.leg(
        "resistor",
        res,
        r_nodes,
        &a,
        &[g],
        &format!("name a resistor {place_r}"),
    )?;
    let place_l =
        format!("between node {b} (the resistor's far node) and a new node, not {a} or ground");
    let (ind, l_nodes, l, i_init) = cx.inductor("inductor", &place_l)?;
    let (c_node, s_l) = cx.leg(
        "inductor",
        ind,
        l_nodes,
        &b,
        &[g, a.as_str()],
        &format!("name an inductor {place_l}"),
    )?;
    let place_c = format!("between node {c_node} and ground ({g})");
    let (cap, c_nodes, c, v_init) = cx.capacitor("capacitor", &place_c)?;
    let s_c = cx.across("capacitor", cap, c_nodes, &c_node, g)?;
    cx.nothing_else(&wanted)?;
    let levels = cx.step_levels(src, &wave, 1.0)?;
    // L C v'' + R C v' + v = u: alpha = R / 2L, w0^2 = 1 / LC (Nilsson & Riedel ch. 8)
    let (v0, i0) = match cx.start {
        Start::OperatingPoint => (wave.value(0.0), 0.0),
        Start::InitialConditions => (s_c * v_init, s_l * i_init),
    };
    let eng = SecondOrder::new(r / (2.0 * l), 1.0 / (l * c), v0, i0 / c, levels);
    let labels = vec![
        a,
        b,
        c_node,
        current(src),
        current(res),
        current(ind),
        current(cap),
    ];
    let eval: Formula = Box::new(move |t| {
        let (v, dv, ddv) = eng.at(t);
        let i = c * dv; // a -> b -> c -> ground
        let vb = v + l * c * ddv; // the capacitor's voltage plus L di/dt
        vec![wave.value(t), vb, v, -i, s_r * i, s_l * i, s_c * i]
    });
    Ok(Model { labels, eval })
}

fn parallel_rlc(cx: &Cx) -> Result<Model, ReferenceError> {
    let wanted = [
        RoleSpec {
            role: "source",
            kind: "current_source",
            place: "between the top node and ground",
        },
        RoleSpec {
            role: "resistor",
            kind: "resistor",
            place: "between the source's top node and ground",
        },
        RoleSpec {
            role: "inductor",
            kind: "inductor",
            place: "between the source's top node and ground",
        },
        RoleSpec {
            role: "capacitor",
            kind: "capacitor",
            place: "between the source's top node and ground",
        },
    ];
    cx.check_roles(&wanted)?;
    let g = cx.ground;
    let (src, _, top, s_src) = cx.grounded(
        "source",
        "current_source",
        "between a node and ground (either order)",
    )?;
    let ElementKind::CurrentSource { waveform, .. } = &src.kind else {
        return Err(cx.wrong_kind("source", src, "current_source", "between a node and ground"));
    };
    let wave = waveform.clone();
    // nodes [top, gnd] drive the current out of top through the source: -s pushes it into top
    let push = -s_src;
    let place = format!("between node {top} and ground ({g})");
    let (res, r_nodes, r) = cx.resistor("resistor", &place)?;
    let s_r = cx.across("resistor", res, r_nodes, &top, g)?;
    let (ind, l_nodes, l, i_init) = cx.inductor("inductor", &place)?;
    let s_l = cx.across("inductor", ind, l_nodes, &top, g)?;
    let (cap, c_nodes, c, v_init) = cx.capacitor("capacitor", &place)?;
    let s_c = cx.across("capacitor", cap, c_nodes, &top, g)?;
    cx.nothing_else(&wanted)?;
    let levels = cx.step_levels(src, &wave, push)?;
    // L C iL'' + (L / R) iL' + iL = I: alpha = 1 / 2RC, w0^2 = 1 / LC (Nilsson & Riedel ch. 8)
    let (i0, v0) = match cx.start {
        Start::OperatingPoint => (push * wave.value(0.0), 0.0),
        Start::InitialConditions => (s_l * i_init, s_c * v_init),
    };
    let eng = SecondOrder::new(1.0 / (2.0 * r * c), 1.0 / (l * c), i0, v0 / l, levels);
    let labels = vec![top, current(src), current(res), current(ind), current(cap)];
    let eval: Formula = Box::new(move |t| {
        let (il, dil, ddil) = eng.at(t); // top -> ground through the inductor
        let v = l * dil;
        vec![v, wave.value(t), s_r * v / r, s_l * il, s_c * c * l * ddil]
    });
    Ok(Model { labels, eval })
}

fn lc_release(cx: &Cx) -> Result<Model, ReferenceError> {
    let wanted = [
        RoleSpec {
            role: "inductor",
            kind: "inductor",
            place: "between the top node and ground",
        },
        RoleSpec {
            role: "capacitor",
            kind: "capacitor",
            place: "between the inductor's top node and ground",
        },
    ];
    cx.check_roles(&wanted)?;
    let g = cx.ground;
    let (ind, _, top, s_l) = cx.grounded(
        "inductor",
        "inductor",
        "between a node and ground (either order)",
    )?;
    let place = format!("between node {top} and ground ({g})");
    let (_, _, l, i_init) = cx.inductor("inductor", &place)?;
    let (cap, c_nodes, c, v_init) = cx.capacitor("capacitor", &place)?;
    let s_c = cx.across("capacitor", cap, c_nodes, &top, g)?;
    cx.nothing_else(&wanted)?;
    if cx.start != Start::InitialConditions {
        return Err(cx.err(
            "the run starts at the operating point, where a circuit with no source rests at zero; \
             this formula releases the initial capacitor voltage and inductor current, so start from \
             initial conditions (run: { start: initial_conditions }) and give initial_voltage and \
             initial_current",
        ));
    }
    // C v' = -iL, L iL' = v: v'' + v / LC = 0 with v(0) = v0, v'(0) = -i0 / C
    let (v0, i0) = (s_c * v_init, s_l * i_init);
    let eng = SecondOrder::new(
        0.0,
        1.0 / (l * c),
        v0,
        -i0 / c,
        Levels {
            first: 0.0,
            later: Vec::new(),
        },
    );
    let labels = vec![top, current(ind), current(cap)];
    let eval: Formula = Box::new(move |t| {
        let (v, dv, _) = eng.at(t);
        let ic = c * dv; // top -> ground through the capacitor
        vec![v, -s_l * ic, s_c * ic]
    });
    Ok(Model { labels, eval })
}
