//! From the file as written to the circuit model: reads values with their units, checks that each field
//! applies to its element kind, that values are finite and physical, and that names are unique.
//! Every problem is collected, so one run of `check` shows them all.

use super::raw::{RawCircuit, RawControl, RawElement, RawReference, RawValue, RawWaveform};
use super::{
    yaml, Circuit, CircuitError, DiodeModel, Element, ElementKind, Probe, Problem, ReferenceSpec,
    RunSpec, SwitchModel, Waveform,
};
use crate::settings::{Overrides, Start};
use crate::units::{parse_value, shortest, Quantity};
use std::collections::HashSet;

struct Ctx<'a> {
    text: &'a str,
    problems: Vec<Problem>,
}

impl Ctx<'_> {
    fn push(&mut self, line: Option<usize>, subject: Option<String>, message: String, hint: &str) {
        self.problems.push(Problem {
            line,
            column: None,
            subject,
            message,
            hint: hint.to_string(),
        });
    }

    /// Reads an optional value; records a problem and returns `None` when it cannot be read.
    fn value(
        &mut self,
        v: &Option<RawValue>,
        field: &str,
        q: Quantity,
        line: Option<usize>,
        subject: &Option<String>,
    ) -> Option<f64> {
        let v = v.as_ref()?;
        match v {
            RawValue::Number(x) if x.is_finite() => Some(*x),
            RawValue::Number(x) => {
                self.push(
                    line,
                    subject.clone(),
                    format!("{field} = {} is not finite", shortest(*x)),
                    "give a finite number",
                );
                None
            }
            RawValue::Text(s) => match parse_value(s, q) {
                Ok(x) => Some(x),
                Err(e) => {
                    self.push(
                        line,
                        subject.clone(),
                        format!("{field}: {e}"),
                        "write a number with an optional SI prefix and unit, e.g. 4.7u or 10kohm",
                    );
                    None
                }
            },
        }
    }
}

const GROUND_DEFAULT: &str = "gnd";

pub(super) fn build(raw: RawCircuit, text: &str, file: &str) -> Result<Circuit, CircuitError> {
    let mut cx = Ctx {
        text,
        problems: Vec::new(),
    };
    if raw.name.is_empty()
        || !raw
            .name
            .chars()
            .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-' || c == '_')
    {
        cx.push(
            find_line(text, "name:"),
            None,
            format!(
                "the circuit name '{}' is not usable in file names",
                raw.name
            ),
            "use lower-case letters, digits, '-' and '_' only, e.g. rc-step",
        );
    }
    let ground = raw
        .ground
        .clone()
        .unwrap_or_else(|| GROUND_DEFAULT.to_string());

    let mut names = HashSet::new();
    let mut seen: std::collections::HashMap<&str, usize> = std::collections::HashMap::new();
    let mut elements = Vec::with_capacity(raw.elements.len());
    let element_lines = yaml::ElementLines::new(text);
    for re in &raw.elements {
        let nth = seen.entry(re.name.as_str()).or_insert(0);
        let line = element_lines.line(&re.name, *nth);
        *nth += 1;
        let subject = Some(format!("element {}", re.name));
        if re.name.is_empty() || re.name.contains('.') || re.name.contains(char::is_whitespace) {
            cx.push(
                line,
                subject.clone(),
                format!("the name '{}' is not usable", re.name),
                "use a name without spaces or dots, e.g. r1",
            );
        }
        if !names.insert(re.name.clone()) {
            cx.push(
                line,
                subject.clone(),
                format!("the name '{}' is used by more than one element", re.name),
                "give every element its own name",
            );
            continue;
        }
        if let Some(kind) = build_element(&mut cx, re, line, &subject) {
            elements.push(Element {
                name: re.name.clone(),
                line,
                kind,
            });
        }
    }

    let run = build_run(&mut cx, &raw);
    let circuit_nodes: HashSet<String> = elements
        .iter()
        .filter_map(|e| e.kind.terminals())
        .flat_map(|t| t.iter().cloned())
        .collect();

    // Cross-references between elements.
    for e in &elements {
        let subject = Some(format!("element {}", e.name));
        match &e.kind {
            ElementKind::Coupling { inductors, .. } => {
                for l in inductors {
                    match elements.iter().find(|x| &x.name == l) {
                        Some(Element {
                            kind: ElementKind::Inductor { .. },
                            ..
                        }) => {}
                        Some(other) => cx.push(
                            e.line,
                            subject.clone(),
                            format!("'{l}' is a {}, not an inductor", other.kind.kind_name()),
                            "name two inductors in `inductors`",
                        ),
                        None => cx.push(
                            e.line,
                            subject.clone(),
                            format!("there is no element '{l}'"),
                            "name two inductors of this circuit in `inductors`",
                        ),
                    }
                }
                if inductors[0] == inductors[1] {
                    cx.push(
                        e.line,
                        subject.clone(),
                        "couples an inductor with itself".into(),
                        "name two different inductors",
                    );
                }
            }
            ElementKind::Cccs { control, .. } | ElementKind::Ccvs { control, .. } => {
                match elements.iter().find(|x| &x.name == control) {
                    Some(c) if c.kind.has_branch_current() => {}
                    Some(c) => cx.push(
                        e.line,
                        subject.clone(),
                        format!(
                            "its control '{control}' is a {}, whose current is not an unknown of the equations",
                            c.kind.kind_name()
                        ),
                        "control it by a voltage source, inductor, vcvs or ccvs (a 0 V voltage source in series measures any current)",
                    ),
                    None => cx.push(
                        e.line,
                        subject.clone(),
                        format!("its control '{control}' is not an element of this circuit"),
                        "name the element whose current controls it",
                    ),
                }
            }
            ElementKind::Vcvs { control, .. } | ElementKind::Vccs { control, .. } => {
                for n in control {
                    if *n != ground && !circuit_nodes.contains(n) {
                        cx.push(
                            e.line,
                            subject.clone(),
                            format!("its control node '{n}' is connected to no element"),
                            "name nodes that elements connect to",
                        );
                    }
                }
            }
            _ => {}
        }
    }
    let mut couplings = HashSet::new();
    for e in &elements {
        if let ElementKind::Coupling { inductors, .. } = &e.kind {
            let mut pair = inductors.clone();
            pair.sort();
            if !couplings.insert(pair.clone()) {
                cx.push(
                    e.line,
                    Some(format!("element {}", e.name)),
                    format!("{} and {} are coupled twice", pair[0], pair[1]),
                    "keep one coupling per pair of inductors",
                );
            }
        }
    }

    let watch = build_watch(&mut cx, &raw, &elements, &ground);
    let reference = match &raw.reference {
        None => ReferenceSpec::Default,
        Some(RawReference::Named(s)) if s == "exact" => ReferenceSpec::Exact,
        Some(RawReference::Named(s)) if s == "converged" => ReferenceSpec::Converged,
        Some(RawReference::Named(s)) => {
            cx.push(
                find_line(text, "reference:"),
                None,
                format!("unknown reference '{s}'"),
                "use exact, converged, or { closed_form: FORMULA, ... }",
            );
            ReferenceSpec::Default
        }
        Some(RawReference::ClosedForm(c)) => ReferenceSpec::ClosedForm {
            formula: c.closed_form.clone(),
            roles: c
                .roles
                .iter()
                .map(|(k, v)| (k.clone(), v.clone()))
                .collect(),
        },
    };
    if elements.is_empty() && cx.problems.is_empty() {
        cx.push(
            find_line(text, "elements:"),
            None,
            "the circuit has no elements".into(),
            "list the elements under `elements:`",
        );
    }

    if !cx.problems.is_empty() {
        return Err(CircuitError {
            file: file.to_string(),
            problems: cx.problems,
        });
    }
    Ok(Circuit {
        name: raw.name.clone(),
        title: raw.title.clone().unwrap_or_else(|| raw.name.clone()),
        ground,
        elements,
        run,
        watch,
        reference,
        plan: raw.plan.clone(),
        file: file.to_string(),
    })
}

fn find_line(text: &str, key: &str) -> Option<usize> {
    text.lines()
        .position(|l| l.trim_start().starts_with(key))
        .map(|i| i + 1)
}

fn build_run(cx: &mut Ctx, raw: &RawCircuit) -> RunSpec {
    let r = &raw.run;
    let line = find_line(cx.text, "run:");
    let subject = Some("run".to_string());
    let stop = cx
        .value(
            &Some(r.stop.clone()),
            "stop",
            Quantity::Time,
            line,
            &subject,
        )
        .unwrap_or(1.0);
    if stop.is_nan() || stop <= 0.0 {
        cx.push(
            line,
            subject.clone(),
            format!("stop = {} must be positive", shortest(stop)),
            "give the end time of the run, e.g. stop: 10u",
        );
    }
    let mut o = Overrides::default();
    if let Some(s) = &r.start {
        match s.parse::<Start>() {
            Ok(v) => o.start = Some(v),
            Err(e) => cx.push(line, subject.clone(), e.to_string(), "set run.start"),
        }
    }
    if let Some(s) = &r.method {
        match s.parse() {
            Ok(v) => o.method = Some(v),
            Err(e) => cx.push(line, subject.clone(), format!("{e}"), "set run.method"),
        }
    }
    if let Some(s) = &r.scale {
        match s.parse() {
            Ok(v) => o.scale = Some(v),
            Err(e) => cx.push(line, subject.clone(), format!("{e}"), "set run.scale"),
        }
    }
    if let Some(s) = &r.restart {
        match s.parse() {
            Ok(v) => o.restart = Some(v),
            Err(e) => cx.push(line, subject.clone(), format!("{e}"), "set run.restart"),
        }
    }
    o.rtol = cx.value(&r.rtol, "rtol", Quantity::Plain, line, &subject);
    o.atol_v = cx.value(&r.atol_v, "atol_v", Quantity::Voltage, line, &subject);
    o.atol_i = cx.value(&r.atol_i, "atol_i", Quantity::Current, line, &subject);
    o.lte_factor = cx.value(&r.lte_factor, "lte_factor", Quantity::Plain, line, &subject);
    o.max_step = cx.value(&r.max_step, "max_step", Quantity::Time, line, &subject);
    o.fixed_step = cx.value(&r.fixed_step, "fixed_step", Quantity::Time, line, &subject);
    o.step_budget = r.step_budget;
    let mut probe = crate::settings::Settings::new(crate::settings::MethodName::TrBdf2);
    probe.apply(&o);
    if let Err(e) = probe.validate() {
        cx.push(line, subject, e.to_string(), "correct the run: map");
    }
    RunSpec {
        stop,
        start: o.start.unwrap_or(Start::OperatingPoint),
        settings: o,
    }
}

fn build_watch(cx: &mut Ctx, raw: &RawCircuit, elements: &[Element], ground: &str) -> Vec<Probe> {
    let line = find_line(cx.text, "watch:");
    let Some(list) = &raw.watch else {
        // Default: every node, in order of first appearance.
        return super::distinct_nodes(elements, ground)
            .into_iter()
            .map(|n| Probe::Node(n.to_string()))
            .collect();
    };
    let (probes, problems) = resolve_watch(list, elements, ground);
    for p in problems {
        cx.push(line, Some(p.subject), p.message, &p.hint);
    }
    probes
}

/// One watch entry that cannot be used.
#[derive(Debug, Clone, PartialEq)]
pub struct WatchProblem {
    pub subject: String,
    pub message: String,
    pub hint: String,
}

/// Resolves a watch list against the circuit's elements: node names and `NAME.current`. Shared by the
/// circuit file and by projects that override a circuit's watch list.
pub fn resolve_watch(
    list: &[String],
    elements: &[Element],
    ground: &str,
) -> (Vec<Probe>, Vec<WatchProblem>) {
    let node_list = super::distinct_nodes(elements, ground);
    let nodes: HashSet<&str> = node_list.iter().copied().collect();
    let mut problems = Vec::new();
    let mut problem = |w: &str, message: String, hint: String| {
        problems.push(WatchProblem {
            subject: format!("watch {w}"),
            message,
            hint,
        })
    };
    if list.is_empty() {
        problems.push(WatchProblem {
            subject: "watch".into(),
            message: "the watch list is empty".into(),
            hint: "list node names or NAME.current, or remove `watch` to watch every node".into(),
        });
        return (Vec::new(), problems);
    }
    let mut out = Vec::new();
    for w in list {
        let probe = if let Some(el) = w.strip_suffix(".current") {
            match elements.iter().find(|e| e.name == el) {
                Some(Element {
                    kind: ElementKind::Coupling { .. },
                    ..
                }) => {
                    problem(
                        w,
                        format!("'{el}' is a coupling, which carries no current"),
                        "watch the current of one of its inductors".into(),
                    );
                    continue;
                }
                Some(_) => Probe::Current(el.to_string()),
                None => {
                    problem(
                        w,
                        format!("there is no element '{el}'"),
                        "watch NAME.current of an element of this circuit".into(),
                    );
                    continue;
                }
            }
        } else if w == ground {
            problem(
                w,
                "ground is 0 V by definition".into(),
                "watch another node".into(),
            );
            continue;
        } else if nodes.contains(&w.as_str()) {
            Probe::Node(w.clone())
        } else {
            let hint = if elements.iter().any(|e| &e.name == w) {
                format!("to watch the current of element {w}, write {w}.current")
            } else {
                let shown = node_list.len().min(20);
                let more = if node_list.len() > shown {
                    format!(", and {} more", node_list.len() - shown)
                } else {
                    String::new()
                };
                format!(
                    "watch a node that an element connects to ({}{more}), or NAME.current",
                    node_list[..shown].join(", ")
                )
            };
            problem(w, format!("'{w}' is not a node of this circuit"), hint);
            continue;
        };
        if out.contains(&probe) {
            problem(w, "is listed twice".into(), "list each signal once".into());
            continue;
        }
        out.push(probe);
    }
    (out, problems)
}

/// Which fields each kind accepts (besides kind and name).
fn allowed_fields(kind: &str) -> Option<&'static [&'static str]> {
    Some(match kind {
        "resistor" => &["nodes", "value"],
        "capacitor" => &["nodes", "value", "initial_voltage"],
        "inductor" => &["nodes", "value", "initial_current"],
        "coupling" => &["inductors", "k"],
        "voltage_source" | "current_source" => &["nodes", "value", "waveform"],
        "diode" => &[
            "nodes",
            "saturation_current",
            "emission_coefficient",
            "temperature",
            "series_resistance",
            "junction_capacitance",
            "transit_time",
        ],
        "vcvs" | "vccs" | "cccs" | "ccvs" => &["nodes", "control", "gain"],
        "switch" => &[
            "nodes",
            "on_resistance",
            "off_resistance",
            "initially",
            "toggle_at",
            "transition",
        ],
        _ => return None,
    })
}

fn present_fields(re: &RawElement) -> Vec<&'static str> {
    let mut v = Vec::new();
    macro_rules! has {
        ($($f:ident),*) => { $( if re.$f.is_some() { v.push(stringify!($f)); } )* };
    }
    has!(
        nodes,
        value,
        initial_voltage,
        initial_current,
        inductors,
        k,
        waveform,
        control,
        gain,
        saturation_current,
        emission_coefficient,
        temperature,
        series_resistance,
        junction_capacitance,
        transit_time,
        on_resistance,
        off_resistance,
        initially,
        toggle_at,
        transition
    );
    v
}

const KINDS: &str = "resistor, capacitor, inductor, coupling, voltage_source, current_source, diode, vcvs, vccs, cccs, ccvs, switch";

fn build_element(
    cx: &mut Ctx,
    re: &RawElement,
    line: Option<usize>,
    subject: &Option<String>,
) -> Option<ElementKind> {
    let Some(allowed) = allowed_fields(&re.kind) else {
        cx.push(
            line,
            subject.clone(),
            format!("unknown kind '{}'", re.kind),
            &format!("use one of: {KINDS}"),
        );
        return None;
    };
    let mut ok = true;
    for f in present_fields(re) {
        if !allowed.contains(&f) {
            cx.push(
                line,
                subject.clone(),
                format!("the key '{f}' does not apply to a {}", re.kind),
                &format!("remove it; a {} takes: {}", re.kind, allowed.join(", ")),
            );
            ok = false;
        }
    }
    let nodes = if re.kind == "coupling" {
        None
    } else {
        match &re.nodes {
            Some(n) if n.len() == 2 && !n[0].is_empty() && !n[1].is_empty() => {
                if n[0] == n[1] {
                    cx.push(
                        line,
                        subject.clone(),
                        format!("both terminals are on node '{}'", n[0]),
                        "connect the element between two different nodes",
                    );
                    ok = false;
                }
                Some([n[0].clone(), n[1].clone()])
            }
            Some(n) => {
                cx.push(
                    line,
                    subject.clone(),
                    format!("has {} nodes", n.len()),
                    "give exactly two nodes, e.g. nodes: [in, gnd]",
                );
                return None;
            }
            None => {
                cx.push(
                    line,
                    subject.clone(),
                    "has no `nodes`".into(),
                    "give two nodes, e.g. nodes: [in, gnd]",
                );
                return None;
            }
        }
    };
    let positive = |cx: &mut Ctx,
                    v: &Option<RawValue>,
                    field: &str,
                    q: Quantity,
                    required: bool|
     -> Option<f64> {
        if v.is_none() {
            if required {
                cx.push(
                    line,
                    subject.clone(),
                    format!("has no `{field}`"),
                    &format!("give {field} as {}", q.describe()),
                );
            }
            return None;
        }
        let x = cx.value(v, field, q, line, subject)?;
        if x > 0.0 {
            Some(x)
        } else {
            cx.push(
                line,
                subject.clone(),
                format!("{field} = {} must be positive", shortest(x)),
                &format!("give {field} as {} greater than zero", q.describe()),
            );
            None
        }
    };
    let kind = match re.kind.as_str() {
        "resistor" => ElementKind::Resistor {
            nodes: nodes?,
            resistance: positive(cx, &re.value, "value", Quantity::Resistance, true)?,
        },
        "capacitor" => ElementKind::Capacitor {
            nodes: nodes?,
            capacitance: positive(cx, &re.value, "value", Quantity::Capacitance, true)?,
            initial_voltage: cx.value(
                &re.initial_voltage,
                "initial_voltage",
                Quantity::Voltage,
                line,
                subject,
            ),
        },
        "inductor" => ElementKind::Inductor {
            nodes: nodes?,
            inductance: positive(cx, &re.value, "value", Quantity::Inductance, true)?,
            initial_current: cx.value(
                &re.initial_current,
                "initial_current",
                Quantity::Current,
                line,
                subject,
            ),
        },
        "coupling" => {
            let inductors = match &re.inductors {
                Some(l) if l.len() == 2 => [l[0].clone(), l[1].clone()],
                _ => {
                    cx.push(
                        line,
                        subject.clone(),
                        "needs `inductors: [LA, LB]`".into(),
                        "name the two coupled inductors",
                    );
                    return None;
                }
            };
            let Some(k) = cx.value(&re.k, "k", Quantity::Plain, line, subject) else {
                if re.k.is_none() {
                    cx.push(
                        line,
                        subject.clone(),
                        "has no coupling coefficient `k`".into(),
                        "give k with 0 < |k| < 1",
                    );
                }
                return None;
            };
            if !(k.abs() > 0.0 && k.abs() < 1.0) {
                cx.push(
                    line,
                    subject.clone(),
                    format!("k = {} is out of range", shortest(k)),
                    "give k with 0 < |k| < 1 (|k| = 1 makes the inductance matrix singular)",
                );
                return None;
            }
            ElementKind::Coupling { inductors, k }
        }
        "voltage_source" | "current_source" => {
            let wave = match (&re.value, &re.waveform) {
                (Some(_), Some(_)) => {
                    cx.push(
                        line,
                        subject.clone(),
                        "has both `value` and `waveform`".into(),
                        "keep one: value for a constant, waveform otherwise",
                    );
                    return None;
                }
                (Some(v), None) => Waveform::Constant(cx.value(
                    &Some(v.clone()),
                    "value",
                    Quantity::Level,
                    line,
                    subject,
                )?),
                (None, Some(w)) => build_waveform(cx, w, line, subject)?,
                (None, None) => {
                    cx.push(
                        line,
                        subject.clone(),
                        "has neither `value` nor `waveform`".into(),
                        "give value: 1 for a constant or a waveform map",
                    );
                    return None;
                }
            };
            if re.kind == "voltage_source" {
                ElementKind::VoltageSource {
                    nodes: nodes?,
                    waveform: wave,
                }
            } else {
                ElementKind::CurrentSource {
                    nodes: nodes?,
                    waveform: wave,
                }
            }
        }
        "diode" => {
            let saturation_current = if re.saturation_current.is_some() {
                positive(
                    cx,
                    &re.saturation_current,
                    "saturation_current",
                    Quantity::Current,
                    true,
                )?
            } else {
                1e-14
            };
            let emission_coefficient = if re.emission_coefficient.is_some() {
                positive(
                    cx,
                    &re.emission_coefficient,
                    "emission_coefficient",
                    Quantity::Plain,
                    true,
                )?
            } else {
                1.0
            };
            let temperature = if re.temperature.is_some() {
                positive(
                    cx,
                    &re.temperature,
                    "temperature",
                    Quantity::Temperature,
                    true,
                )?
            } else {
                300.0
            };
            let series_resistance = positive(
                cx,
                &re.series_resistance,
                "series_resistance",
                Quantity::Resistance,
                false,
            );
            if re.series_resistance.is_some() && series_resistance.is_none() {
                return None;
            }
            let nonneg =
                |cx: &mut Ctx, v: &Option<RawValue>, field: &str, q: Quantity| -> Option<f64> {
                    let x = cx.value(v, field, q, line, subject).unwrap_or(0.0);
                    if x < 0.0 {
                        cx.push(
                            line,
                            subject.clone(),
                            format!("{field} = {} is negative", shortest(x)),
                            "give zero or a positive value",
                        );
                        None
                    } else {
                        Some(x)
                    }
                };
            let junction_capacitance = nonneg(
                cx,
                &re.junction_capacitance,
                "junction_capacitance",
                Quantity::Capacitance,
            )?;
            let transit_time = nonneg(cx, &re.transit_time, "transit_time", Quantity::Time)?;
            ElementKind::Diode {
                nodes: nodes?,
                model: DiodeModel {
                    saturation_current,
                    emission_coefficient,
                    temperature,
                    series_resistance,
                    junction_capacitance,
                    transit_time,
                },
            }
        }
        "vcvs" | "vccs" | "cccs" | "ccvs" => {
            let gq = match re.kind.as_str() {
                "vccs" => Quantity::Conductance,
                "ccvs" => Quantity::Transresistance,
                _ => Quantity::Plain,
            };
            let gain = match cx.value(&re.gain, "gain", gq, line, subject) {
                Some(g) => g,
                None => {
                    if re.gain.is_none() {
                        cx.push(
                            line,
                            subject.clone(),
                            "has no `gain`".into(),
                            &format!("give gain as {}", gq.describe()),
                        );
                    }
                    return None;
                }
            };
            let voltage_controlled = re.kind == "vcvs" || re.kind == "vccs";
            let nodes = nodes?;
            match (&re.control, voltage_controlled) {
                (Some(RawControl::Nodes(c)), true) if c.len() == 2 => {
                    let control = [c[0].clone(), c[1].clone()];
                    if re.kind == "vcvs" {
                        ElementKind::Vcvs {
                            nodes,
                            control,
                            gain,
                        }
                    } else {
                        ElementKind::Vccs {
                            nodes,
                            control,
                            gain,
                        }
                    }
                }
                (Some(RawControl::Element(c)), false) => {
                    if re.kind == "cccs" {
                        ElementKind::Cccs {
                            nodes,
                            control: c.clone(),
                            gain,
                        }
                    } else {
                        ElementKind::Ccvs {
                            nodes,
                            control: c.clone(),
                            gain,
                        }
                    }
                }
                (_, true) => {
                    cx.push(
                        line,
                        subject.clone(),
                        "needs `control: [NODE_PLUS, NODE_MINUS]`".into(),
                        "name the two nodes whose voltage difference controls it",
                    );
                    return None;
                }
                (_, false) => {
                    cx.push(
                        line,
                        subject.clone(),
                        "needs `control: ELEMENT`".into(),
                        "name the element whose current controls it",
                    );
                    return None;
                }
            }
        }
        "switch" => {
            let on = positive(
                cx,
                &re.on_resistance,
                "on_resistance",
                Quantity::Resistance,
                true,
            );
            let off = positive(
                cx,
                &re.off_resistance,
                "off_resistance",
                Quantity::Resistance,
                true,
            );
            let transition = positive(cx, &re.transition, "transition", Quantity::Time, true);
            let initially_on = match re.initially.as_deref() {
                None | Some("off") => false,
                Some("on") => true,
                Some(other) => {
                    cx.push(
                        line,
                        subject.clone(),
                        format!("initially = '{other}' is not a switch state"),
                        "write initially: on or initially: off",
                    );
                    return None;
                }
            };
            let mut toggle_at = Vec::new();
            for v in re.toggle_at.iter().flatten() {
                toggle_at.push(cx.value(
                    &Some(v.clone()),
                    "toggle_at",
                    Quantity::Time,
                    line,
                    subject,
                )?);
            }
            let (on, off, transition) = (on?, off?, transition?);
            if on >= off {
                cx.push(
                    line,
                    subject.clone(),
                    format!(
                        "on_resistance ({}) is not below off_resistance ({})",
                        shortest(on),
                        shortest(off)
                    ),
                    "make the on resistance the smaller one",
                );
                return None;
            }
            for w in toggle_at.windows(2) {
                if w[1] < w[0] + transition {
                    cx.push(
                        line,
                        subject.clone(),
                        format!(
                            "toggle at {} starts before the transition begun at {} ends",
                            shortest(w[1]),
                            shortest(w[0])
                        ),
                        "list toggle times in increasing order, at least `transition` apart",
                    );
                    return None;
                }
            }
            if toggle_at.first().is_some_and(|&t| t < 0.0) {
                cx.push(
                    line,
                    subject.clone(),
                    "a toggle time is negative".into(),
                    "give toggle times at or after 0",
                );
                return None;
            }
            ElementKind::Switch {
                nodes: nodes?,
                model: SwitchModel {
                    on_resistance: on,
                    off_resistance: off,
                    initially_on,
                    toggle_at,
                    transition,
                },
            }
        }
        _ => unreachable!("allowed_fields covers every kind"),
    };
    ok.then_some(kind)
}

fn build_waveform(
    cx: &mut Ctx,
    w: &RawWaveform,
    line: Option<usize>,
    subject: &Option<String>,
) -> Option<Waveform> {
    let lv = Quantity::Level;
    let tq = Quantity::Time;
    let nonneg_time = |cx: &mut Ctx, v: &Option<RawValue>, field: &str| -> Option<f64> {
        let x = cx.value(v, field, tq, line, subject).unwrap_or(0.0);
        if x < 0.0 {
            cx.push(
                line,
                subject.clone(),
                format!("{field} = {} is negative", shortest(x)),
                &format!("give {field} as zero or a positive time"),
            );
            None
        } else {
            Some(x)
        }
    };
    let given = [
        w.constant.is_some(),
        w.step.is_some(),
        w.pulse.is_some(),
        w.sine.is_some(),
        w.piecewise_linear.is_some(),
    ];
    if given.iter().filter(|&&g| g).count() != 1 {
        cx.push(
            line,
            subject.clone(),
            "the waveform map must have exactly one key".into(),
            "use one of constant, step, pulse, sine, piecewise_linear",
        );
        return None;
    }
    Some(if let Some(v) = &w.constant {
        Waveform::Constant(cx.value(&Some(v.clone()), "constant", lv, line, subject)?)
    } else if let Some(s) = &w.step {
        {
            let from = cx.value(&s.from, "from", lv, line, subject).unwrap_or(0.0);
            let to = cx.value(&Some(s.to.clone()), "to", lv, line, subject)?;
            let at = nonneg_time(cx, &s.at, "at")?;
            let rise = nonneg_time(cx, &s.rise, "rise")?;
            Waveform::Step { from, to, at, rise }
        }
    } else if let Some(p) = &w.pulse {
        {
            let low = cx.value(&p.low, "low", lv, line, subject).unwrap_or(0.0);
            let high = cx.value(&Some(p.high.clone()), "high", lv, line, subject)?;
            let delay = nonneg_time(cx, &p.delay, "delay")?;
            let rise = nonneg_time(cx, &p.rise, "rise")?;
            let fall = nonneg_time(cx, &p.fall, "fall")?;
            let width = nonneg_time(cx, &Some(p.width.clone()), "width")?;
            let period = match &p.period {
                None => None,
                Some(v) => {
                    let per = cx.value(&Some(v.clone()), "period", tq, line, subject)?;
                    if per.is_nan() || per <= 0.0 || per < rise + width + fall {
                        cx.push(line, subject.clone(), format!("period = {} is shorter than rise + width + fall = {}", shortest(per), shortest(rise + width + fall)), "make the period at least rise + width + fall, or remove it for a single pulse");
                        return None;
                    }
                    Some(per)
                }
            };
            Waveform::Pulse {
                low,
                high,
                delay,
                rise,
                fall,
                width,
                period,
            }
        }
    } else if let Some(s) = &w.sine {
        {
            let frequency = cx.value(
                &Some(s.frequency.clone()),
                "frequency",
                Quantity::Frequency,
                line,
                subject,
            )?;
            if frequency.is_nan() || frequency <= 0.0 {
                cx.push(
                    line,
                    subject.clone(),
                    format!("frequency = {} must be positive", shortest(frequency)),
                    "give the frequency in Hz, e.g. 1MHz",
                );
                return None;
            }
            let decay = cx
                .value(&s.decay, "decay", Quantity::Frequency, line, subject)
                .unwrap_or(0.0);
            if decay < 0.0 {
                cx.push(
                    line,
                    subject.clone(),
                    format!(
                        "decay = {} is negative: the sine would grow without bound",
                        shortest(decay)
                    ),
                    "give a decay rate of zero or more (1/s)",
                );
                return None;
            }
            Waveform::Sine {
                offset: cx
                    .value(&s.offset, "offset", lv, line, subject)
                    .unwrap_or(0.0),
                amplitude: cx.value(&Some(s.amplitude.clone()), "amplitude", lv, line, subject)?,
                frequency,
                phase_deg: cx
                    .value(&s.phase_deg, "phase_deg", Quantity::Plain, line, subject)
                    .unwrap_or(0.0),
                delay: nonneg_time(cx, &s.delay, "delay")?,
                decay,
            }
        }
    } else {
        let pts = w.piecewise_linear.as_ref().expect("exactly one key is set");
        {
            if pts.is_empty() {
                cx.push(
                    line,
                    subject.clone(),
                    "the piecewise_linear list is empty".into(),
                    "give at least one [time, value] pair",
                );
                return None;
            }
            let mut out = Vec::with_capacity(pts.len());
            for (i, (t, v)) in pts.iter().enumerate() {
                let t = cx.value(&Some(t.clone()), "piecewise_linear time", tq, line, subject)?;
                let v = cx.value(
                    &Some(v.clone()),
                    "piecewise_linear value",
                    lv,
                    line,
                    subject,
                )?;
                if let Some(&(prev, _)) = out.last() {
                    if t <= prev {
                        cx.push(line, subject.clone(), format!("piecewise_linear time {} at point {} is not after the previous time {}", shortest(t), i + 1, shortest(prev)), "make the times strictly increasing");
                        return None;
                    }
                }
                if t < 0.0 {
                    cx.push(
                        line,
                        subject.clone(),
                        format!("piecewise_linear time {} is negative", shortest(t)),
                        "start the times at 0 or later",
                    );
                    return None;
                }
                out.push((t, v));
            }
            Waveform::PiecewiseLinear(out)
        }
    })
}
