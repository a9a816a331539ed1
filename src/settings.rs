//! The settings of one run (one cell of the audit grid), grouped by concern, each group with a
//! `validate()` whose message states the valid range.
//!
//! The circuit file's `run:` map, command-line flags and plan entries all produce `Overrides`, applied
//! in that order on top of the defaults, so a setting means the same wherever it is written.

pub use crate::equations::matrix::Backend;
use std::fmt;
use std::str::FromStr;

/// The integration methods, by their numerical-analysis names.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum MethodName {
    BackwardEuler,
    Trapezoidal,
    Bdf2,
    TrBdf2,
}

impl MethodName {
    pub const ALL: [MethodName; 4] = [
        MethodName::BackwardEuler,
        MethodName::Trapezoidal,
        MethodName::Bdf2,
        MethodName::TrBdf2,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            MethodName::BackwardEuler => "backward-euler",
            MethodName::Trapezoidal => "trapezoidal",
            MethodName::Bdf2 => "bdf2",
            MethodName::TrBdf2 => "tr-bdf2",
        }
    }
}

/// What the relative tolerance is relative to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Scale {
    /// The unknown's present magnitude.
    Value,
    /// The unknown's largest magnitude so far.
    SignalPeak,
    /// The largest magnitude of any unknown of the same kind (voltage or current) so far.
    CircuitPeak,
}

impl Scale {
    pub const ALL: [Scale; 3] = [Scale::Value, Scale::SignalPeak, Scale::CircuitPeak];
    pub fn as_str(self) -> &'static str {
        match self {
            Scale::Value => "value",
            Scale::SignalPeak => "signal_peak",
            Scale::CircuitPeak => "circuit_peak",
        }
    }
}

/// How the first step after a breakpoint is taken.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Restart {
    /// One backward-Euler step (checked by step doubling), then the method again.
    BackwardEuler,
    /// The method itself, keeping its history across the breakpoint.
    Same,
}

impl Restart {
    pub const ALL: [Restart; 2] = [Restart::BackwardEuler, Restart::Same];
    pub fn as_str(self) -> &'static str {
        match self {
            Restart::BackwardEuler => "backward-euler",
            Restart::Same => "same",
        }
    }
}

/// How a run starts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Start {
    /// Solve the DC circuit with the sources at their t = 0 values.
    OperatingPoint,
    /// Capacitors hold their initial voltages and inductors their initial currents at t = 0.
    InitialConditions,
}

impl Start {
    pub fn as_str(self) -> &'static str {
        match self {
            Start::OperatingPoint => "operating_point",
            Start::InitialConditions => "initial_conditions",
        }
    }
}

/// A name that is not one of the accepted spellings.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct UnknownName {
    pub what: &'static str,
    pub given: String,
    pub accepted: Vec<&'static str>,
}

impl fmt::Display for UnknownName {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "unknown {} '{}'; use one of: {}",
            self.what,
            self.given,
            self.accepted.join(", ")
        )
    }
}

impl std::error::Error for UnknownName {}

fn parse_named<T: Copy>(
    s: &str,
    what: &'static str,
    all: &[T],
    name: fn(T) -> &'static str,
) -> Result<T, UnknownName> {
    all.iter()
        .copied()
        .find(|&v| name(v) == s)
        .ok_or_else(|| UnknownName {
            what,
            given: s.to_string(),
            accepted: all.iter().map(|&v| name(v)).collect(),
        })
}

impl FromStr for Backend {
    type Err = UnknownName;
    fn from_str(s: &str) -> Result<Self, UnknownName> {
        parse_named(s, "linear solver", &Backend::ALL, Backend::as_str)
    }
}

impl FromStr for MethodName {
    type Err = UnknownName;
    fn from_str(s: &str) -> Result<Self, UnknownName> {
        parse_named(s, "method", &MethodName::ALL, MethodName::as_str)
    }
}

impl FromStr for Scale {
    type Err = UnknownName;
    fn from_str(s: &str) -> Result<Self, UnknownName> {
        parse_named(s, "scale", &Scale::ALL, Scale::as_str)
    }
}

impl FromStr for Restart {
    type Err = UnknownName;
    fn from_str(s: &str) -> Result<Self, UnknownName> {
        parse_named(s, "restart", &Restart::ALL, Restart::as_str)
    }
}

impl FromStr for Start {
    type Err = UnknownName;
    fn from_str(s: &str) -> Result<Self, UnknownName> {
        parse_named(
            s,
            "start",
            &[Start::OperatingPoint, Start::InitialConditions],
            Start::as_str,
        )
    }
}

/// A setting outside its valid range.
#[derive(Debug, Clone, PartialEq)]
pub struct SettingError {
    pub setting: &'static str,
    pub value: f64,
    pub valid: &'static str,
}

impl fmt::Display for SettingError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} = {} is out of range; it must be {}",
            self.setting,
            crate::units::shortest(self.value),
            self.valid
        )
    }
}

impl std::error::Error for SettingError {}

fn check(
    setting: &'static str,
    value: f64,
    ok: bool,
    valid: &'static str,
) -> Result<(), SettingError> {
    if ok && value.is_finite() {
        Ok(())
    } else {
        Err(SettingError {
            setting,
            value,
            valid,
        })
    }
}

/// What the local truncation error is compared with.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tolerances {
    pub rtol: f64,
    pub atol_v: f64,
    pub atol_i: f64,
    /// Accept a step when |LTE| <= lte_factor * (rtol * scale + atol); above 1 loosens, below 1 tightens.
    pub lte_factor: f64,
    pub scale: Scale,
}

impl Default for Tolerances {
    fn default() -> Self {
        Tolerances {
            rtol: 1e-3,
            atol_v: 1e-9,
            atol_i: 1e-12,
            lte_factor: 1.0,
            scale: Scale::SignalPeak,
        }
    }
}

impl Tolerances {
    pub fn validate(&self) -> Result<(), SettingError> {
        check(
            "rtol",
            self.rtol,
            self.rtol > 0.0 && self.rtol < 1.0,
            "greater than 0 and less than 1 (for example 1e-3)",
        )?;
        check(
            "atol_v",
            self.atol_v,
            self.atol_v > 0.0,
            "a positive voltage (for example 1e-6)",
        )?;
        check(
            "atol_i",
            self.atol_i,
            self.atol_i > 0.0,
            "a positive current (for example 1e-9)",
        )?;
        check(
            "lte_factor",
            self.lte_factor,
            self.lte_factor > 0.0 && self.lte_factor <= 1e6,
            "greater than 0 and at most 1e6 (1 compares the LTE with the tolerance as it is)",
        )
    }
}

/// How steps are chosen: limits, growth, and what happens at breakpoints.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StepControl {
    /// Largest step; `None` means a fiftieth of the run.
    pub max_step: Option<f64>,
    /// Run with this step everywhere (still landing on breakpoints), without LTE control.
    pub fixed_step: Option<f64>,
    pub restart: Restart,
    /// Largest factor by which one step may exceed the previous one (BDF2 also stays below its own
    /// zero-stability limit, see `Method::max_step_ratio`).
    pub growth_limit: f64,
    /// A proposed growth by less than this factor keeps the present step, and with it the factored
    /// Jacobian of a linear circuit (1 turns holding off). Hairer & Wanner's RADAU5 keeps the step for
    /// growth in [1, 1.2] (Solving ODEs II, IV.8, from memory); a refactorization costs several
    /// solves, so we hold a little longer, and the driver holds up to growth 3 when the sparse LU's
    /// operation counts say a refactorization costs much more than a step (`integrate::hold_growth`).
    pub hold_growth: f64,
    /// Smallest factor by which a rejected step is shortened.
    pub shrink_limit: f64,
    /// Safety factor on the step that the LTE estimate predicts.
    pub safety: f64,
    /// Steps below `min_step_fraction * stop` end the run.
    pub min_step_fraction: f64,
    /// Most steps (accepted and rejected) a run may take.
    pub step_budget: u64,
    /// Most wall-clock seconds a run may take (a safety net for audits; `None` for no limit).
    pub time_budget: Option<f64>,
}

impl Default for StepControl {
    fn default() -> Self {
        StepControl {
            max_step: None,
            fixed_step: None,
            restart: Restart::BackwardEuler,
            growth_limit: 5.0,
            hold_growth: 1.5,
            shrink_limit: 0.1,
            safety: 0.9,
            min_step_fraction: 1e-14,
            step_budget: 2_000_000,
            time_budget: None,
        }
    }
}

impl StepControl {
    pub fn validate(&self) -> Result<(), SettingError> {
        if let Some(m) = self.max_step {
            check("max_step", m, m > 0.0, "a positive time (for example 1n)")?;
        }
        if let Some(h) = self.fixed_step {
            check("fixed_step", h, h > 0.0, "a positive time (for example 1n)")?;
        }
        check(
            "growth_limit",
            self.growth_limit,
            self.growth_limit > 1.0,
            "greater than 1",
        )?;
        check(
            "hold_growth",
            self.hold_growth,
            self.hold_growth >= 1.0 && self.hold_growth <= self.growth_limit,
            "between 1 and growth_limit",
        )?;
        check(
            "shrink_limit",
            self.shrink_limit,
            self.shrink_limit > 0.0 && self.shrink_limit < 1.0,
            "between 0 and 1",
        )?;
        check(
            "safety",
            self.safety,
            self.safety > 0.0 && self.safety <= 1.0,
            "in (0, 1]",
        )?;
        check(
            "min_step_fraction",
            self.min_step_fraction,
            self.min_step_fraction > 0.0 && self.min_step_fraction < 1e-3,
            "between 0 and 1e-3",
        )?;
        check(
            "step_budget",
            self.step_budget as f64,
            self.step_budget >= 1,
            "at least 1",
        )
    }

    /// The step limit in force for a run that stops at `stop`.
    pub fn effective_max_step(&self, stop: f64) -> f64 {
        self.max_step.unwrap_or(stop / 50.0).min(stop)
    }
}

/// Everything one run needs besides the circuit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Settings {
    pub method: MethodName,
    pub tolerances: Tolerances,
    pub steps: StepControl,
    pub start: Start,
    /// Dense or sparse LU for the Jacobian (`Auto` chooses by size; both give the same results to
    /// rounding).
    pub linear_solver: Backend,
}

impl Settings {
    pub fn new(method: MethodName) -> Self {
        Settings {
            method,
            tolerances: Tolerances::default(),
            steps: StepControl::default(),
            start: Start::OperatingPoint,
            linear_solver: Backend::Auto,
        }
    }

    pub fn validate(&self) -> Result<(), SettingError> {
        self.tolerances.validate()?;
        self.steps.validate()
    }

    /// Applies every override that is set.
    pub fn apply(&mut self, o: &Overrides) {
        if let Some(m) = o.method {
            self.method = m;
        }
        let t = &mut self.tolerances;
        t.rtol = o.rtol.unwrap_or(t.rtol);
        t.atol_v = o.atol_v.unwrap_or(t.atol_v);
        t.atol_i = o.atol_i.unwrap_or(t.atol_i);
        t.lte_factor = o.lte_factor.unwrap_or(t.lte_factor);
        t.scale = o.scale.unwrap_or(t.scale);
        let s = &mut self.steps;
        if o.max_step.is_some() {
            s.max_step = o.max_step;
        }
        if o.fixed_step.is_some() {
            s.fixed_step = o.fixed_step;
        }
        s.restart = o.restart.unwrap_or(s.restart);
        s.step_budget = o.step_budget.unwrap_or(s.step_budget);
        self.start = o.start.unwrap_or(self.start);
        self.linear_solver = o.linear_solver.unwrap_or(self.linear_solver);
    }
}

/// Settings given somewhere (file, flags, plan); unset fields leave the defaults alone.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Overrides {
    pub method: Option<MethodName>,
    pub rtol: Option<f64>,
    pub atol_v: Option<f64>,
    pub atol_i: Option<f64>,
    pub lte_factor: Option<f64>,
    pub max_step: Option<f64>,
    pub fixed_step: Option<f64>,
    pub scale: Option<Scale>,
    pub restart: Option<Restart>,
    pub start: Option<Start>,
    pub step_budget: Option<u64>,
    pub linear_solver: Option<Backend>,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_round_trip() {
        for m in MethodName::ALL {
            assert_eq!(m.as_str().parse::<MethodName>().unwrap(), m);
        }
        let e = "gear".parse::<MethodName>().unwrap_err().to_string();
        assert!(e.contains("backward-euler") && e.contains("tr-bdf2"), "{e}");
    }

    #[test]
    fn validation_states_the_range() {
        let mut s = Settings::new(MethodName::Bdf2);
        assert!(s.validate().is_ok());
        s.tolerances.rtol = 0.0;
        let e = s.validate().unwrap_err().to_string();
        assert!(e.contains("rtol") && e.contains("greater than 0"), "{e}");
    }
}
