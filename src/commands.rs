//! What each command does, from parsed arguments to files and printed text.

use std::io::{IsTerminal, Write};
use std::path::Path;
use std::sync::atomic::{AtomicUsize, Ordering};

use anyhow::Context;

use crate::cli::{Command, FoldsArgs, RunArgs};
use crate::error::UsageError;
use crate::report::{self, markdown::ReportInputs};
use crate::spec::{self, ReportFormat};
use crate::split::Placement;
use crate::{execute, output, plan, results};

/// Runs one parsed command.
pub fn dispatch(command: Command) -> anyhow::Result<()> {
    match command {
        Command::Run(args) => run(&args),
        Command::Folds(args) => folds(&args),
    }
}

fn run(args: &RunArgs) -> anyhow::Result<()> {
    let threads = match args.jobs {
        Some(0) => return Err(UsageError("--jobs must be at least 1".into()).into()),
        Some(n) => n,
        None => 0, // rayon's default: one per core
    };
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .context("cannot start the worker threads")?;
    for spec_path in &args.specs {
        pool.install(|| run_one(spec_path, args))?;
    }
    Ok(())
}

fn run_one(spec_path: &Path, args: &RunArgs) -> anyhow::Result<()> {
    let loaded = spec::load(spec_path)?;
    let formats = loaded.spec.report.formats.clone();
    let plan = plan::resolve(loaded)?;

    let total = execute::tasks(&plan).len();
    let show_progress = !args.quiet && std::io::stderr().is_terminal();
    let done = AtomicUsize::new(0);
    let progress = || {
        let finished = done.fetch_add(1, Ordering::Relaxed) + 1;
        if show_progress {
            eprint!("\rfitting: {finished}/{total} tasks");
        }
    };
    let fits = execute::run_all(&plan, &progress)?;
    if show_progress {
        eprintln!();
    }
    let results = results::assemble(&plan, &fits);

    let dir = output::experiment_dir(&args.out, &results.experiment);
    output::write_atomic(
        &dir.join("results.json"),
        results::to_json(&results).as_bytes(),
    )?;
    let spec_name = spec_path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let regenerate = format!("heldout run {spec_name}");
    if formats.contains(&ReportFormat::Markdown) {
        let text = report::markdown::render(
            &results,
            &ReportInputs {
                regenerate: &regenerate,
            },
        )
        .context("cannot render the Markdown report")?;
        output::write_atomic(&dir.join("report.md"), text.as_bytes())?;
    }
    if !args.quiet {
        if plan.table.dropped > 0 {
            eprintln!(
                "note: dropped {} rows with empty cells (missing = \"drop-rows\")",
                plan.table.dropped
            );
        }
        print!("{}", report::terminal::render(&results));
        println!("outputs in {}", dir.display());
    }
    Ok(())
}

fn folds(args: &FoldsArgs) -> anyhow::Result<()> {
    let loaded = spec::load(&args.spec)?;
    let key = loaded.data().key.clone();
    let plan = plan::resolve(loaded)?;
    let rows = plan.table.len();
    let mut out = String::new();
    out.push_str(if key.is_some() {
        "row,key,repeat,fold\n"
    } else {
        "row,repeat,fold\n"
    });
    let keys = key.as_deref().map(|k| plan.table.text_column(k));
    for repeat in 0..plan.assignment.repeats {
        let placements = plan.assignment.placements(rows, repeat);
        for (row, placement) in placements.iter().enumerate() {
            let fold = match placement {
                Placement::Test => "test".to_string(),
                Placement::Fold(i) => plan.assignment.folds[repeat * folds_per_repeat(&plan) + i]
                    .label
                    .clone(),
            };
            out.push_str(&plan.table.row_numbers[row].to_string());
            if let Some(keys) = keys {
                out.push(',');
                out.push_str(&csv_field(&keys[row]));
            }
            out.push_str(&format!(",{},{}\n", repeat + 1, csv_field(&fold)));
        }
    }
    std::io::stdout()
        .write_all(out.as_bytes())
        .context("cannot write to standard output")?;
    Ok(())
}

fn folds_per_repeat(plan: &plan::ExperimentPlan) -> usize {
    plan.assignment.folds.len() / plan.assignment.repeats
}

/// Quotes a CSV field when it needs quoting.
fn csv_field(text: &str) -> String {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}
