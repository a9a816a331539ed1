//! ringtrue: reruns a circuit under every integration method and tolerance setting, measures each run
//! against an exact or independently converged reference, and says which settings to trust.
//!
//! The data flow is `circuit` (parse and check) -> `equations` (MNA assembly) -> `integrate` (methods,
//! step control, breakpoints, Newton). Numerical modules never print and never touch files; the binary
//! adds context to their typed errors once.

pub mod audit;
pub mod catalogue;
pub mod circuit;
pub mod detect;
pub mod diagnose;
pub mod equations;
pub mod generate;
pub mod integrate;
pub mod output;
pub mod poles;
pub mod reference;
pub mod report;
pub mod settings;
pub mod signoff;
pub mod units;
