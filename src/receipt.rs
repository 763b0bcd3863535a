//! Receipts: `<spec-stem>.receipt.toml` beside the spec, holding the digests
//! of everything a run read and wrote, so that `verify` can recompute and say
//! exactly what changed.
//!
//! Digests are blake3, hex. The spec digest is taken over the spec's meaning
//! (its parsed, defaulted structure as canonical JSON), so comments, key order
//! and TOML-versus-YAML do not matter.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::digests;
use crate::plan::ExperimentPlan;
use crate::results::Results;

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
        spec: digests::spec_digest(&plan.spec.spec),
        templates: digests::templates_digest(),
        folds: digests::folds_digest(plan),
        data: vec![FileDigest {
            path: plan.spec.data().table.clone(),
            blake3: plan.table.digest.clone(),
        }],
        candidates: results
            .candidates
            .iter()
            .map(|c| NumbersDigest {
                id: c.id.clone(),
                blake3: digests::numbers_digest(c),
            })
            .collect(),
        simulation: results
            .simulation
            .as_ref()
            .map(|output| {
                digests::simulation_digests(output)
                    .into_iter()
                    .map(|(id, blake3)| NumbersDigest { id, blake3 })
                    .collect()
            })
            .unwrap_or_default(),
        outputs: outputs
            .iter()
            .map(|(name, bytes)| FileDigest {
                path: name.clone(),
                blake3: digests::file_digest(bytes),
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
