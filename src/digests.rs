//! Every digest that results.json, the receipt, the report and the cache
//! keys share, in one place so that each has one recipe: files, the spec's
//! meaning, the templates, folds, numbers, simulated tables, and the column
//! and row digests that go into cache keys. All are blake3; hex where a
//! person reads them. Changing a recipe here changes receipts (and, for the
//! column and row digests, cache keys: bump `cache::FORMAT` with them).

use std::collections::BTreeMap;

use crate::plan::ExperimentPlan;
use crate::results::CandidateResult;
use crate::simulate::SimulationOutput;
use crate::spec::SpecFile;

/// Digest of a file's bytes, hex.
pub(crate) fn file_digest(bytes: &[u8]) -> String {
    blake3::hash(bytes).to_hex().to_string()
}

/// Digest of a spec's meaning.
pub(crate) fn spec_digest(spec: &SpecFile) -> String {
    let canonical =
        serde_json::to_vec(&crate::spec::canonical(spec)).expect("specs always serialise");
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
pub(crate) fn numbers_digest(candidate: &CandidateResult) -> String {
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
pub(crate) fn simulation_digests(output: &SimulationOutput) -> Vec<(String, String)> {
    let bits = |hasher: &mut blake3::Hasher, values: &[f64]| {
        hasher.update(&(values.len() as u64).to_le_bytes());
        for value in values {
            hasher.update(&value.to_bits().to_le_bytes());
        }
    };
    let mut digests: Vec<(String, String)> = output
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
            (s.id.clone(), hasher.finalize().to_hex().to_string())
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
    digests.push((
        "cv-choices".to_string(),
        hasher.finalize().to_hex().to_string(),
    ));
    digests
}

/// Digest of every template that shapes an output (names and texts).
pub(crate) fn templates_digest() -> String {
    let mut hasher = blake3::Hasher::new();
    for (name, text) in crate::report::TEMPLATES {
        for part in [name, text] {
            hasher.update(&(part.len() as u64).to_le_bytes());
            hasher.update(part.as_bytes());
        }
    }
    hasher.finalize().to_hex().to_string()
}

/// Digest of a simulated table (a replicate's training rows and test points),
/// from its column digests; it stands where a table file's digest stands.
pub(crate) fn simulated_table_digest(column_digests: &BTreeMap<String, [u8; 32]>) -> String {
    let mut hasher = blake3::Hasher::new();
    hasher.update(b"heldout simulated table v1");
    for (name, digest) in column_digests {
        hasher.update(&(name.len() as u64).to_le_bytes());
        hasher.update(name.as_bytes());
        hasher.update(digest);
    }
    hasher.finalize().to_hex().to_string()
}

/// Digest of a column of values (their little-endian bits, with the length),
/// fed to the hasher in large blocks: one `update` per value would cost more
/// than the hashing itself.
pub(crate) fn digest_values(values: &[f64]) -> [u8; 32] {
    let mut hasher = blake3::Hasher::new();
    hasher.update(&(values.len() as u64).to_le_bytes());
    let mut block = Vec::with_capacity(8 * 4096);
    for chunk in values.chunks(4096) {
        block.clear();
        for value in chunk {
            block.extend_from_slice(&value.to_bits().to_le_bytes());
        }
        hasher.update(&block);
    }
    *hasher.finalize().as_bytes()
}

/// Digest of a list of rows (indices into the table).
pub(crate) fn digest_rows(rows: &[usize]) -> [u8; 32] {
    let mut block = Vec::with_capacity(8 * (rows.len() + 1));
    block.extend_from_slice(&(rows.len() as u64).to_le_bytes());
    for &row in rows {
        block.extend_from_slice(&(row as u64).to_le_bytes());
    }
    *blake3::hash(&block).as_bytes()
}
