//! The short table printed after a run: one line per setting.

use std::fmt::Write;

use super::format_number;
use crate::results::Results;

/// Renders the terminal summary.
pub fn render(results: &Results) -> String {
    let id_width = results
        .candidates
        .iter()
        .map(|c| c.id.chars().count())
        .max()
        .unwrap_or(9)
        .max(9);
    let metric = results.metric.name();
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{:<id_width$}  {:>8}  {:>10}  {:>10}  {:>9}",
        "candidate",
        "eff. df",
        format!("train {metric}"),
        format!("cv {metric}"),
        "± se",
    );
    for c in &results.candidates {
        let mark = match (c.id == results.chosen, c.id == results.choice.best) {
            (true, true) => "  <- kept (best cv)",
            (true, false) => "  <- kept",
            (false, true) => "  (best cv)",
            (false, false) => "",
        };
        let _ = writeln!(
            out,
            "{:<id_width$}  {:>8}  {:>10}  {:>10}  {:>9}{mark}",
            c.id,
            format_number(c.effective_df),
            format_number(c.train_score),
            format_number(c.cv_score),
            format_number(c.cv_se),
        );
    }
    let rule = match results.rule {
        crate::spec::Rule::OneSe => "one-standard-error rule",
        crate::spec::Rule::Lowest => "lowest cross-validated score",
    };
    let _ = write!(out, "kept {} by the {rule}", results.chosen);
    match results.test_score {
        Some(score) => {
            let _ = writeln!(
                out,
                "; test {metric} on {} locked rows: {}",
                results.rows.test,
                format_number(score)
            );
        }
        None => out.push_str("; no locked test set\n"),
    }
    out
}
