//! Why a run ended early, with the values a user needs to act on it.

use crate::settings::SettingError;
use crate::units::shortest;

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum RunError {
    #[error("the settings are invalid: {0}")]
    Settings(#[from] SettingError),

    #[error(
        "the step fell to {} s at t = {} s, below the smallest allowed step; the circuit changes faster than the tolerances can follow there (loosen rtol/atol, or check the circuit near that time)",
        shortest(*step), shortest(*time)
    )]
    StepTooSmall { time: f64, step: f64 },

    #[error(
        "the step fell to {} s at t = {} s, just after the jump at {} s, below the smallest allowed step: with restart `same` the first steps after a jump use {method}, which is not L-stable and cannot damp an ideal jump's stiff components within the tolerances; use restart `backward-euler` (the default; --restart or run.restart), or give the source a rise time",
        shortest(*step), shortest(*time), shortest(*jump)
    )]
    StepTooSmallAfterJump {
        time: f64,
        step: f64,
        jump: f64,
        method: &'static str,
    },

    #[error(
        "the run used its budget of {budget} steps by t = {} s of {} s; raise run.step_budget or loosen the tolerances",
        shortest(*time), shortest(*stop)
    )]
    StepBudget { time: f64, stop: f64, budget: u64 },

    #[error(
        "{} {} s over stop = {} s need at least {} steps, more than the run's budget of {budget} steps; {}",
        if *fixed { "steps of" } else { "steps of at most" },
        shortest(*step), shortest(*stop), shortest(*least),
        if *fixed { "lengthen the fixed step, or raise run.step_budget" } else { "raise max_step (run.max_step, --max-step or the plan's max_step), or raise run.step_budget" }
    )]
    BudgetBelowLeastSteps {
        step: f64,
        fixed: bool,
        stop: f64,
        least: f64,
        budget: u64,
    },

    #[error(
        "the operating point was not found: Newton failed, then shunt stepping and source stepping failed too; the worst equation is the current balance of {worst} (residual {}); check for a missing DC path or extreme values near it, or set run.start: initial_conditions",
        shortest(*residual)
    )]
    OperatingPoint { worst: String, residual: f64 },

    #[error(
        "the equations are singular at t = {} s in the column of {unknown}; check for a floating node, a loop of ideal sources or a cutset of current sources there",
        shortest(*time)
    )]
    Singular { time: f64, unknown: String },

    #[error(
        "the initial voltage of {element} ({} V) conflicts with the {} V that the loop it closes sets at t = 0; make the loop's initial voltages agree",
        shortest(*given), shortest(*implied)
    )]
    InitialConditionConflict {
        element: String,
        given: f64,
        implied: f64,
    },

    #[error(
        "the consistent state at t = 0 was not found (Newton did not converge; worst at {worst}); check the initial conditions"
    )]
    InitialConditions { worst: String },

    #[error("the run exceeded its wall-clock budget of {seconds} s at t = {} s", shortest(*time))]
    TimeBudget { time: f64, seconds: f64 },
}
