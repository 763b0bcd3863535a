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
    after_help = "Exit codes: 0 ok, 1 verification mismatch, 2 bad input (spec, data,\n\
                  arguments), 3 internal error.\n\nExample:\n  heldout run specs/heat-demand.toml\n  \
                  heldout verify specs/heat-demand.toml"
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Fit every candidate on every fold (reusing cached fits), choose by the
    /// spec's rule, write results.json and reports, and the receipt beside the spec.
    #[command(
        after_help = "Example:\n  heldout run specs/heat-demand.toml --out out\n\n\
        Writes out/<experiment name>/results.json, report.md and figures/*.svg,\n\
        and specs/heat-demand.receipt.toml. report.html is written too when the\n\
        spec's [report] formats includes \"html\" (formats = [\"markdown\", \"html\"]).\n\
        With several specs each is run and reported; the exit code is the worst\n\
        (internal error 3, bad input 2, success 0). With --shard I/N only the\n\
        I-th of N slices of the fits is computed into the cache; a final run\n\
        without --shard assembles the outputs. On a terminal, progress shows\n\
        the fits computed (cached fits counted apart), time taken and time left."
    )]
    Run(RunArgs),
    /// Recompute everything without trusting the cache and compare with the
    /// receipt bit for bit; exit 1 on any difference, naming the first.
    #[command(after_help = "Example (in CI):\n  heldout verify specs/*.toml\n\n\
        Never rewrites the receipt or the outputs. Every spec is checked, one\n\
        line each; the exit code is the worst (internal error 3, bad input 2,\n\
        mismatch 1, identical 0). With --trust-cache, cached fits are used\n\
        (faster, but a tampered cache would go unnoticed).")]
    Verify(VerifyArgs),
    /// Dry run: rows, folds, fits, and which fits are cached, without fitting.
    #[command(after_help = "Example:\n  heldout plan specs/heat-demand.toml")]
    Plan(PlanArgs),
    /// Print which rows are locked as the test set and which fold every other
    /// row validates in, as CSV (an audit trail for reviewers).
    #[command(
        after_help = "Example:\n  heldout folds specs/heat-demand.toml > folds.csv\n\n\
        Columns: row (1-based data row), key (when declared), repeat, fold (or\n\
        `test`). The algorithm is written out in docs/splits.md."
    )]
    Folds(FoldsArgs),
    /// Re-render report.md, report.html and the figures from the stored
    /// results.json, fitting nothing (templates change, numbers don't).
    #[command(
        after_help = "Example (after upgrading heldout, or to restore deleted report files):\n  \
        heldout report specs/heat-demand.toml --out out\n\n\
        Reads out/<experiment name>/results.json and writes the figures and the\n\
        reports the spec's [report] formats ask for beside it. results.json and\n\
        the receipt are left as they are. The stored results must belong to the\n\
        spec as it is now: if the spec's meaning or its data file changed since\n\
        `heldout run`, this says which and exits 2; run the spec again (cached\n\
        fits are reused)."
    )]
    Report(ReportArgs),
    /// Say what changed between two results.json files: inputs, candidates
    /// added or removed, every number that moved (absolute and relative), and
    /// whether the choice changed. Markdown on stdout, for a pull-request comment.
    #[command(
        after_help = "Example (in CI, against the results of the main branch):\n  \
        heldout compare baseline/results.json out/heat-demand/results.json > comment.md\n\n\
        Inputs are told apart by their blake3 digests (spec meaning, data file,\n\
        folds, templates). Numbers are compared bit for bit and shown with just\n\
        enough digits to tell them apart, largest relative change first. Exits 0\n\
        whatever changed; 2 when a file cannot be read."
    )]
    Compare(CompareArgs),
    /// Apply the kept setting, refitted on every non-test row exactly as in
    /// the report, to the rows of a new table; write their predictions as CSV.
    #[command(
        after_help = "Example:\n  heldout predict specs/heat-demand.toml --table next-week.csv \\\n    \
        --output next-week-predicted.csv\n\n\
        The new table needs the kept setting's feature columns (and the spec's key\n\
        column, when it has one, to name the rows). Fits come from the cache (or\n\
        are computed into it), so the predictions are those of the report's final\n\
        fit to the bit. The output starts with comment lines giving the spec's and\n\
        the receipt's blake3 digests and the kept setting; rows outside the\n\
        training range of a feature are counted in a warning (extrapolation).\n\
        Without --output the CSV is printed."
    )]
    Predict(PredictArgs),
    /// Write a first spec for a CSV table: its numeric columns as features, a
    /// row key when one column identifies rows, and candidates from rigid to
    /// flexible sized to the row count. Commented TOML, ready to run and edit.
    #[command(
        after_help = "Example:\n  heldout new --table demo-data/heat-demand.csv --target demand_mwh \\\n    \
        --output specs/first-look.toml\n  heldout run specs/first-look.toml\n\n\
        Without --output the spec is printed, with the table path relative to the\n\
        current folder. The scaffold is checked like any spec before it is written;\n\
        an existing file is kept unless --force is given."
    )]
    New(NewArgs),
    /// Print the JSON Schema of the spec, for editors that complete and check
    /// specs as they are typed (TOML and YAML share one structure).
    #[command(
        after_help = "Example:\n  heldout schema > heldout-spec.schema.json\n\n\
        Point a TOML or YAML language server at the file (for TOML, a\n\
        `#:schema ./heldout-spec.schema.json` line at the top of a spec). The schema\n\
        checks structure and names; value checks (ranges, grids, combinations of\n\
        keys) stay with heldout itself."
    )]
    Schema,
    /// Say how many fits the cache holds and how much room they take, or
    /// remove every fit that none of the given specs needs.
    #[command(after_help = "Examples:\n  heldout cache\n  \
        heldout cache --keep-only specs/*.toml --dry-run\n  \
        heldout cache --keep-only specs/*.toml\n\n\
        --keep-only works out every fit each spec needs (as `heldout plan` does,\n\
        without fitting) and removes the other entries; pass every spec whose\n\
        receipt CI verifies, or their fits are recomputed on the next run.\n\
        Temporary files a stopped run left are removed too.")]
    Cache(CacheCommandArgs),
    /// Print a completion script for bash, zsh or fish, so the shell completes
    /// heldout's commands, options and file names.
    #[command(
        after_help = "Example (bash; put the line in ~/.bashrc to keep it):\n  \
        source <(heldout completions bash)\n\n\
        zsh: heldout completions zsh > ~/.zfunc/_heldout (a folder on $fpath)\n\
        fish: heldout completions fish > ~/.config/fish/completions/heldout.fish"
    )]
    Completions(CompletionsArgs),
    /// Print the manual page (roff) of heldout, or of one command, on stdout.
    #[command(after_help = "Example:\n  heldout manual | man -l -\n  \
        heldout manual run > heldout-run.1\n\n\
        The page of heldout lists every command as heldout-<command>(1); `heldout\n\
        manual <command>` writes that page. The text is the same as --help's.")]
    Manual(ManualArgs),
}

/// Where fitted grids are cached.
#[derive(Debug, Args)]
pub struct CacheArgs {
    /// Cache folder, shared safely between concurrent runs.
    #[arg(
        long,
        value_name = "DIR",
        env = "HELDOUT_CACHE",
        default_value = ".heldout/cache"
    )]
    pub cache: PathBuf,
}

/// Where a spec's data may come from.
#[derive(Debug, Args)]
pub struct DataAccessArgs {
    /// Read a data table that lies outside the spec's repository (the
    /// nearest folder above the spec holding .git, else the current folder);
    /// refused by default so a spec from a pull request cannot make CI read
    /// other files.
    #[arg(long)]
    pub allow_outside: bool,
}

#[derive(Debug, Args)]
pub struct RunArgs {
    /// Spec files (TOML or YAML) to run, one after another.
    #[arg(required = true, value_name = "SPEC")]
    pub specs: Vec<PathBuf>,
    /// Folder for outputs; each experiment writes into DIR/NAME/ (NAME: the experiment name).
    #[arg(long, value_name = "DIR", default_value = "out")]
    pub out: PathBuf,
    #[command(flatten)]
    pub cache: CacheArgs,
    /// Worker threads for fitting (default: one per core).
    #[arg(long, value_name = "N")]
    pub jobs: Option<usize>,
    /// Compute only slice I of N of the fits into the cache (1 ≤ I ≤ N).
    #[arg(long, value_name = "I/N")]
    pub shard: Option<String>,
    /// Print nothing but errors and warnings.
    #[arg(long, short)]
    pub quiet: bool,
    /// Print one JSON object on stdout instead of text (fields: docs/json.md).
    #[arg(long)]
    pub json: bool,
    #[command(flatten)]
    pub data: DataAccessArgs,
}

#[derive(Debug, Args)]
pub struct VerifyArgs {
    /// Spec files whose receipts to check.
    #[arg(required = true, value_name = "SPEC")]
    pub specs: Vec<PathBuf>,
    /// Folder where `run` wrote outputs; used to name the numbers that differ.
    #[arg(long, value_name = "DIR", default_value = "out")]
    pub out: PathBuf,
    #[command(flatten)]
    pub cache: CacheArgs,
    /// Use cached fits instead of recomputing them.
    #[arg(long)]
    pub trust_cache: bool,
    /// Worker threads for fitting (default: one per core).
    #[arg(long, value_name = "N")]
    pub jobs: Option<usize>,
    /// Print nothing but differences and errors.
    #[arg(long, short)]
    pub quiet: bool,
    /// Print one JSON object on stdout instead of text (fields: docs/json.md).
    #[arg(long)]
    pub json: bool,
    #[command(flatten)]
    pub data: DataAccessArgs,
}

#[derive(Debug, Args)]
pub struct PlanArgs {
    /// The spec to plan.
    #[arg(value_name = "SPEC")]
    pub spec: PathBuf,
    #[command(flatten)]
    pub cache: CacheArgs,
    /// Print one JSON object on stdout instead of text (fields: docs/json.md).
    #[arg(long)]
    pub json: bool,
    #[command(flatten)]
    pub data: DataAccessArgs,
}

#[derive(Debug, Args)]
pub struct FoldsArgs {
    /// The spec whose split to print.
    #[arg(value_name = "SPEC")]
    pub spec: PathBuf,
    #[command(flatten)]
    pub data: DataAccessArgs,
}

#[derive(Debug, Args)]
pub struct PredictArgs {
    /// The spec whose kept setting to apply.
    #[arg(value_name = "SPEC")]
    pub spec: PathBuf,
    /// The CSV table (with a header row) of new rows.
    #[arg(long, value_name = "CSV")]
    pub table: PathBuf,
    /// Write the predictions here instead of printing them.
    #[arg(long, short, value_name = "FILE")]
    pub output: Option<PathBuf>,
    #[command(flatten)]
    pub cache: CacheArgs,
    #[command(flatten)]
    pub data: DataAccessArgs,
    /// Print nothing but errors and warnings.
    #[arg(long, short)]
    pub quiet: bool,
}

#[derive(Debug, Args)]
pub struct CacheCommandArgs {
    #[command(flatten)]
    pub cache: CacheArgs,
    /// Keep only the fits these specs need; remove every other entry.
    #[arg(long, value_name = "SPEC", num_args = 1..)]
    pub keep_only: Vec<PathBuf>,
    /// With --keep-only: say what would be removed, remove nothing.
    #[arg(long, requires = "keep_only")]
    pub dry_run: bool,
    #[command(flatten)]
    pub data: DataAccessArgs,
}

#[derive(Debug, Args)]
pub struct NewArgs {
    /// The CSV table (with a header row) the spec will read.
    #[arg(long, value_name = "CSV")]
    pub table: PathBuf,
    /// The numeric column to predict.
    #[arg(long, value_name = "COLUMN")]
    pub target: String,
    /// Experiment name (default: from the table's file name).
    #[arg(long, value_name = "NAME")]
    pub name: Option<String>,
    /// Write the spec here instead of printing it.
    #[arg(long, short, value_name = "SPEC")]
    pub output: Option<PathBuf>,
    /// Overwrite --output if it exists.
    #[arg(long)]
    pub force: bool,
}

#[derive(Debug, Args)]
pub struct ReportArgs {
    /// Spec files whose reports to re-render, one after another.
    #[arg(required = true, value_name = "SPEC")]
    pub specs: Vec<PathBuf>,
    /// Folder where `run` wrote outputs; reads and writes DIR/NAME/ (NAME: the experiment name).
    #[arg(long, value_name = "DIR", default_value = "out")]
    pub out: PathBuf,
    /// Render even when results.json is not the file the spec's receipt
    /// records (edited by hand, or no receipt); the reports then say
    /// UNVERIFIED on their first line.
    #[arg(long)]
    pub unverified: bool,
    /// Print nothing but errors and notes.
    #[arg(long, short)]
    pub quiet: bool,
    #[command(flatten)]
    pub data: DataAccessArgs,
}

#[derive(Debug, Args)]
pub struct CompareArgs {
    /// The earlier results (the baseline).
    #[arg(value_name = "A.json")]
    pub before: PathBuf,
    /// The later results.
    #[arg(value_name = "B.json")]
    pub after: PathBuf,
    /// List every number that moved (default: the 40 largest relative changes).
    #[arg(long)]
    pub all: bool,
    /// Print one JSON object on stdout instead of text (fields: docs/json.md).
    #[arg(long)]
    pub json: bool,
}

/// Shells a completion script can be written for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum CompletionShell {
    Bash,
    Zsh,
    Fish,
}

#[derive(Debug, Args)]
pub struct CompletionsArgs {
    /// The shell that will read the script.
    #[arg(value_name = "SHELL")]
    pub shell: CompletionShell,
}

#[derive(Debug, Args)]
pub struct ManualArgs {
    /// A command whose page to write instead of heldout's own (e.g. run).
    #[arg(value_name = "COMMAND")]
    pub command: Option<String>,
}
