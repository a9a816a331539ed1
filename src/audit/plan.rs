//! The plan: one list of values per setting and an accuracy target; the grid of cells is the product of
//! the lists, in a fixed order (methods outermost, then rtol, then the rest as listed here).

use crate::circuit::raw::{RawPlan, RawValue};
use crate::settings::{MethodName, Overrides, Restart, Scale, Settings};
use crate::units::Quantity;

/// The accuracy target when the plan sets none: max error / peak of each watched signal.
pub const DEFAULT_TARGET: f64 = 1e-3;
/// The rtol ladder when the plan sets none.
pub const DEFAULT_RTOL: [f64; 5] = [1e-2, 1e-3, 1e-4, 1e-5, 1e-6];

/// A checked plan. `None` in a list means "the engine's (or the circuit file's) default".
#[derive(Debug, Clone, PartialEq)]
pub struct Plan {
    pub methods: Vec<MethodName>,
    pub rtol: Vec<f64>,
    pub atol_v: Vec<Option<f64>>,
    pub atol_i: Vec<Option<f64>>,
    pub lte_factor: Vec<Option<f64>>,
    pub max_step: Vec<Option<f64>>,
    pub fixed_step: Vec<Option<f64>>,
    pub restart: Vec<Option<Restart>>,
    pub scale: Vec<Option<Scale>>,
    pub step_budget: Vec<Option<u64>>,
    pub target: f64,
}

impl Default for Plan {
    fn default() -> Self {
        Plan {
            methods: MethodName::ALL.to_vec(),
            rtol: DEFAULT_RTOL.to_vec(),
            atol_v: vec![None],
            atol_i: vec![None],
            lte_factor: vec![None],
            max_step: vec![None],
            fixed_step: vec![None],
            restart: vec![None],
            scale: vec![None],
            step_budget: vec![None],
            target: DEFAULT_TARGET,
        }
    }
}

/// A plan entry that cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("plan.{field}: {message}")]
pub struct PlanError {
    pub field: &'static str,
    pub message: String,
}

fn err(field: &'static str, message: impl Into<String>) -> PlanError {
    PlanError {
        field,
        message: message.into(),
    }
}

/// Refuses an empty list: the grid would have no cells.
fn nonempty<T>(field: &'static str, list: &[T]) -> Result<(), PlanError> {
    if list.is_empty() {
        return Err(err(
            field,
            "the list is empty; give at least one value or remove the key",
        ));
    }
    Ok(())
}

fn values(
    field: &'static str,
    list: &Option<Vec<RawValue>>,
    q: Quantity,
) -> Result<Option<Vec<f64>>, PlanError> {
    let Some(list) = list else { return Ok(None) };
    nonempty(field, list)?;
    list.iter()
        .map(|v| v.number(q).map_err(|e| err(field, e)))
        .collect::<Result<Vec<_>, _>>()
        .map(Some)
}

fn names<T: std::str::FromStr<Err = crate::settings::UnknownName>>(
    field: &'static str,
    list: &Option<Vec<String>>,
) -> Result<Option<Vec<T>>, PlanError> {
    let Some(list) = list else { return Ok(None) };
    nonempty(field, list)?;
    list.iter()
        .map(|s| s.parse::<T>().map_err(|e| err(field, e.to_string())))
        .collect::<Result<Vec<_>, _>>()
        .map(Some)
}

fn optional<T>(v: Option<Vec<T>>) -> Vec<Option<T>> {
    match v {
        Some(list) => list.into_iter().map(Some).collect(),
        None => vec![None],
    }
}

impl Plan {
    /// Checks a plan as written; absent keys take the defaults.
    pub fn from_raw(raw: &RawPlan) -> Result<Plan, PlanError> {
        let d = Plan::default();
        let methods = names::<MethodName>("methods", &raw.methods)?.unwrap_or(d.methods);
        let rtol = values("rtol", &raw.rtol, Quantity::Plain)?.unwrap_or(d.rtol);
        let step_budget = match &raw.step_budget {
            Some(l) => {
                nonempty("step_budget", l)?;
                l.iter().map(|&b| Some(b)).collect()
            }
            None => vec![None],
        };
        let target = match &raw.target {
            None => d.target,
            Some(v) => v.number(Quantity::Plain).map_err(|e| err("target", e))?,
        };
        let plan = Plan {
            methods,
            rtol,
            atol_v: optional(values("atol_v", &raw.atol_v, Quantity::Voltage)?),
            atol_i: optional(values("atol_i", &raw.atol_i, Quantity::Current)?),
            lte_factor: optional(values("lte_factor", &raw.lte_factor, Quantity::Plain)?),
            max_step: optional(values("max_step", &raw.max_step, Quantity::Time)?),
            fixed_step: optional(values("fixed_step", &raw.fixed_step, Quantity::Time)?),
            restart: optional(names::<Restart>("restart", &raw.restart)?),
            scale: optional(names::<Scale>("scale", &raw.scale)?),
            step_budget,
            target,
        };
        plan.validate()?;
        Ok(plan)
    }

    /// Every value in range (each cell's settings are validated with the engine's own rules).
    pub fn validate(&self) -> Result<(), PlanError> {
        if !(self.target.is_finite() && self.target > 0.0 && self.target < 1.0) {
            return Err(err(
                "target",
                format!(
                    "{} is out of range; give a fraction of the peak between 0 and 1, e.g. 1e-3",
                    self.target
                ),
            ));
        }
        for o in self.overrides() {
            let mut s = Settings::new(o.method.unwrap_or(MethodName::TrBdf2));
            s.apply(&o);
            s.validate().map_err(|e| err(e.setting, e.to_string()))?;
        }
        Ok(())
    }

    /// The number of cells: the product of the lists' lengths.
    pub fn size(&self) -> usize {
        self.methods.len()
            * self.rtol.len()
            * self.atol_v.len()
            * self.atol_i.len()
            * self.lte_factor.len()
            * self.max_step.len()
            * self.fixed_step.len()
            * self.restart.len()
            * self.scale.len()
            * self.step_budget.len()
    }

    /// Each cell's settings as overrides, in grid order.
    pub fn overrides(&self) -> Vec<Overrides> {
        let mut out = Vec::with_capacity(self.size());
        for &m in &self.methods {
            for &rtol in &self.rtol {
                for &atol_v in &self.atol_v {
                    for &atol_i in &self.atol_i {
                        for &lte_factor in &self.lte_factor {
                            for &max_step in &self.max_step {
                                for &fixed_step in &self.fixed_step {
                                    for &restart in &self.restart {
                                        for &scale in &self.scale {
                                            for &step_budget in &self.step_budget {
                                                out.push(Overrides {
                                                    method: Some(m),
                                                    rtol: Some(rtol),
                                                    atol_v,
                                                    atol_i,
                                                    lte_factor,
                                                    max_step,
                                                    fixed_step,
                                                    scale,
                                                    restart,
                                                    start: None,
                                                    linear_solver: None,
                                                    step_budget,
                                                });
                                            }
                                        }
                                    }
                                }
                            }
                        }
                    }
                }
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_grid_is_four_methods_by_five_tolerances() {
        let p = Plan::default();
        assert_eq!(p.size(), 20);
        assert_eq!(p.overrides().len(), 20);
    }

    #[test]
    fn grid_size_is_the_product_of_the_lists() {
        let raw = RawPlan {
            methods: Some(vec!["bdf2".into(), "trapezoidal".into()]),
            rtol: Some(vec![
                RawValue::Number(1e-3),
                RawValue::Text("1e-4".into()),
                RawValue::Number(1e-5),
            ]),
            lte_factor: Some(vec![RawValue::Number(1.0), RawValue::Number(3.0)]),
            restart: Some(vec!["same".into(), "backward-euler".into()]),
            ..RawPlan::default()
        };
        let p = Plan::from_raw(&raw).unwrap();
        assert_eq!(p.size(), 2 * 3 * 2 * 2);
        assert_eq!(p.overrides().len(), 24);
    }

    #[test]
    fn empty_lists_and_bad_values_are_refused() {
        let raw = RawPlan {
            rtol: Some(vec![]),
            ..RawPlan::default()
        };
        assert!(Plan::from_raw(&raw)
            .unwrap_err()
            .to_string()
            .contains("empty"));
        let raw = RawPlan {
            methods: Some(vec!["gear".into()]),
            ..RawPlan::default()
        };
        assert!(Plan::from_raw(&raw).is_err());
        let raw = RawPlan {
            rtol: Some(vec![RawValue::Number(2.0)]),
            ..RawPlan::default()
        };
        assert!(Plan::from_raw(&raw)
            .unwrap_err()
            .to_string()
            .contains("rtol"));
    }
}
