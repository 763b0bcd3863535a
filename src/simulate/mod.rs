//! Simulation specs: a declared truth, input distribution and noise level
//! replace the data table, and every candidate setting's expected test error
//! is decomposed into squared bias, variance and irreducible noise by Monte
//! Carlo over replicate training sets (see `decompose` for the estimators).
//! Cross-validation, with the spec's `[split]` and `[choose]`, is run on every
//! replicate, so the report can set the distribution of its choices against
//! the oracle (the setting with the lowest expected error).
//!
//! Stages, in the order they run:
//!
//! - (`spec::simulation` and `spec::expr` read and check the `[simulate]`
//!   table and parse the truth's arithmetic, evaluated with `libm`);
//! - `random`, `design`: named ChaCha20 streams and the simulated inputs, noise and folds;
//! - `run`: each replicate becomes an ordinary `plan::ExperimentPlan`
//!   (training rows in folds, the test points as the locked test set) and
//!   goes through `execute` and the fit cache like any table; then
//!   cross-validation scores and the rule's choice;
//! - `decompose`, `summary`: the Monte-Carlo estimates and what results.json holds.

pub(crate) mod decompose;
pub(crate) mod design;
pub(crate) mod random;
pub(crate) mod run;
pub mod summary;

pub(crate) use run::{resolve, SimulateError};
pub(crate) use summary::{summarise, SimulationOutput};

#[cfg(test)]
mod checks;
