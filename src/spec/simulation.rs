//! The `[simulate]` table: serde mirror of what a simulation spec declares,
//! and validation of its values as a whole (the truth parses, the inputs and
//! sizes make sense) before anything is drawn or fitted.

use std::collections::BTreeMap;

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::{expr, limits};
use crate::error::SpecError;
use crate::spec::{SplitMethod, SplitSpec};

/// `[simulate]` as written.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(deny_unknown_fields)]
pub(crate) struct SimulateSpec {
    /// The true regression function over the named inputs; with
    /// `task = "classification"`, the probability that the label is 1.
    pub(crate) truth: String,
    /// `regression` (the default: truth plus normal noise) or
    /// `classification` (labels 0 and 1, drawn with the truth's probability).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) task: Option<crate::spec::Task>,
    /// Name of the simulated target in reports and results.
    #[serde(default = "default_target")]
    pub(crate) target: String,
    /// Each input's distribution; the input names are the features, in
    /// alphabetical order.
    pub(crate) inputs: BTreeMap<String, InputSpec>,
    /// Standard deviation of the normal noise added to the truth.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) noise_sd: Option<f64>,
    /// The same, written as a distribution: `noise = { normal = 0.5 }`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) noise: Option<NoiseSpec>,
    /// Rows of each replicate's training set.
    pub(crate) train_size: usize,
    /// Number of simulated training sets.
    pub(crate) replicates: usize,
    /// Test inputs drawn once from the input distribution.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) test_points: Option<usize>,
    /// Test inputs evenly spaced over the only input's range, ends included.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) test_grid: Option<usize>,
    /// `random`: training inputs drawn afresh for every replicate; `fixed`:
    /// drawn once and kept, so only the noise varies.
    #[serde(default)]
    pub(crate) design: Design,
}

fn default_target() -> String {
    "y".to_string()
}

/// The distribution of one input, written as a one-key table
/// (`{ uniform = [a, b] }`), the same in TOML and YAML.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(try_from = "InputTable", into = "InputTable")]
pub enum InputSpec {
    /// Uniform on [a, b].
    Uniform([f64; 2]),
    /// Normal with [mean, standard deviation].
    Normal([f64; 2]),
    /// Fixed design: evenly spaced over [a, b], both ends included.
    Grid([f64; 2]),
    /// Half the draws from N(a, sd) and half from N(b, sd), written
    /// [a, b, sd]: the input of two equally likely classes with normal
    /// densities of equal spread.
    NormalPair([f64; 3]),
}

/// The table an input is written as.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, JsonSchema)]
#[serde(deny_unknown_fields)]
struct InputTable {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    uniform: Option<[f64; 2]>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    normal: Option<[f64; 2]>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    grid: Option<[f64; 2]>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    normal_pair: Option<[f64; 3]>,
}

impl TryFrom<InputTable> for InputSpec {
    type Error = String;

    fn try_from(table: InputTable) -> Result<Self, String> {
        match (table.uniform, table.normal, table.grid, table.normal_pair) {
            (Some(v), None, None, None) => Ok(InputSpec::Uniform(v)),
            (None, Some(v), None, None) => Ok(InputSpec::Normal(v)),
            (None, None, Some(v), None) => Ok(InputSpec::Grid(v)),
            (None, None, None, Some(v)) => Ok(InputSpec::NormalPair(v)),
            _ => Err("an input takes exactly one of `uniform = [a, b]`, \
                      `normal = [mean, sd]`, `grid = [a, b]` and \
                      `normal_pair = [mean_a, mean_b, sd]`"
                .to_string()),
        }
    }
}

impl From<InputSpec> for InputTable {
    fn from(input: InputSpec) -> Self {
        let mut table = InputTable {
            uniform: None,
            normal: None,
            grid: None,
            normal_pair: None,
        };
        match input {
            InputSpec::Uniform(v) => table.uniform = Some(v),
            InputSpec::Normal(v) => table.normal = Some(v),
            InputSpec::Grid(v) => table.grid = Some(v),
            InputSpec::NormalPair(v) => table.normal_pair = Some(v),
        }
        table
    }
}

/// The noise distribution, written `{ normal = sd }`.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, JsonSchema)]
#[serde(from = "NoiseTable", into = "NoiseTable")]
pub(crate) enum NoiseSpec {
    /// Normal with mean 0 and this standard deviation.
    Normal(f64),
}

#[derive(Debug, Clone, Copy, Deserialize, Serialize, JsonSchema)]
#[serde(deny_unknown_fields)]
struct NoiseTable {
    normal: f64,
}

impl From<NoiseTable> for NoiseSpec {
    fn from(table: NoiseTable) -> Self {
        NoiseSpec::Normal(table.normal)
    }
}

impl From<NoiseSpec> for NoiseTable {
    fn from(noise: NoiseSpec) -> Self {
        match noise {
            NoiseSpec::Normal(normal) => NoiseTable { normal },
        }
    }
}

#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub(crate) enum Design {
    #[default]
    Random,
    Fixed,
}

impl SimulateSpec {
    /// The input names in feature order.
    pub(crate) fn input_names(&self) -> Vec<String> {
        self.inputs.keys().cloned().collect()
    }

    /// Whether the simulated target holds the class labels 0 and 1.
    pub(crate) fn classification(&self) -> bool {
        self.task == Some(crate::spec::Task::Classification)
    }

    /// The noise standard deviation, however it was written (0 for labels).
    pub(crate) fn noise_sd(&self) -> f64 {
        match (self.noise_sd, self.noise) {
            (Some(sd), _) => sd,
            (None, Some(NoiseSpec::Normal(sd))) => sd,
            (None, None) => 0.0,
        }
    }
}

/// Checks a `[simulate]` table and the `[split]` it will use. Fails on the
/// first problem, naming the key.
pub(crate) fn validate(
    sim: &SimulateSpec,
    split: &SplitSpec,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<(), SpecError> {
    // Sizes first: nothing below may allocate for a size past its limit.
    let sizes = [
        (
            "simulate.replicates",
            sim.replicates,
            limits::REPLICATES,
            "replicates",
        ),
        (
            "simulate.train_size",
            sim.train_size,
            limits::TRAIN_SIZE,
            "training rows",
        ),
        (
            "simulate.test_points",
            sim.test_points.unwrap_or(0),
            limits::TEST_POINTS,
            "test points",
        ),
        (
            "simulate.test_grid",
            sim.test_grid.unwrap_or(0),
            limits::TEST_POINTS,
            "test points",
        ),
        (
            "simulate.truth",
            sim.truth.chars().count(),
            limits::EXPRESSION_LENGTH,
            "characters",
        ),
        (
            "simulate.replicates",
            sim.replicates.saturating_mul(sim.train_size),
            limits::SIMULATED_ROWS,
            "simulated rows (replicates × train_size)",
        ),
    ];
    for (key, value, limit, what) in sizes {
        limits::at_most(value, limit, what).map_err(|message| invalid(key, message))?;
    }
    if sim.inputs.is_empty() {
        return Err(invalid(
            "simulate.inputs",
            "declare at least one input, e.g. `inputs = { x = { uniform = [0, 10] } }`".into(),
        ));
    }
    let reserved = expr::reserved_names();
    for (name, input) in &sim.inputs {
        let key = format!("simulate.inputs.{name}");
        let mut chars = name.chars();
        let identifier = chars
            .next()
            .is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
            && chars.all(|c| c.is_ascii_alphanumeric() || c == '_');
        if !identifier {
            return Err(invalid(
                &key,
                format!(
                    "\"{name}\" cannot be used in the truth: input names are letters, digits \
                     and '_', starting with a letter"
                ),
            ));
        }
        if reserved.contains(&name.as_str()) {
            return Err(invalid(
                &key,
                format!("\"{name}\" is a function or constant of the truth; rename the input"),
            ));
        }
        let (what, values): (&str, &[f64]) = match input {
            InputSpec::Uniform(v) => ("uniform", v),
            InputSpec::Normal(v) => ("normal", v),
            InputSpec::Grid(v) => ("grid", v),
            InputSpec::NormalPair(v) => ("normal_pair", v),
        };
        let written = values
            .iter()
            .map(|v| v.to_string())
            .collect::<Vec<_>>()
            .join(", ");
        if values.iter().any(|v| !v.is_finite()) {
            return Err(invalid(
                &key,
                format!("{what} = [{written}] must hold finite numbers"),
            ));
        }
        match input {
            InputSpec::Normal([_, sd]) | InputSpec::NormalPair([_, _, sd]) if *sd <= 0.0 => {
                return Err(invalid(
                    &key,
                    format!(
                        "{what} = [{written}]: the standard deviation ({}) must be > 0",
                        if what == "normal" { "second" } else { "third" }
                    ),
                ));
            }
            InputSpec::Uniform([a, b]) | InputSpec::Grid([a, b]) if a >= b => {
                return Err(invalid(
                    &key,
                    format!("{what} = [{written}]: the range must have a < b"),
                ));
            }
            _ => {}
        }
    }
    let names = sim.input_names();
    if names.contains(&sim.target) {
        return Err(invalid(
            "simulate.target",
            format!("\"{}\" is also an input; name the target apart", sim.target),
        ));
    }
    expr::parse(&sim.truth, &names).map_err(|e| invalid("simulate.truth", e.to_string()))?;

    if sim.classification() {
        if sim.noise_sd.is_some() || sim.noise.is_some() {
            return Err(invalid(
                if sim.noise_sd.is_some() {
                    "simulate.noise_sd"
                } else {
                    "simulate.noise"
                },
                "a class label carries its own randomness (it is 1 with the truth's \
                 probability); remove the noise"
                    .into(),
            ));
        }
    } else {
        let sd = match (sim.noise_sd, sim.noise) {
            (Some(sd), None) => sd,
            (None, Some(NoiseSpec::Normal(sd))) => sd,
            _ => {
                return Err(invalid(
                    "simulate.noise_sd",
                    "give the noise once: `noise_sd = 0.5` or `noise = { normal = 0.5 }`".into(),
                ))
            }
        };
        if !sd.is_finite() || sd < 0.0 {
            return Err(invalid(
                "simulate.noise_sd",
                format!("{sd} must be a finite number ≥ 0"),
            ));
        }
    }
    if sim.train_size < 2 {
        return Err(invalid(
            "simulate.train_size",
            format!("{}: a training set needs at least 2 rows", sim.train_size),
        ));
    }
    if sim.replicates < 3 {
        return Err(invalid(
            "simulate.replicates",
            format!(
                "{}: the variance across replicates and its jackknife standard error need \
                 at least 3",
                sim.replicates
            ),
        ));
    }
    let grids = sim
        .inputs
        .values()
        .filter(|i| matches!(i, InputSpec::Grid(_)))
        .count();
    if grids > 0 && grid_side(sim.train_size, grids).is_none() {
        return Err(invalid(
            "simulate.train_size",
            format!(
                "{} rows cannot lay {grids} grid inputs out as a full grid: train_size must be \
                 m^{grids} for a whole number m ≥ 2",
                sim.train_size
            ),
        ));
    }
    match (sim.test_points, sim.test_grid) {
        (Some(m), None) => {
            if m == 0 {
                return Err(invalid(
                    "simulate.test_points",
                    "needs at least 1 point".into(),
                ));
            }
        }
        (None, Some(m)) => {
            if m < 2 {
                return Err(invalid(
                    "simulate.test_grid",
                    format!("{m}: a grid with both ends needs at least 2 points"),
                ));
            }
            if sim.inputs.len() != 1 {
                return Err(invalid(
                    "simulate.test_grid",
                    format!(
                        "a test grid spans one input, and there are {} ({}); use test_points",
                        names.len(),
                        names.join(", ")
                    ),
                ));
            }
            if let Some((name, InputSpec::Normal(_) | InputSpec::NormalPair(_))) =
                sim.inputs.iter().next()
            {
                return Err(invalid(
                    "simulate.test_grid",
                    format!("input \"{name}\" is normal and has no range to span; use test_points"),
                ));
            }
        }
        _ => {
            return Err(invalid(
                "simulate.test_points",
                "give exactly one of `test_points = M` (drawn from the inputs' distribution) \
                 and `test_grid = M` (evenly spaced over the one input's range)"
                    .into(),
            ))
        }
    }
    match split.method {
        SplitMethod::Column => {
            return Err(invalid(
                "split.method",
                "\"column\" reads fold labels from a data table; a simulation has none \
                 (use \"kfold\" or \"leave-one-out\")"
                    .into(),
            ))
        }
        SplitMethod::Kfold => {
            let folds = split.folds.unwrap_or(crate::spec::DEFAULT_FOLDS);
            if folds > sim.train_size {
                return Err(invalid(
                    "split.folds",
                    format!(
                        "{folds} folds but each replicate has only {} rows",
                        sim.train_size
                    ),
                ));
            }
        }
        SplitMethod::Ordered => {
            return Err(invalid(
                "split.method",
                "\"ordered\" reads time points from a data table; a simulation has none \
                 (use \"kfold\" or \"leave-one-out\")"
                    .into(),
            ))
        }
        SplitMethod::LeaveOneOut => {}
    }
    Ok(())
}

/// The number of points m per grid input when `rows` = m^`grids` exactly.
pub(crate) fn grid_side(rows: usize, grids: usize) -> Option<usize> {
    if grids == 0 {
        return None;
    }
    let mut m = 2usize;
    loop {
        let total = m.checked_pow(grids as u32)?;
        if total == rows {
            return Some(m);
        }
        if total > rows {
            return None;
        }
        m += 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    const SIM: &str = r#"
[experiment]
name = "s"
seed = 1

[simulate]
truth = "1 + x"
inputs = { x = { uniform = [0, 1] } }
noise_sd = 0.5
train_size = 20
replicates = 10
test_grid = 5

[split]
folds = 4

[[candidate]]
family = "polynomial"
degree = [1, 2]
"#;

    /// The validation error of a spec text, or "ok".
    fn check(text: &str) -> String {
        let path = Path::new("s.toml");
        match crate::spec::parse(path, text) {
            Err(e) => e.to_string(),
            Ok(spec) => match crate::spec::validate(path, &spec) {
                Err(e) => e.to_string(),
                Ok(_) => "ok".into(),
            },
        }
    }

    #[test]
    fn a_valid_simulation_spec_passes() {
        assert_eq!(check(SIM), "ok");
    }

    #[test]
    fn yaml_and_toml_read_the_same_simulation() {
        let yaml = r#"
experiment: {name: s, seed: 1}
simulate:
  truth: "1 + x"
  inputs: {x: {uniform: [0, 1]}}
  noise_sd: 0.5
  train_size: 20
  replicates: 10
  test_grid: 5
split: {folds: 4}
candidate:
  - {family: polynomial, degree: [1, 2]}
"#;
        let from_yaml = crate::spec::parse(Path::new("s.yaml"), yaml).unwrap();
        let from_toml = crate::spec::parse(Path::new("s.toml"), SIM).unwrap();
        assert_eq!(from_yaml, from_toml);
    }

    #[test]
    fn mistakes_name_their_key() {
        let cases = [
            ("noise_sd = 0.5", "nois_sd = 0.5", "did you mean `noise_sd`"),
            (
                "uniform = [0, 1]",
                "unifrom = [0, 1]",
                "did you mean `uniform`",
            ),
            (
                "uniform = [0, 1]",
                "uniform = [1, 0]",
                "simulate.inputs.x: uniform = [1, 0]",
            ),
            (
                "uniform = [0, 1]",
                "uniform = [0, 1], grid = [0, 1]",
                "exactly one of `uniform",
            ),
            (
                "test_grid = 5",
                "test_grid = 5\ntest_points = 3",
                "exactly one of",
            ),
            (
                "noise_sd = 0.5",
                "noise_sd = 0.5\nnoise = { normal = 1 }",
                "give the noise once",
            ),
            ("replicates = 10", "replicates = 2", "at least 3"),
            (
                "[split]\nfolds = 4",
                "[split]\nfolds = 40",
                "40 folds but each replicate has only 20",
            ),
            ("x = { uniform", "sin = { uniform", "a function or constant"),
            (
                "truth = \"1 + x\"",
                "truth = \"1 + (x\"",
                "unbalanced \"(\"",
            ),
            (
                "degree = [1, 2]",
                "degree = [1, 2]\nfeatures = [\"xx\"]",
                "did you mean `x`",
            ),
        ];
        for (from, to, wanted) in cases {
            assert!(SIM.contains(from), "{from}");
            let got = check(&SIM.replace(from, to));
            assert!(got.contains(wanted), "{to}: {got}");
        }
    }

    #[test]
    fn a_test_grid_spans_one_bounded_input() {
        let two = SIM.replace(
            "inputs = { x = { uniform = [0, 1] } }",
            "inputs = { x = { uniform = [0, 1] }, w = { normal = [0, 1] } }",
        );
        assert!(check(&two).contains("a test grid spans one input"));
        let normal = SIM.replace("uniform = [0, 1]", "normal = [0, 1]");
        assert!(check(&normal).contains("has no range to span"));
    }

    #[test]
    fn data_and_simulate_exclude_each_other() {
        let both = SIM.replace(
            "[simulate]",
            "[data]\ntable = \"d.csv\"\ntarget = \"y\"\nfeatures = [\"x\"]\n\n[simulate]",
        );
        assert!(check(&both).contains("not both"));
    }

    #[test]
    fn grid_side_finds_whole_roots() {
        assert_eq!(grid_side(100, 1), Some(100));
        assert_eq!(grid_side(100, 2), Some(10));
        assert_eq!(grid_side(99, 2), None);
        assert_eq!(grid_side(27, 3), Some(3));
    }
}
