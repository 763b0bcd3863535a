//! heldout: choose how flexible a predictive model should be, scoring every
//! candidate on data its fit never saw, and write evidence a reviewer can
//! regenerate bit for bit.
//!
//! Data flows one way through one module per stage:
//! `spec` → `data` → `split` → `plan` → `execute` → `assess` → `results` →
//! `report` / `output`. Model families live in `models`, one file each;
//! simulation specs (a declared truth instead of a table) live in `simulate`.

pub mod assess;
pub mod cache;
pub mod cli;
pub mod commands;
pub mod data;
pub mod error;
pub mod execute;
pub mod metrics;
pub mod models;
pub mod output;
pub mod plan;
pub mod receipt;
pub mod report;
pub mod results;
pub mod simulate;
pub mod spec;
pub mod split;
