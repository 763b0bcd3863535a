//! heldout: choose how flexible a predictive model should be, scoring every
//! candidate on data its fit never saw, and write evidence a reviewer can
//! regenerate bit for bit.
//!
//! Data flows one way through one module per stage:
//! `spec` → `data` → `split` → `plan` → `execute` → `assess` → `results` →
//! `report` / `output`. Model families live in `models`, one file each;
//! simulation specs (a declared truth instead of a table) live in `simulate`.

pub(crate) mod assess;
pub(crate) mod cache;
pub(crate) mod classes;
pub mod cli;
pub mod commands;
pub(crate) mod data;
pub(crate) mod digests;
pub mod error;
pub(crate) mod evidence;
pub(crate) mod execute;
pub(crate) mod intervals;
pub(crate) mod metrics;
pub mod models;
pub(crate) mod output;
pub(crate) mod plan;
pub(crate) mod prediction_sets;
pub(crate) mod receipt;
pub(crate) mod report;
pub mod results;
pub mod simulate;
pub mod spec;
pub(crate) mod split;
