//! Receipts: `<spec-stem>.receipt.toml` beside the spec, holding the digests
//! of everything a run read and wrote, so that `verify` can recompute and say
//! exactly what changed.
//!
//! Digests are blake3, hex. The spec digest is taken over the spec's meaning
//! (its parsed, defaulted structure as canonical JSON), so comments, key order
//! and TOML-versus-YAML do not matter.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::plan::ExperimentPlan;
use crate::results::Results;
use crate::spec::SpecFile;

pub(crate) const SCHEMA: &str = "heldout-receipt/1";

/// The receipt file's contents.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct Receipt {
    pub(crate) schema: String,
    /// `heldout <version>`.
    pub(crate) tool: String,
    pub(crate) experiment: String,
    /// Digest of the spec's meaning.
    pub(crate) spec: String,
    /// Digest of the report templates.
    pub(crate) templates: String,
    /// Digest of the test set and fold assignment.
    pub(crate) folds: String,
    /// Data files, by the path written in the spec.
    pub(crate) data: Vec<FileDigest>,
    /// Digest of each candidate setting's numbers, in results order.
    pub(crate) candidates: Vec<NumbersDigest>,
    /// Simulation specs: digest of each setting's decomposition, then of
    /// cross-validation's choices (id `cv-choices`).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub(crate) simulation: Vec<NumbersDigest>,
    /// Output files, by name inside the experiment's output folder.
    pub(crate) outputs: Vec<FileDigest>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct FileDigest {
    pub(crate) path: String,
    pub(crate) blake3: String,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct NumbersDigest {
    pub(crate) id: String,
    pub(crate) blake3: String,
}

/// The tool's name and version as receipts record it.
pub(crate) fn tool_version() -> String {
    format!("heldout {}", env!("CARGO_PKG_VERSION"))
}

/// Where the receipt of a spec lives: beside it, `<stem>.receipt.toml`.
pub(crate) fn path_for(spec: &Path) -> PathBuf {
    let stem = spec
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    spec.with_file_name(format!("{stem}.receipt.toml"))
}

/// A spec's meaning: the parsed spec with the candidates' defaults spelled
/// out (each family's own, from the family registry), so that writing them
/// or not is the same meaning. It is itself a spec that runs and means the
/// same thing.
pub(crate) fn canonical_spec(spec: &SpecFile) -> SpecFile {
    let mut normal = spec.clone();
    for candidate in &mut normal.candidates {
        *candidate = candidate.with_defaults();
    }
    if let Some(sim) = &mut normal.simulate {
        // `noise = { normal = sd }` means `noise_sd = sd`.
        if let (None, Some(crate::spec::NoiseSpec::Normal(sd))) = (sim.noise_sd, sim.noise) {
            sim.noise_sd = Some(sd);
            sim.noise = None;
        }
    }
    normal
}

/// Digest of a spec's meaning.
pub(crate) fn spec_digest(spec: &SpecFile) -> String {
    let canonical = serde_json::to_vec(&canonical_spec(spec)).expect("specs always serialise");
    blake3::hash(&canonical).to_hex().to_string()
}

/// Digest of the test set and folds, by data-row number.
pub(crate) fn folds_digest(plan: &ExperimentPlan) -> String {
    let rows = &plan.table.row_numbers;
    let mut hasher = blake3::Hasher::new();
    let put_rows = |hasher: &mut blake3::Hasher, list: &[usize]| {
        hasher.update(&(list.len() as u64).to_le_bytes());
        for &r in list {
            hasher.update(&rows[r].to_le_bytes());
        }
    };
    put_rows(&mut hasher, &plan.assignment.test);
    for fold in &plan.assignment.folds {
        hasher.update(&(fold.repeat as u64).to_le_bytes());
        hasher.update(&(fold.label.len() as u64).to_le_bytes());
        hasher.update(fold.label.as_bytes());
        put_rows(&mut hasher, &fold.valid);
    }
    hasher.finalize().to_hex().to_string()
}

/// Digest of one candidate setting's numbers (bits, in a fixed order).
pub(crate) fn numbers_digest(candidate: &crate::results::CandidateResult) -> String {
    let mut hasher = blake3::Hasher::new();
    hasher.update(candidate.id.as_bytes());
    for value in [
        candidate.effective_df,
        candidate.train_score,
        candidate.cv_score,
        candidate.cv_se,
    ]
    .iter()
    .chain(&candidate.fold_scores)
    {
        hasher.update(&value.to_bits().to_le_bytes());
    }
    hasher.finalize().to_hex().to_string()
}

/// Digests of a simulation's numbers: one per setting (every number of its
/// decomposition, in field order, then its pointwise curves), then one of the
/// choices cross-validation made (`cv-choices`).
pub(crate) fn simulation_digests(output: &crate::simulate::SimulationOutput) -> Vec<NumbersDigest> {
    let bits = |hasher: &mut blake3::Hasher, values: &[f64]| {
        hasher.update(&(values.len() as u64).to_le_bytes());
        for value in values {
            hasher.update(&value.to_bits().to_le_bytes());
        }
    };
    let mut digests: Vec<NumbersDigest> = output
        .simulation
        .iter()
        .map(|s| {
            let mut hasher = blake3::Hasher::new();
            hasher.update(s.id.as_bytes());
            bits(&mut hasher, &s.numbers());
            if let Some(curve) = &s.pointwise {
                bits(&mut hasher, &curve.mean_fit);
                bits(&mut hasher, &curve.bias_sq);
                bits(&mut hasher, &curve.variance);
            }
            NumbersDigest {
                id: s.id.clone(),
                blake3: hasher.finalize().to_hex().to_string(),
            }
        })
        .collect();
    let cv = &output.simulation_summary.cv;
    let mut hasher = blake3::Hasher::new();
    for row in &cv.choices {
        hasher.update(row.id.as_bytes());
        hasher.update(&(row.count as u64).to_le_bytes());
    }
    for id in &cv.chosen_by_replicate {
        hasher.update(&(id.len() as u64).to_le_bytes());
        hasher.update(id.as_bytes());
    }
    bits(
        &mut hasher,
        &[
            output.simulation_summary.oracle_expected_mse,
            cv.mean_excess,
            cv.mean_excess_se,
            cv.expected_mse,
        ],
    );
    digests.push(NumbersDigest {
        id: "cv-choices".to_string(),
        blake3: hasher.finalize().to_hex().to_string(),
    });
    digests
}

/// Builds the receipt of a run from its plan, results and rendered outputs.
pub(crate) fn build(
    plan: &ExperimentPlan,
    results: &Results,
    outputs: &[(String, Vec<u8>)],
) -> Receipt {
    Receipt {
        schema: SCHEMA.to_string(),
        tool: tool_version(),
        experiment: results.experiment.clone(),
        spec: spec_digest(&plan.spec.spec),
        templates: crate::report::templates_digest(),
        folds: folds_digest(plan),
        data: vec![FileDigest {
            path: plan.spec.data().table.clone(),
            blake3: plan.table.digest.clone(),
        }],
        candidates: results
            .candidates
            .iter()
            .map(|c| NumbersDigest {
                id: c.id.clone(),
                blake3: numbers_digest(c),
            })
            .collect(),
        simulation: results
            .simulation
            .as_ref()
            .map(simulation_digests)
            .unwrap_or_default(),
        outputs: outputs
            .iter()
            .map(|(name, bytes)| FileDigest {
                path: name.clone(),
                blake3: blake3::hash(bytes).to_hex().to_string(),
            })
            .collect(),
    }
}

/// The receipt as TOML, with a header saying what it is.
pub(crate) fn to_toml(receipt: &Receipt) -> String {
    let body = toml::to_string(receipt).expect("receipts always serialise");
    format!(
        "# heldout receipt: digests of every input and output of one run.\n\
         # Written by `heldout run`; checked by `heldout verify`. Do not edit by hand.\n\n{body}"
    )
}

/// Reads a receipt file.
pub(crate) fn read(path: &Path) -> Result<Receipt, crate::error::SpecError> {
    let text = std::fs::read_to_string(path).map_err(|error| crate::error::SpecError::Read {
        path: path.to_path_buf(),
        error,
    })?;
    toml::from_str(&text).map_err(|e| crate::error::SpecError::Invalid {
        path: path.to_path_buf(),
        key: "receipt".into(),
        message: format!("not a heldout receipt: {}", e.message()),
    })
}

/// How far apart two doubles are, in units in the last place.
pub(crate) fn ulps_apart(a: f64, b: f64) -> u64 {
    // Map the bit patterns onto a monotone integer line.
    let ordered = |x: f64| {
        let bits = x.to_bits() as i64;
        if bits < 0 {
            i64::MIN - bits
        } else {
            bits
        }
    };
    ordered(a).abs_diff(ordered(b))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ulps_count_adjacent_doubles() {
        assert_eq!(ulps_apart(1.0, 1.0), 0);
        assert_eq!(ulps_apart(1.0, f64::from_bits(1.0f64.to_bits() + 3)), 3);
        // 0.1 + 0.2 is the next double above 0.3 (IEEE 754 binary64).
        assert_eq!(ulps_apart(0.1 + 0.2, 0.3), 1);
        assert_eq!(ulps_apart(-0.0, 0.0), 0);
        assert_eq!(ulps_apart(f64::from_bits(1), -f64::from_bits(1)), 2);
    }

    #[test]
    fn receipt_path_sits_beside_the_spec() {
        assert_eq!(
            path_for(Path::new("specs/heat-demand.toml")),
            PathBuf::from("specs/heat-demand.receipt.toml")
        );
    }
}
