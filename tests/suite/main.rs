//! The integration tests, one module per concern. Each check of the engine against the outside world
//! names its source beside it.

mod audit;
mod closed_form_library;
mod closed_forms;
mod common;
mod conservation;
mod detectors;
mod diode;
mod generate;
mod order;
mod poles;
mod reference_data;
mod report;
mod ringing;
mod shard;
mod shipped;
mod signoff;
mod sparse;
mod stability;
mod validation;
