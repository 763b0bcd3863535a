//! From replicate outcomes to what `results.json` and the report show: the
//! decomposition of every setting, the oracle (lowest expected error), the
//! distribution of cross-validation's choices over replicates with its
//! average excess error over the oracle, and replicate 1 laid out as an
//! ordinary data set (so the usual sections of the report describe one
//! realistic analysis, and the simulation section how often it goes right).

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::decompose::{self, mean_and_se};
use super::design::TestDesign;
use super::run::{ReplicateOutcome, SimulationPlan};
use crate::execute::CandidateFits;
use crate::plan::ExperimentPlan;
use crate::results::lenient;
use crate::spec::simulation::InputSpec;

/// The simulation's part of `results.json` (flattened into the results).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct SimulationOutput {
    /// One entry per candidate setting, in results order.
    pub simulation: Vec<SimulatedSetting>,
    pub simulation_summary: SimulationSummary,
}

/// The decomposition of one setting's expected test error.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct SimulatedSetting {
    pub id: String,
    pub family: String,
    /// Effective degrees of freedom (the mean over replicates when it varies).
    #[serde(deserialize_with = "lenient::number")]
    pub effective_df: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub bias_sq: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub bias_sq_se: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub variance: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub variance_se: f64,
    /// σ², the irreducible error.
    #[serde(deserialize_with = "lenient::number")]
    pub noise: f64,
    /// bias_sq + variance + noise.
    #[serde(deserialize_with = "lenient::number")]
    pub decomposition_sum: f64,
    /// Mean squared error against independent test targets.
    #[serde(deserialize_with = "lenient::number")]
    pub expected_mse: f64,
    /// Monte-Carlo standard error of `expected_mse`.
    #[serde(deserialize_with = "lenient::number")]
    pub mc_se: f64,
    /// expected_mse − decomposition_sum: Monte-Carlo error of the test noise.
    #[serde(deserialize_with = "lenient::number")]
    pub identity_gap: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub identity_gap_se: f64,
    /// Expected training mean squared error, and its standard error.
    #[serde(deserialize_with = "lenient::number")]
    pub train_mse: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub train_mse_se: f64,
    /// Mean over replicates of the cross-validated score (the spec's metric).
    #[serde(deserialize_with = "lenient::number")]
    pub cv_estimate: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub cv_estimate_se: f64,
    /// Class labels only: the expected error rate of the fit's predicted
    /// classes at the test points, its Monte-Carlo standard error over
    /// replicates, and the mean training error rate.
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_number"
    )]
    pub expected_error_rate: Option<f64>,
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_number"
    )]
    pub expected_error_rate_se: Option<f64>,
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_number"
    )]
    pub train_error_rate: Option<f64>,
    /// With `[intervals]`: the mean over replicates of the share of test
    /// points whose fresh test target lies inside this setting's CV+
    /// interval, its Monte-Carlo standard error, and the mean width (absent
    /// when the level is too high for the rows, every interval unbounded).
    /// Class labels: the share whose fresh label lies in the CV+ prediction
    /// set, and in `interval_width` the mean set size (docs/intervals.md).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub interval_coverage: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub interval_coverage_se: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub interval_width: Option<f64>,
    /// With `test_grid`: the average fit and the variance at each grid point.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pointwise: Option<PointwiseCurve>,
}

impl SimulatedSetting {
    /// Every scalar, with its name in `results.json`, in field order.
    pub fn named_numbers(&self) -> Vec<(&'static str, f64)> {
        let mut numbers = vec![
            ("effective_df", self.effective_df),
            ("bias_sq", self.bias_sq),
            ("bias_sq_se", self.bias_sq_se),
            ("variance", self.variance),
            ("variance_se", self.variance_se),
            ("noise", self.noise),
            ("decomposition_sum", self.decomposition_sum),
            ("expected_mse", self.expected_mse),
            ("mc_se", self.mc_se),
            ("identity_gap", self.identity_gap),
            ("identity_gap_se", self.identity_gap_se),
            ("train_mse", self.train_mse),
            ("train_mse_se", self.train_mse_se),
            ("cv_estimate", self.cv_estimate),
            ("cv_estimate_se", self.cv_estimate_se),
        ];
        for (name, value) in [
            ("expected_error_rate", self.expected_error_rate),
            ("expected_error_rate_se", self.expected_error_rate_se),
            ("train_error_rate", self.train_error_rate),
        ] {
            numbers.extend(value.map(|v| (name, v)));
        }
        numbers
    }

    /// The scalars alone, in [`Self::named_numbers`] order.
    pub fn numbers(&self) -> Vec<f64> {
        self.named_numbers().iter().map(|(_, v)| *v).collect()
    }
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct PointwiseCurve {
    #[serde(deserialize_with = "lenient::numbers")]
    pub mean_fit: Vec<f64>,
    #[serde(deserialize_with = "lenient::numbers")]
    pub bias_sq: Vec<f64>,
    #[serde(deserialize_with = "lenient::numbers")]
    pub variance: Vec<f64>,
}

/// The setup, the oracle and cross-validation's choices.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct SimulationSummary {
    pub truth: String,
    pub target: String,
    pub inputs: BTreeMap<String, InputSpec>,
    /// The declared noise; absent for class labels.
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_number"
    )]
    pub noise_sd: Option<f64>,
    /// σ²; for class labels, the mean of p(1 − p) over the test points,
    /// the part of the Brier score no probability can remove.
    #[serde(deserialize_with = "lenient::number")]
    pub noise: f64,
    /// Class labels only: what the decomposition and the oracle mean for them.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub classes: Option<ClassSimulation>,
    pub train_size: usize,
    pub replicates: usize,
    /// `random` (inputs drawn per replicate) or `fixed`.
    pub design: String,
    pub test: TestSummary,
    /// The setting with the lowest expected error.
    pub oracle: String,
    #[serde(deserialize_with = "lenient::number")]
    pub oracle_expected_mse: f64,
    pub cv: ChoiceSummary,
    /// With `[intervals]`: the nominal coverage of the intervals whose
    /// coverage each setting reports.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub interval_level: Option<f64>,
}

/// A simulation of class labels 0 and 1, where the truth is P(label = 1 | x).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ClassSimulation {
    /// The labels, in class order; the second is the positive class.
    pub labels: Vec<String>,
    /// The Bayes error rate: the mean over the test points of min(p, 1 − p),
    /// the error rate of the best possible classifier, the irreducible part.
    #[serde(deserialize_with = "lenient::number")]
    pub bayes_error: f64,
    /// Its Monte-Carlo standard error as a mean over test points drawn from
    /// the inputs' distribution (absent for a test grid, an integration rule).
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_number"
    )]
    pub bayes_error_se: Option<f64>,
    /// The oracle's expected error rate (the oracle has the lowest).
    #[serde(deserialize_with = "lenient::number")]
    pub oracle_expected_error_rate: f64,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct TestSummary {
    /// `points` (drawn once) or `grid` (evenly spaced).
    pub kind: String,
    pub count: usize,
    /// With a grid: the input it spans, the points and the truth there.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub input: Option<String>,
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_numbers"
    )]
    pub x: Option<Vec<f64>>,
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_numbers"
    )]
    pub truth: Option<Vec<f64>>,
}

/// What the spec's cross-validation and rule chose over the replicates.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ChoiceSummary {
    /// Every setting in results order, with how often it was chosen.
    pub choices: Vec<ChoiceRow>,
    /// Replicates on which the choice was the oracle.
    pub chose_oracle: usize,
    /// Mean over replicates of expected_mse(choice) − expected_mse(oracle)
    /// (for class labels, of the expected error rates).
    #[serde(deserialize_with = "lenient::number")]
    pub mean_excess: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub mean_excess_se: f64,
    /// Mean over replicates of expected_mse(choice).
    #[serde(deserialize_with = "lenient::number")]
    pub expected_mse: f64,
    /// Class labels only: mean over replicates of expected_error_rate(choice).
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_number"
    )]
    pub expected_error_rate: Option<f64>,
    /// The chosen id, replicate by replicate.
    pub chosen_by_replicate: Vec<String>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ChoiceRow {
    pub id: String,
    pub count: usize,
    #[serde(deserialize_with = "lenient::number")]
    pub share: f64,
    #[serde(deserialize_with = "lenient::number")]
    pub expected_mse: f64,
    /// Class labels only: the setting's expected error rate.
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        deserialize_with = "lenient::optional_number"
    )]
    pub expected_error_rate: Option<f64>,
    /// expected_mse − the oracle's (for class labels, of the expected
    /// error rates).
    #[serde(deserialize_with = "lenient::number")]
    pub excess: f64,
}

/// Everything a simulation produced.
pub(crate) struct Simulated {
    /// Replicate 1 as a data set: training rows, then the test points.
    pub plan: ExperimentPlan,
    /// Replicate 1's fits, as the ordinary results expect them.
    pub fits: Vec<CandidateFits>,
    pub output: SimulationOutput,
}

/// Summarises the outcomes of every replicate (in replicate order).
pub(crate) fn summarise(plan: SimulationPlan, mut outcomes: Vec<ReplicateOutcome>) -> Simulated {
    let setup = &plan.setup;
    let classification = setup.classification;
    let m = plan.test_truth.len() as f64;
    // A label's variance about its probability, p(1 − p), is the Brier
    // score's floor, as σ² is the squared error's.
    let noise = if classification {
        plan.test_truth.iter().map(|p| p * (1.0 - p)).sum::<f64>() / m
    } else {
        setup.noise_sd * setup.noise_sd
    };
    let mut ids = Vec::new();
    let mut families = Vec::new();
    for candidate in &plan.candidates {
        for setting in &candidate.settings {
            ids.push(candidate.id(setting));
            families.push(candidate.family_name.to_string());
        }
    }
    let test_noise: Vec<Vec<f64>> = outcomes.iter().map(|o| o.test_noise.clone()).collect();
    let grid = matches!(setup.test, TestDesign::Grid(_));
    let mut settings = Vec::with_capacity(ids.len());
    for (s, (id, family)) in ids.iter().zip(&families).enumerate() {
        let predictions: Vec<Vec<f64>> = outcomes.iter().map(|o| o.test_pred[s].clone()).collect();
        let d = decompose::decompose(&plan.test_truth, &predictions, &test_noise, noise);
        let column = |pick: &dyn Fn(&ReplicateOutcome) -> f64| -> Vec<f64> {
            outcomes.iter().map(pick).collect()
        };
        let (train_mse, train_mse_se) = mean_and_se(&column(&|o| o.train_mse[s]));
        let (cv_estimate, cv_estimate_se) = mean_and_se(&column(&|o| o.cv_score[s]));
        let error_rate = classification.then(|| mean_and_se(&column(&|o| o.test_error_rate[s])));
        let train_error_rate =
            classification.then(|| mean_and_se(&column(&|o| o.train_error_rate[s])).0);
        let with_intervals =
            !outcomes.is_empty() && outcomes.iter().all(|o| o.interval_coverage.len() > s);
        let (interval_coverage, interval_coverage_se) = if with_intervals {
            let (mean, se) = mean_and_se(&column(&|o| o.interval_coverage[s].0));
            (Some(mean), Some(se).filter(|se| se.is_finite()))
        } else {
            (None, None)
        };
        let interval_width = with_intervals
            .then(|| mean_and_se(&column(&|o| o.interval_coverage[s].1)).0)
            .filter(|w| w.is_finite());
        let dfs = column(&|o| o.effective_df[s]);
        let effective_df = if dfs.iter().all(|&v| v == dfs[0]) {
            dfs[0]
        } else {
            dfs.iter().sum::<f64>() / dfs.len() as f64
        };
        settings.push(SimulatedSetting {
            id: id.clone(),
            family: family.clone(),
            effective_df,
            bias_sq: d.bias_sq,
            bias_sq_se: d.bias_sq_se,
            variance: d.variance,
            variance_se: d.variance_se,
            noise: d.noise,
            decomposition_sum: d.bias_sq + d.variance + d.noise,
            expected_mse: d.expected_mse,
            mc_se: d.mc_se,
            identity_gap: d.identity_gap,
            identity_gap_se: d.identity_gap_se,
            train_mse,
            train_mse_se,
            cv_estimate,
            cv_estimate_se,
            expected_error_rate: error_rate.map(|e| e.0),
            expected_error_rate_se: error_rate.map(|e| e.1),
            train_error_rate,
            interval_coverage,
            interval_coverage_se,
            interval_width,
            pointwise: grid.then_some(PointwiseCurve {
                mean_fit: d.pointwise.mean_fit,
                bias_sq: d.pointwise.bias_sq,
                variance: d.pointwise.variance,
            }),
        });
    }

    // The oracle has the lowest expected squared error, or for class labels
    // the lowest expected error rate (docs/simulation.md).
    let judged = |s: &SimulatedSetting| s.expected_error_rate.unwrap_or(s.expected_mse);
    let mut oracle = 0;
    for (s, setting) in settings.iter().enumerate() {
        if judged(setting) < judged(&settings[oracle]) {
            oracle = s;
        }
    }
    let best = judged(&settings[oracle]);
    let mut counts = vec![0usize; settings.len()];
    let mut excess = Vec::with_capacity(outcomes.len());
    let mut chosen_error = Vec::with_capacity(outcomes.len());
    let mut chosen_rate = Vec::with_capacity(outcomes.len());
    for o in &outcomes {
        counts[o.chosen] += 1;
        excess.push(judged(&settings[o.chosen]) - best);
        chosen_error.push(settings[o.chosen].expected_mse);
        chosen_rate.extend(settings[o.chosen].expected_error_rate);
    }
    let (mean_excess, mean_excess_se) = mean_and_se(&excess);
    let replicates = outcomes.len();
    let cv = ChoiceSummary {
        choices: settings
            .iter()
            .zip(&counts)
            .map(|(s, &count)| ChoiceRow {
                id: s.id.clone(),
                count,
                share: count as f64 / replicates as f64,
                expected_mse: s.expected_mse,
                expected_error_rate: s.expected_error_rate,
                excess: judged(s) - best,
            })
            .collect(),
        chose_oracle: counts[oracle],
        mean_excess,
        mean_excess_se,
        expected_mse: chosen_error.iter().sum::<f64>() / replicates as f64,
        expected_error_rate: classification
            .then(|| chosen_rate.iter().sum::<f64>() / replicates as f64),
        chosen_by_replicate: outcomes.iter().map(|o| ids[o.chosen].clone()).collect(),
    };
    let sim = plan
        .spec
        .spec
        .simulate
        .as_ref()
        .expect("a simulation plan has a [simulate] table");
    let test = match setup.test {
        TestDesign::Grid(m) => TestSummary {
            kind: "grid".to_string(),
            count: m,
            input: Some(setup.names[0].clone()),
            x: Some(plan.test_x.column(0).iter().copied().collect()),
            truth: Some(plan.test_truth.clone()),
        },
        TestDesign::Points(m) => TestSummary {
            kind: "points".to_string(),
            count: m,
            input: None,
            x: None,
            truth: None,
        },
    };
    let summary = SimulationSummary {
        truth: setup.truth_text.clone(),
        target: setup.target.clone(),
        inputs: sim.inputs.clone(),
        noise_sd: (!classification).then_some(setup.noise_sd),
        noise,
        classes: classification.then(|| {
            let misses: Vec<f64> = plan.test_truth.iter().map(|&p| p.min(1.0 - p)).collect();
            let (bayes_error, se) = mean_and_se(&misses);
            ClassSimulation {
                labels: vec!["0".to_string(), "1".to_string()],
                bayes_error,
                bayes_error_se: (!grid).then_some(se),
                oracle_expected_error_rate: best,
            }
        }),
        train_size: setup.train_size,
        replicates,
        design: if setup.fixed_design {
            "fixed"
        } else {
            "random"
        }
        .to_string(),
        test,
        oracle: settings[oracle].id.clone(),
        oracle_expected_mse: settings[oracle].expected_mse,
        cv,
        interval_level: plan.spec.spec.intervals.map(|iv| iv.level),
    };

    let (experiment, fits) = outcomes
        .first_mut()
        .and_then(|o| o.first.take())
        .expect("replicate 1 is always run when outcomes are kept");
    Simulated {
        plan: experiment,
        fits,
        output: SimulationOutput {
            simulation: settings,
            simulation_summary: summary,
        },
    }
}
