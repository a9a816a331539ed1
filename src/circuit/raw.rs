//! The circuit file exactly as written: serde structures that refuse unknown keys.
//!
//! Nothing here knows YAML (see `yaml.rs`) or physics (see `build.rs`); values stay as the user wrote
//! them so that messages can quote them.

use serde::Deserialize;
use std::collections::BTreeMap;

/// A number as written: a plain number or a string with an SI prefix and unit.
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(untagged)]
pub enum RawValue {
    Number(f64),
    Text(String),
}

impl RawValue {
    /// The value as a number of quantity `q`: a finite number, or text with an SI prefix and unit.
    pub fn number(&self, q: crate::units::Quantity) -> Result<f64, String> {
        match self {
            RawValue::Number(x) if x.is_finite() => Ok(*x),
            RawValue::Number(x) => Err(format!("{x} is not finite")),
            RawValue::Text(s) => crate::units::parse_value(s, q).map_err(|e| e.to_string()),
        }
    }

    pub fn as_text(&self) -> String {
        match self {
            RawValue::Number(x) => format!("{x}"),
            RawValue::Text(s) => s.clone(),
        }
    }
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawCircuit {
    pub name: String,
    #[serde(default)]
    pub title: Option<String>,
    #[serde(default)]
    pub ground: Option<String>,
    pub elements: Vec<RawElement>,
    pub run: RawRun,
    #[serde(default)]
    pub watch: Option<Vec<String>>,
    #[serde(default)]
    pub reference: Option<RawReference>,
    #[serde(default)]
    pub plan: Option<RawPlan>,
}

/// The `run:` map: when to stop, how to start, and any default cell settings.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawRun {
    pub stop: RawValue,
    #[serde(default)]
    pub start: Option<String>,
    #[serde(default)]
    pub method: Option<String>,
    #[serde(default)]
    pub rtol: Option<RawValue>,
    #[serde(default)]
    pub atol_v: Option<RawValue>,
    #[serde(default)]
    pub atol_i: Option<RawValue>,
    #[serde(default)]
    pub lte_factor: Option<RawValue>,
    #[serde(default)]
    pub max_step: Option<RawValue>,
    #[serde(default)]
    pub fixed_step: Option<RawValue>,
    #[serde(default)]
    pub scale: Option<String>,
    #[serde(default)]
    pub restart: Option<String>,
    #[serde(default)]
    pub step_budget: Option<u64>,
}

/// `control:` is two nodes for voltage-controlled sources and an element name for current-controlled ones.
#[derive(Debug, Clone, Deserialize)]
#[serde(untagged)]
pub enum RawControl {
    Nodes(Vec<String>),
    Element(String),
}

/// One element, with every field any kind may use; `build.rs` checks which apply to the kind.
#[derive(Debug, Clone, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawElement {
    pub kind: String,
    pub name: String,
    #[serde(default)]
    pub nodes: Option<Vec<String>>,
    #[serde(default)]
    pub value: Option<RawValue>,
    #[serde(default)]
    pub initial_voltage: Option<RawValue>,
    #[serde(default)]
    pub initial_current: Option<RawValue>,
    #[serde(default)]
    pub inductors: Option<Vec<String>>,
    #[serde(default)]
    pub k: Option<RawValue>,
    #[serde(default)]
    pub waveform: Option<RawWaveform>,
    #[serde(default)]
    pub control: Option<RawControl>,
    #[serde(default)]
    pub gain: Option<RawValue>,
    #[serde(default)]
    pub saturation_current: Option<RawValue>,
    #[serde(default)]
    pub emission_coefficient: Option<RawValue>,
    #[serde(default)]
    pub temperature: Option<RawValue>,
    #[serde(default)]
    pub series_resistance: Option<RawValue>,
    #[serde(default)]
    pub junction_capacitance: Option<RawValue>,
    #[serde(default)]
    pub transit_time: Option<RawValue>,
    #[serde(default)]
    pub on_resistance: Option<RawValue>,
    #[serde(default)]
    pub off_resistance: Option<RawValue>,
    #[serde(default)]
    pub initially: Option<String>,
    #[serde(default)]
    pub toggle_at: Option<Vec<RawValue>>,
    #[serde(default)]
    pub transition: Option<RawValue>,
}

/// A waveform map with exactly one key (checked in `build.rs`; YAML enums would need tags).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawWaveform {
    #[serde(default)]
    pub constant: Option<RawValue>,
    #[serde(default)]
    pub step: Option<RawStep>,
    #[serde(default)]
    pub pulse: Option<RawPulse>,
    #[serde(default)]
    pub sine: Option<RawSine>,
    #[serde(default)]
    pub piecewise_linear: Option<Vec<(RawValue, RawValue)>>,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawStep {
    #[serde(default)]
    pub from: Option<RawValue>,
    pub to: RawValue,
    #[serde(default)]
    pub at: Option<RawValue>,
    #[serde(default)]
    pub rise: Option<RawValue>,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawPulse {
    #[serde(default)]
    pub low: Option<RawValue>,
    pub high: RawValue,
    #[serde(default)]
    pub delay: Option<RawValue>,
    #[serde(default)]
    pub rise: Option<RawValue>,
    #[serde(default)]
    pub fall: Option<RawValue>,
    pub width: RawValue,
    #[serde(default)]
    pub period: Option<RawValue>,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawSine {
    #[serde(default)]
    pub offset: Option<RawValue>,
    pub amplitude: RawValue,
    pub frequency: RawValue,
    #[serde(default)]
    pub phase_deg: Option<RawValue>,
    #[serde(default)]
    pub delay: Option<RawValue>,
    #[serde(default)]
    pub decay: Option<RawValue>,
}

/// `reference:` is `exact`, `converged`, or a closed form naming the elements its formula reads.
#[derive(Debug, Clone, Deserialize)]
#[serde(untagged)]
pub enum RawReference {
    Named(String),
    ClosedForm(RawClosedForm),
}

#[derive(Debug, Clone, Deserialize)]
pub struct RawClosedForm {
    pub closed_form: String,
    /// Role -> element name (for example `resistor: r1`).
    #[serde(flatten)]
    pub roles: BTreeMap<String, String>,
}

/// The `plan:` map; every field is a list of the values to try.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawPlan {
    #[serde(default)]
    pub methods: Option<Vec<String>>,
    #[serde(default)]
    pub rtol: Option<Vec<RawValue>>,
    #[serde(default)]
    pub atol_v: Option<Vec<RawValue>>,
    #[serde(default)]
    pub atol_i: Option<Vec<RawValue>>,
    #[serde(default)]
    pub lte_factor: Option<Vec<RawValue>>,
    #[serde(default)]
    pub max_step: Option<Vec<RawValue>>,
    #[serde(default)]
    pub fixed_step: Option<Vec<RawValue>>,
    #[serde(default)]
    pub restart: Option<Vec<String>>,
    #[serde(default)]
    pub scale: Option<Vec<String>>,
    #[serde(default)]
    pub step_budget: Option<Vec<u64>>,
    #[serde(default)]
    pub target: Option<RawValue>,
}
