//! The short table printed after a run: one line per setting.

use std::fmt::Write;

use super::{format_df, format_number};
use crate::results::Results;
use crate::simulate::summary::SimulatedSetting;

/// Renders the terminal summary.
pub(crate) fn render(results: &Results) -> String {
    let id_width = results
        .candidates
        .iter()
        .map(|c| c.id.chars().count())
        .max()
        .unwrap_or(9)
        .max(9);
    let metric = results.metric.name();
    let mut out = String::new();
    if results.peek {
        let _ = writeln!(
            out,
            "NOTE: [choose] peek = true scored every setting on the locked test set, so the kept \
             setting's test score is no longer an unbiased estimate of its error"
        );
    }
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
        if let Some(first) = c.infeasible.first() {
            let more = match c.infeasible.len() {
                1 => String::new(),
                n => format!(", and {} more", n - 1),
            };
            let _ = writeln!(
                out,
                "{:<id_width$}  infeasible: {} ({}{more})",
                c.id, first.reason, first.fold
            );
            continue;
        }
        let _ = writeln!(
            out,
            "{:<id_width$}  {:>8}  {:>10}  {:>10}  {:>9}{mark}",
            c.id,
            format_df(c.effective_df),
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
            let _ = write!(
                out,
                "; test {metric} on {} locked rows: {}",
                results.rows.test,
                format_number(score)
            );
            match &results.test_interval {
                Some(i) => {
                    let _ = writeln!(
                        out,
                        " (95% interval {} to {})",
                        format_number(i.low),
                        format_number(i.high)
                    );
                }
                None => out.push('\n'),
            }
        }
        None => out.push_str("; no locked test set\n"),
    }
    out
}

/// Renders the bias–variance table of a simulation spec (empty otherwise).
pub(crate) fn render_simulation(results: &Results) -> String {
    let Some(sim) = &results.simulation else {
        return String::new();
    };
    let summary = &sim.simulation_summary;
    let id_width = sim
        .simulation
        .iter()
        .map(|s| s.id.chars().count())
        .max()
        .unwrap_or(9)
        .max(9);
    let mut out = String::new();
    // The table has the same shape for numbers and class labels; four of its
    // columns differ (a class simulation judges settings by error rate).
    type Columns = fn(&SimulatedSetting) -> [f64; 4];
    let (title, names, columns): (String, [&str; 4], Columns) = match &summary.classes {
        Some(classes) => (
            format!(
                "expected error rate at {} test points; Bayes error rate {}",
                summary.test.count,
                format_number(classes.bayes_error)
            ),
            ["exp. brier", "exp. err", "± mc se", "train err"],
            |s| {
                let rate = |v: Option<f64>| v.unwrap_or(f64::NAN);
                [
                    s.expected_mse,
                    rate(s.expected_error_rate),
                    rate(s.expected_error_rate_se),
                    rate(s.train_error_rate),
                ]
            },
        ),
        None => (
            format!(
                "expected error at {} test points; noise σ² = {}",
                summary.test.count,
                format_number(summary.noise)
            ),
            ["sum", "exp. mse", "± mc se", "train mse"],
            |s| [s.decomposition_sum, s.expected_mse, s.mc_se, s.train_mse],
        ),
    };
    let _ = writeln!(
        out,
        "\nsimulation: {} replicates of {} rows; {title}",
        summary.replicates, summary.train_size,
    );
    let [c1, c2, c3, c4] = names;
    let _ = writeln!(
        out,
        "{:<id_width$}  {:>8}  {:>9}  {:>9}  {c1:>9}  {c2:>9}  {c3:>9}  {c4:>9}  {:>8}",
        "candidate", "eff. df", "bias²", "variance", "cv chose",
    );
    for (s, choice) in sim.simulation.iter().zip(&summary.cv.choices) {
        let mark = if s.id == summary.oracle {
            "  <- oracle"
        } else {
            ""
        };
        let [v1, v2, v3, v4] = columns(s).map(format_number);
        let _ = writeln!(
            out,
            "{:<id_width$}  {:>8}  {:>9}  {:>9}  {v1:>9}  {v2:>9}  {v3:>9}  {v4:>9}  {:>8}{mark}",
            s.id,
            format_df(s.effective_df),
            format_number(s.bias_sq),
            format_number(s.variance),
            choice.count,
        );
    }
    let _ = writeln!(
        out,
        "cross-validation chose the oracle {} on {} of {} replicates; mean excess error of its \
         choice over the oracle: {} ± {}",
        summary.oracle,
        summary.cv.chose_oracle,
        summary.replicates,
        format_number(summary.cv.mean_excess),
        format_number(summary.cv.mean_excess_se)
    );
    out
}
