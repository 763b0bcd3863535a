//! `heldout report`: re-render the figures and reports of specs from their
//! stored `results.json`, fitting nothing. The stored results are used only
//! when they belong to the spec as it is now (same meaning, same data file);
//! otherwise the command names what changed and asks for `heldout run`.
//!
//! Everything a report shows comes from `results.json`, except the spec as
//! read and the regeneration command, which come from the spec itself (its
//! meaning is pinned by the digest in `results.json`). Neither
//! `results.json` nor the receipt is rewritten.

use std::path::Path;

use anyhow::Context;

use crate::cli::ReportArgs;
use crate::error::{DataError, UnverifiedResults, UsageError};
use crate::results::{self, Results};
use crate::spec::LoadedSpec;
use crate::{output, plan, receipt, report};

pub(crate) fn report(args: &ReportArgs) -> anyhow::Result<()> {
    for spec_path in &args.specs {
        report_one(spec_path, args)?;
    }
    Ok(())
}

/// The first 16 hex digits of a digest, as messages show them.
fn short(digest: &str) -> &str {
    digest.get(..16).unwrap_or(digest)
}

fn report_one(spec_path: &Path, args: &ReportArgs) -> anyhow::Result<()> {
    let loaded = super::load_spec(spec_path, &args.data)?;
    let dir = output::experiment_dir(&args.out, &loaded.spec.experiment.name);
    let path = dir.join("results.json");
    let run_again = {
        let out = if args.out == Path::new("out") {
            String::new()
        } else {
            format!(" --out {}", args.out.display())
        };
        format!("heldout run {}{out}", spec_path.display())
    };
    let text = std::fs::read_to_string(&path).map_err(|error| {
        let why = if error.kind() == std::io::ErrorKind::NotFound {
            "there are no stored results".to_string()
        } else {
            format!("cannot read the stored results: {error}")
        };
        UsageError(format!(
            "{}: {why} for {}; run `{run_again}` first",
            path.display(),
            spec_path.display()
        ))
    })?;
    let unverified = unverified_because(spec_path, &path, text.as_bytes(), &run_again)?;
    let unverified = match unverified {
        Some(why) if !args.unverified => {
            return Err(UnverifiedResults(format!(
                "{why}; run `{run_again}` to compute them afresh, or pass --unverified to render \
                 them marked as unverified"
            ))
            .into())
        }
        Some(why) => {
            eprintln!("warning: {why}; the reports say UNVERIFIED on their first line");
            Some(why)
        }
        None => None,
    };
    let mut results = results::from_json(&text).map_err(|error| {
        UsageError(format!(
            "{}: cannot read the stored results ({error}); run `{run_again}` to write them afresh",
            path.display()
        ))
    })?;

    let changed = stale_inputs(&loaded, &results)?;
    if !changed.is_empty() {
        return Err(UsageError(format!(
            "{}: the stored results are stale: {}; run `{run_again}` (cached fits are reused)",
            path.display(),
            changed.join("; ")
        ))
        .into());
    }

    let tool = receipt::tool_version();
    if results.inputs.tool != tool {
        eprintln!(
            "note: {} was computed by {}; its numbers are shown as stored, in the reports of {tool}",
            path.display(),
            results.inputs.tool
        );
    }
    // The page says which templates rendered it: the ones compiled in now.
    let templates = crate::digests::templates_digest();
    if results.inputs.templates != templates {
        eprintln!(
            "note: the report templates changed since the run (blake3 {} then, {} now); \
             results.json and the receipt still record the run's, so `heldout verify` will say \
             so until `{run_again}` writes them afresh",
            short(&results.inputs.templates),
            short(&templates)
        );
        results.inputs.templates = templates;
    }

    let formats = &loaded.spec.report.formats;
    if formats.is_empty() {
        eprintln!(
            "note: {} asks for no reports ([report] formats is empty); nothing to render",
            spec_path.display()
        );
        return Ok(());
    }
    let regenerate = super::regenerate_command(spec_path);
    let spec_text = report::spec_as_read(&loaded.spec);
    let inputs = report::ReportInputs {
        regenerate: &regenerate,
        spec_text: &spec_text,
        unverified: unverified.as_deref(),
    };
    let files =
        report::render_reports(&results, formats, &inputs).context("cannot render the reports")?;
    for (name, bytes) in &files {
        output::write_atomic(&dir.join(name), bytes)?;
    }
    if !args.quiet {
        println!(
            "re-rendered {} files in {} from results.json (nothing fitted)",
            files.len(),
            dir.display()
        );
    }
    Ok(())
}

/// Why the stored results at `path` cannot be vouched for, `None` when they
/// are byte for byte the results.json the spec's receipt records. A report
/// re-rendered from an edited results.json would pass the edit off as
/// computed.
fn unverified_because(
    spec_path: &Path,
    path: &Path,
    bytes: &[u8],
    run_again: &str,
) -> anyhow::Result<Option<String>> {
    let receipt_path = receipt::path_for(spec_path);
    if !receipt_path.is_file() {
        return Ok(Some(format!(
            "{}: there is no receipt ({}) to check these results against",
            path.display(),
            receipt_path.display()
        )));
    }
    let recorded = receipt::read(&receipt_path)
        .with_context(|| format!("cannot check {} against its receipt", path.display()))?;
    let digest = crate::digests::file_digest(bytes);
    let Some(expected) = recorded.outputs.iter().find(|o| o.path == "results.json") else {
        return Ok(Some(format!(
            "{}: the receipt {} records no results.json (was it written by `{run_again}`?)",
            path.display(),
            receipt_path.display()
        )));
    };
    if expected.blake3 == digest {
        return Ok(None);
    }
    Ok(Some(format!(
        "{} is not the results.json its receipt {} records (blake3 {} there, {} here): \
         its numbers were edited or come from another run",
        path.display(),
        receipt_path.display(),
        short(&expected.blake3),
        short(&digest)
    )))
}

/// What differs between the inputs the stored results record and the spec
/// and data as they are now, in words (empty when nothing does).
fn stale_inputs(loaded: &LoadedSpec, results: &Results) -> Result<Vec<String>, DataError> {
    let mut changed = Vec::new();
    let spec_now = crate::digests::spec_digest(&loaded.spec);
    if results.inputs.spec != spec_now {
        changed.push(format!(
            "the spec {} changed meaning since the run (blake3 {} in results.json, {} now)",
            loaded.path.display(),
            short(&results.inputs.spec),
            short(&spec_now)
        ));
    }
    // A simulation's data are drawn from the spec, whose digest covers them.
    if let Some(data) = &loaded.spec.data {
        let file = plan::data_path(loaded)?;
        let bytes = std::fs::read(&file).map_err(|error| DataError::Read {
            path: file.clone(),
            error,
        })?;
        let digest = crate::digests::file_digest(&bytes);
        if results.data.digest != digest {
            changed.push(format!(
                "the data file {} changed since the run (blake3 {} in results.json, {} now)",
                data.table,
                short(&results.data.digest),
                short(&digest)
            ));
        }
    }
    Ok(changed)
}
