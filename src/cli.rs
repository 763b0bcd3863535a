//! Command-line arguments (clap). `main` parses them and hands them to
//! `commands`.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};

#[derive(Debug, Parser)]
#[command(
    name = "heldout",
    version,
    about = "Choose how flexible a model should be, on data each fit never saw, with evidence a \
             reviewer can regenerate.",
    long_about = None,
    after_help = "Exit codes: 0 ok, 1 verification mismatch, 2 bad input (spec, data, arguments), \
                  3 internal error.\n\nExample:\n  heldout run specs/heat-demand.toml"
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Fit every candidate on every fold, choose by the spec's rule, and write
    /// results.json, the report and a terminal summary.
    #[command(
        after_help = "Example:\n  heldout run specs/heat-demand.toml --out out\n\n\
        Writes out/<experiment name>/results.json and report.md."
    )]
    Run(RunArgs),
    /// Print which rows are locked as the test set and which fold every other
    /// row validates in, as CSV (an audit trail for reviewers).
    #[command(
        after_help = "Example:\n  heldout folds specs/heat-demand.toml > folds.csv\n\n\
        Columns: row (1-based data row), key (when declared), repeat, fold (or `test`)."
    )]
    Folds(FoldsArgs),
}

#[derive(Debug, Args)]
pub struct RunArgs {
    /// Spec files (TOML or YAML) to run, one after another.
    #[arg(required = true, value_name = "SPEC")]
    pub specs: Vec<PathBuf>,
    /// Folder for outputs; each experiment writes into <OUT>/<name>/.
    #[arg(long, value_name = "DIR", default_value = "out")]
    pub out: PathBuf,
    /// Worker threads for fitting (default: one per core).
    #[arg(long, value_name = "N")]
    pub jobs: Option<usize>,
    /// Print nothing but errors.
    #[arg(long, short)]
    pub quiet: bool,
}

#[derive(Debug, Args)]
pub struct FoldsArgs {
    /// The spec whose split to print.
    #[arg(value_name = "SPEC")]
    pub spec: PathBuf,
}
