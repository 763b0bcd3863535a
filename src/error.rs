//! Error kinds of heldout, one enum per concern, and how each maps to an exit code.
//!
//! Messages name what a person needs to fix the problem: the file, the spec key,
//! the row and column, the offending text. `anyhow` is used only at the edge
//! (`commands`, `main`), where these typed errors are wrapped with context.

use std::path::PathBuf;

/// Exit codes of the command-line interface (docs/architecture.md, "Exit codes").
pub mod exit {
    /// Everything went well.
    pub const OK: u8 = 0;
    /// `verify` found a difference.
    pub const MISMATCH: u8 = 1;
    /// Bad input: spec, data or arguments.
    pub const BAD_INPUT: u8 = 2;
    /// A bug or an environment failure that is not the user's input.
    pub const INTERNAL: u8 = 3;
}

/// A spec that cannot be read, parsed or validated.
#[derive(Debug, thiserror::Error)]
pub(crate) enum SpecError {
    #[error("{path}: cannot read the spec: {error}")]
    Read {
        path: PathBuf,
        error: std::io::Error,
    },
    #[error("{path}: the spec must end in .toml, .yaml or .yml")]
    UnknownFormat { path: PathBuf },
    #[error("{location}: {message}{hint}")]
    Parse {
        location: String,
        message: String,
        hint: String,
    },
    #[error("{path}: {key}: {message}")]
    Invalid {
        path: PathBuf,
        key: String,
        message: String,
    },
}

/// A data table that cannot be read or does not fit the spec.
#[derive(Debug, thiserror::Error)]
pub(crate) enum DataError {
    #[error("{path}: cannot read the data table: {error}")]
    Read {
        path: PathBuf,
        error: std::io::Error,
    },
    #[error("{path}: {message}")]
    Table { path: PathBuf, message: String },
    /// A spec key whose value the data contradicts (`[data] positive` not
    /// among the labels, a regression metric for an inferred class target).
    #[error("{path}: {key}: {message}")]
    SpecKey {
        path: PathBuf,
        key: String,
        message: String,
    },
    #[error("{path}: line {line}, column \"{column}\": {message}")]
    Cell {
        path: PathBuf,
        line: u64,
        column: String,
        message: String,
    },
}

/// A fit that cannot be carried out on the rows it was given.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FitError {
    #[error(
        "no setting has a finite cross-validated {metric} ({settings}): every score is \
         infinite or undefined, so there is nothing to choose from; check the target for \
         huge or constant values"
    )]
    NoFiniteScore { metric: String, settings: String },
    #[error("{setting}: needs at least {needed} training rows, the fold has {available}")]
    TooFewRows {
        setting: String,
        needed: usize,
        available: usize,
    },
    #[error("feature \"{feature}\" is constant ({value}) in the training rows, so {why}")]
    ConstantFeature {
        feature: String,
        value: f64,
        why: &'static str,
    },
    #[error(
        "{setting}: the design is rank-deficient (basis column {column} is a combination of the \
         others); lower the degree or drop a feature"
    )]
    RankDeficient { setting: String, column: usize },
    #[error(
        "{setting}: training row {row} has leverage 1 (it alone determines its own fit), so \
         its leave-one-out prediction is undefined; use k-fold instead"
    )]
    FullLeverage { setting: String, row: usize },
    #[error("{setting}: {method} did not converge within {iterations} iterations; {advice}")]
    NotConverged {
        setting: String,
        method: &'static str,
        iterations: usize,
        advice: &'static str,
    },
    #[error(
        "{setting}: feature \"{feature}\" has tied training values where the spline needs \
         distinct knots (knots {knot} and {}, training quantiles, are both {value}); lower df",
        .knot + 1
    )]
    CoincidentKnots {
        setting: String,
        feature: String,
        knot: usize,
        value: f64,
    },
    #[error(
        "{setting}: the spline design is rank-deficient (basis column {column}, of feature \
         \"{feature}\", is a combination of the others: too few distinct training values \
         between its knots); lower df"
    )]
    SplineRankDeficient {
        setting: String,
        feature: String,
        column: usize,
    },
    #[error(
        "{setting}: the training points lie on one straight line, so a surface in two features \
         is not determined; use a family of one feature"
    )]
    CollinearPoints { setting: String },
    #[error(
        "{setting}: the {what} did not converge; this is a numerical failure, not a bad \
         setting: please report it with the data"
    )]
    NoConvergence { setting: String, what: &'static str },
    #[error("{message}")]
    Encoding { message: String },
    #[error(
        "{setting}: the fit can reach effective df only in ({lowest}, {highest}) on this fold \
         ({rows} training rows); choose df inside that range"
    )]
    DfOutOfReach {
        setting: String,
        lowest: f64,
        highest: f64,
        rows: usize,
    },
    #[error(
        "{setting}: a smoothing spline's effective df must lie in [2, {distinct}], where \
         {distinct} is the number of distinct values of feature \"{feature}\" in the training \
         rows (df = 2 is the straight line, df = {distinct} interpolates); choose a df in that \
         range"
    )]
    DfOutOfRange {
        setting: String,
        feature: String,
        distinct: usize,
    },
    #[error(
        "{setting}: the classes are separated (perfectly or nearly) by the features, so the \
         maximum-likelihood fit has no finite solution (fitted probabilities reach 0 or 1); give \
         a `penalty` grid, or use fewer features or a lower degree"
    )]
    Separation { setting: String },
    #[error(
        "{setting}: the covariance of class number {class} (in sorted label order) is singular \
         on the training rows (too few rows of that class for the features, or a feature \
         constant within it); use shape = \"linear\", or fewer features"
    )]
    SingularCovariance { setting: String, class: usize },
    #[error("{setting}: the smoothing spline could not be fitted: {detail}")]
    SmootherBreakdown { setting: String, detail: String },
    #[error(
        "no setting of any candidate can be fitted on these rows, so there is nothing to \
         choose from: {reasons}"
    )]
    NoFeasibleSetting { reasons: String },
}

/// A `FitError` with the candidate and fold it happened in.
#[derive(Debug, thiserror::Error)]
#[error("candidate {candidate}, {fold}: {cause}")]
pub(crate) struct FitFailure {
    pub(crate) candidate: String,
    pub(crate) fold: String,
    pub(crate) cause: FitError,
}

/// A cache folder that cannot be written.
#[derive(Debug, thiserror::Error)]
pub(crate) enum CacheError {
    #[error("cache folder {path}: {error}")]
    Io {
        path: PathBuf,
        error: std::io::Error,
    },
    #[error("cannot encode a cache entry: {0}")]
    Encode(String),
}

/// `verify` found differences (exit code 1).
#[derive(Debug, thiserror::Error)]
#[error("verification failed for {}", specs.join(", "))]
pub(crate) struct VerifyMismatch {
    pub(crate) specs: Vec<String>,
}

/// `report` was asked to render results that do not match their receipt
/// (exit code 1, like a failed verification: the numbers are not vouched for).
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub(crate) struct UnverifiedResults(pub String);

/// Some of several specs given to one command failed. Each was reported
/// as it failed; this closes the command with the worst exit code of them.
#[derive(Debug, thiserror::Error)]
#[error("{} of {total} specs failed: {}", failed.len(), failed.join(", "))]
pub(crate) struct SpecsFailed {
    /// The worst exit code among the specs.
    pub(crate) code: u8,
    pub(crate) total: usize,
    /// Each failed spec with what went wrong, e.g. `b.toml (mismatch)`.
    pub(crate) failed: Vec<String>,
}

/// Wrong use of the command line that clap cannot catch.
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub(crate) struct UsageError(pub String);

/// Chooses the exit code for an error chain: bad input (2) when any link is one
/// of the input error kinds above, internal (3) otherwise.
pub fn exit_code_for(error: &anyhow::Error) -> u8 {
    if error.is::<VerifyMismatch>() || error.is::<UnverifiedResults>() {
        return exit::MISMATCH;
    }
    if let Some(several) = error.downcast_ref::<SpecsFailed>() {
        return several.code;
    }
    if let Some(crate::execute::ExecuteError::Fit(_)) = error.downcast_ref() {
        return exit::BAD_INPUT;
    }
    let bad_input = error.chain().any(|cause| {
        cause.is::<SpecError>()
            || cause.is::<DataError>()
            || cause.is::<FitFailure>()
            || cause.is::<FitError>()
            || cause.is::<UsageError>()
    });
    if bad_input {
        exit::BAD_INPUT
    } else {
        exit::INTERNAL
    }
}
