//! Integration tests that run the `heldout` binary as a user would.
//!
//! One crate, one module per concern; each test works in its own temporary
//! directory (see `util`).

mod bad_input;
mod cache_command;
mod categorical;
mod ci_doc;
mod classification;
mod completions;
mod cv_reference;
mod demo;
mod fuzz;
mod honest;
mod hostile;
mod impute_intervals;
mod infeasible;
mod intervals;
mod json;
mod kept_model;
mod nist;
mod ordered;
mod parquet;
mod predict;
mod prediction_sets;
mod report_command;
mod reports;
mod reproducible;
mod ridge_lasso;
mod scaffold;
mod schema;
mod several_specs;
mod simulation;
mod simulation_classes;
mod simulation_report;
mod smoothing_spline;
mod spec_as_read;
mod splines;
mod split_reference;
mod svg;
mod tables;
mod util;
