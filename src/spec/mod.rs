//! The spec file: serde mirrors of its TOML/YAML text, and validation of the
//! values as a whole before any data is read or any model is fitted.
//!
//! This module only reads and checks. Binding columns, expanding grids and
//! assigning folds happen later, in `plan`; nothing downstream looks at the raw
//! text again. Unknown keys are errors, reported with the file, line and
//! column and a "did you mean" hint.
//!
//! By idea: `types` (the tables), `parse` (text to types, located errors),
//! `candidate` (candidate tables through the family registry), `checks`
//! (`[data]` and `[split]`), `simulation` and `expr` (the `[simulate]` table
//! and its truth's arithmetic). Nothing here imports from `simulate`.

use std::path::{Path, PathBuf};

use crate::error::SpecError;

mod candidate;
mod checks;
pub(crate) mod expr;
pub(crate) mod limits;
mod parse;
pub(crate) mod simulation;
#[cfg(test)]
mod tests;
mod types;

pub use candidate::bind_candidate;
pub(crate) use candidate::{CandidateSpec, FamilySpec};
pub(crate) use checks::check_task;
pub(crate) use parse::{closest, parse};
pub use simulation::InputSpec;
pub(crate) use simulation::{NoiseSpec, SimulateSpec};
pub(crate) use types::*;
pub use types::{Metric, Rule, SplitMethod, Task};

/// A spec read from disk, with the path it came from.
#[derive(Debug, Clone)]
pub(crate) struct LoadedSpec {
    pub(crate) path: PathBuf,
    pub(crate) spec: SpecFile,
    /// The validated candidates, in spec order.
    pub(crate) families: Vec<FamilySpec>,
    /// For a simulation spec: the `[data]` it stands in for (the inputs as
    /// features, the simulated target), so later stages read both alike.
    pub(crate) simulated_data: Option<DataSpec>,
    /// Whether the data table may lie outside the spec's repository
    /// (`--allow-outside`); false as loaded. See docs/spec.md, "Where data
    /// may come from".
    pub(crate) allow_outside: bool,
}

impl LoadedSpec {
    /// The folder relative paths in the spec are resolved against.
    pub(crate) fn base_dir(&self) -> &Path {
        self.path.parent().unwrap_or(Path::new(""))
    }

    /// The `[data]` table: present on every validated non-simulation spec;
    /// for a simulation spec, the stand-in described at [`Self::simulated_data`].
    pub(crate) fn data(&self) -> &DataSpec {
        self.spec
            .data
            .as_ref()
            .or(self.simulated_data.as_ref())
            .expect("validation guarantees a [data] or [simulate] table")
    }

    /// Whether this is a simulation spec.
    pub(crate) fn is_simulation(&self) -> bool {
        self.spec.simulate.is_some()
    }
}

/// Reads, parses and validates a spec file (TOML or YAML, chosen by extension).
pub(crate) fn load(path: &Path) -> Result<LoadedSpec, SpecError> {
    let text = read_bounded(path)?;
    let spec = parse(path, &text)?;
    let families = validate(path, &spec)?;
    let simulated_data = spec.simulate.as_ref().map(|sim| DataSpec {
        table: "[simulate]".to_string(),
        target: sim.target.clone(),
        features: sim.input_names(),
        key: None,
        group: None,
        order: None,
        missing: MissingPolicy::Error,
        delimiter: None,
        decimal: None,
        missing_markers: None,
        categorical: Vec::new(),
        min_level_rows: None,
        task: Some(sim.task.unwrap_or(Task::Regression)),
        positive: None,
    });
    Ok(LoadedSpec {
        path: path.to_path_buf(),
        spec,
        families,
        simulated_data,
        allow_outside: false,
    })
}

/// A spec's meaning: the parsed spec with the candidates' defaults spelled
/// out (each family's own, from the family registry), so that writing them
/// or not is the same meaning. It is itself a spec that runs and means the
/// same thing.
pub(crate) fn canonical(spec: &SpecFile) -> SpecFile {
    let mut normal = spec.clone();
    for candidate in &mut normal.candidates {
        *candidate = candidate.with_defaults();
    }
    if let Some(sim) = &mut normal.simulate {
        // `noise = { normal = sd }` means `noise_sd = sd`.
        if let (None, Some(NoiseSpec::Normal(sd))) = (sim.noise_sd, sim.noise) {
            sim.noise_sd = Some(sd);
            sim.noise = None;
        }
    }
    normal
}

/// Reads a spec file that is a regular file within [`limits::SPEC_BYTES`],
/// and whose brackets nest at most [`limits::SPEC_NESTING`] deep (deeper
/// text would cost the readers quadratic time or their stack).
fn read_bounded(path: &Path) -> Result<String, SpecError> {
    let read_error = |error| SpecError::Read {
        path: path.to_path_buf(),
        error,
    };
    let too = |message: String| SpecError::Parse {
        location: path.display().to_string(),
        message,
        hint: String::new(),
    };
    let metadata = std::fs::metadata(path).map_err(read_error)?;
    if !metadata.is_file() {
        return Err(too("not a regular file".into()));
    }
    limits::at_most(
        metadata.len() as usize,
        limits::SPEC_BYTES as usize,
        "bytes",
    )
    .map_err(too)?;
    let text = std::fs::read_to_string(path).map_err(read_error)?;
    limits::at_most(
        limits::nesting(&text),
        limits::SPEC_NESTING,
        "levels of nested brackets",
    )
    .map_err(too)?;
    Ok(text)
}

/// Checks values that the types alone cannot: ranges, names, grids, and the
/// combinations of keys. Fails on the first problem, naming the key. Returns
/// the candidates as validated family specs.
pub(crate) fn validate(path: &Path, spec: &SpecFile) -> Result<Vec<FamilySpec>, SpecError> {
    let invalid = |key: &str, message: String| SpecError::Invalid {
        path: path.to_path_buf(),
        key: key.to_string(),
        message,
    };

    let name = &spec.experiment.name;
    if name.is_empty()
        || !name
            .chars()
            .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-')
    {
        return Err(invalid(
            "experiment.name",
            format!("\"{name}\" must use only a-z, 0-9 and '-' (it names the output folder)"),
        ));
    }

    let default_features = match (&spec.data, &spec.simulate) {
        (Some(data), None) => {
            checks::validate_data(data, &spec.split, &invalid)?;
            data.features.clone()
        }
        (None, Some(sim)) => {
            simulation::validate(sim, &spec.split, &invalid)?;
            sim.input_names()
        }
        (Some(_), Some(_)) => {
            return Err(invalid(
                "simulate",
                "a spec declares either [data] (a table) or [simulate] (a declared truth), \
                 not both"
                    .into(),
            ))
        }
        (None, None) => {
            return Err(invalid(
                "data",
                "the spec needs a [data] table (or a [simulate] table)".into(),
            ))
        }
    };
    checks::validate_split(&spec.split, &invalid)?;
    if let Some(intervals) = &spec.intervals {
        checks::validate_intervals(intervals, &spec.split, &invalid)?;
    }

    if spec.candidates.is_empty() {
        return Err(invalid(
            "candidate",
            "declare at least one [[candidate]]".into(),
        ));
    }
    let families = candidate::validate_candidates(spec, &default_features, &invalid)?;
    let declared = match (&spec.data, &spec.simulate) {
        (Some(data), _) => data.task,
        // Simulation specs simulate numbers unless `[simulate] task` says labels.
        (None, Some(sim)) => Some(sim.task.unwrap_or(Task::Regression)),
        (None, None) => None,
    };
    if let Some(task) = declared {
        check_task(spec, &families, task).map_err(|(key, message)| invalid(&key, message))?;
    }
    Ok(families)
}
