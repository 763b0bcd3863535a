//! Model families. The unit of work is one fit of a family's whole grid of
//! settings on one training fold ([`Family::fit_path`]): path-aware fitting
//! shares the expensive part (one QR, one neighbour search) across settings.
//!
//! Adding a family: a new file here declaring its `registry::FamilyDef`
//! (name, keys, defaults, feature count, checks) beside its mathematics and
//! tests, then its `mod` line and one entry in `FAMILIES` below. Nothing
//! else names a family (see `docs/architecture.md`, "The family registry").

#[cfg(test)]
mod classification_reference;
pub(crate) mod discriminant;
mod double_double;
#[cfg(test)]
mod effective_df_tests;
mod feasibility;
mod kd_tree;
pub(crate) mod lasso;
mod least_squares;
pub(crate) mod linear;
pub(crate) mod logistic;
pub(crate) mod nearest_neighbors;
mod neighbour_vote;
#[cfg(test)]
mod penalised_reference;
pub(crate) mod polynomial;
pub(crate) mod registry;
pub(crate) mod ridge;
#[cfg(test)]
mod ridge_scaled_reference;
pub(crate) mod smoothing_spline;
pub(crate) mod spline;
mod standardise;
#[cfg(test)]
mod test_support;
pub(crate) mod thin_plate;

use std::fmt;

use nalgebra::DMatrix;

use crate::error::FitError;
pub use crate::models::feasibility::TrainingShape;
use crate::models::registry::{FamilyDef, SettingProblem, Settings};

/// Every family a spec may name, in the order the schema and the docs list
/// them. The order also fixes the order of keys in the canonical spec (first
/// appearance wins), so appending a family never changes an existing digest.
pub(crate) static FAMILIES: &[&FamilyDef] = &[
    &linear::FAMILY,
    &polynomial::FAMILY,
    &nearest_neighbors::FAMILY,
    &smoothing_spline::FAMILY,
    &spline::FAMILY,
    &thin_plate::FAMILY,
    &ridge::FAMILY,
    &lasso::FAMILY,
    &logistic::FAMILY,
    &discriminant::FAMILY,
];

/// The value of a family's tuning parameter.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SettingValue {
    Count(usize),
    /// A real value (penalty, degrees of freedom), shown in shortest round-trip form.
    Real(f64),
    /// A named variant (`shape=linear`).
    Word(&'static str),
}

impl fmt::Display for SettingValue {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SettingValue::Count(n) => write!(f, "{n}"),
            SettingValue::Real(v) => write!(f, "{v}"),
            SettingValue::Word(w) => write!(f, "{w}"),
        }
    }
}

/// One point of a family's grid; `None` for families without a tuning parameter.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Setting {
    pub(crate) param: Option<(&'static str, SettingValue)>,
}

impl Setting {
    pub(crate) fn none() -> Self {
        Setting { param: None }
    }

    pub(crate) fn count(name: &'static str, value: usize) -> Self {
        Setting {
            param: Some((name, SettingValue::Count(value))),
        }
    }

    pub(crate) fn real(name: &'static str, value: f64) -> Self {
        Setting {
            param: Some((name, SettingValue::Real(value))),
        }
    }

    pub(crate) fn word(name: &'static str, value: &'static str) -> Self {
        Setting {
            param: Some((name, SettingValue::Word(value))),
        }
    }
}

impl fmt::Display for Setting {
    /// `degree=3`, or empty for a family without a tuning parameter.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.param {
            Some((name, value)) => write!(f, "{name}={value}"),
            None => Ok(()),
        }
    }
}

/// What one setting's fit yields.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SettingFit {
    /// Predictions at the training rows, in their order.
    pub(crate) train_pred: Vec<f64>,
    /// Predictions at the evaluation rows, in their order.
    pub(crate) eval_pred: Vec<f64>,
    /// Effective degrees of freedom of this fit.
    pub(crate) effective_df: f64,
    /// Coefficients in the raw units of the features, intercept first, for
    /// families that have them.
    pub(crate) coefficients: Option<Vec<(String, f64)>>,
}

/// One fit of a family's whole grid: the training rows (`x_train` with one
/// column per bound feature, in the candidate's order, and `y_train`) and the
/// rows to predict (`x_eval`). Training predictions and raw-unit
/// coefficients are needed only for the final fit on all non-test rows
/// (`final_fit`); cross-validation folds use only the evaluation predictions,
/// so families may leave `train_pred` empty and `coefficients` unset when
/// `final_fit` is false.
///
/// With a class target (`classes` > 0) `y_train` holds class indices
/// 0..classes (a training fold may lack some of them) and every predicted row
/// is `classes + 1` numbers: the probability of each class, then the
/// predicted class (`metrics::ClassPrediction`). A class absent from the
/// training rows gets probability 0.
#[derive(Debug, Clone, Copy)]
pub struct FitRequest<'a> {
    pub x_train: &'a DMatrix<f64>,
    pub y_train: &'a [f64],
    pub x_eval: &'a DMatrix<f64>,
    pub final_fit: bool,
    /// The number of classes of a class target; 0 for a numeric target.
    pub classes: usize,
}

impl<'a> FitRequest<'a> {
    /// `(x_train, y_train, x_eval, final_fit)`.
    pub fn parts(&self) -> (&'a DMatrix<f64>, &'a [f64], &'a DMatrix<f64>, bool) {
        (self.x_train, self.y_train, self.x_eval, self.final_fit)
    }
}

/// Leave-one-out predictions at every training row, for every setting
/// (outer index: setting, inner: row).
pub type LeaveOneOut = Result<Vec<Vec<f64>>, FitError>;

/// A model family with its grid of settings, bound to its features. Its
/// name, keys and checks are in its registry entry (`registry::FamilyDef`);
/// the features it was bound to are held by the plan beside it.
pub trait Family: Send + Sync + std::fmt::Debug {
    /// The grid, in the order the spec lists it.
    fn settings(&self) -> Vec<Setting>;

    /// Whether every feature must vary over the fitting rows (all families
    /// but a line through the origin centre or scale their features).
    fn needs_spread(&self) -> bool {
        true
    }

    /// Why setting `setting` (an index into [`Family::settings`]) cannot be
    /// fitted on training rows of this `shape`, when that is known before
    /// fitting (too few rows, too few distinct values of a feature); `None`
    /// when it may be fitted. A setting that fails while fitting is caught
    /// by the executor either way; this lets `heldout plan` list it and
    /// the grid skip it (docs/spec.md, "Infeasible settings").
    fn infeasible(&self, _setting: usize, _shape: &TrainingShape<'_>) -> Option<String> {
        None
    }

    /// Fits every setting of the grid on the request's training rows and
    /// predicts at its evaluation rows (see [`FitRequest`]).
    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError>;

    /// [`Family::fit_grid`] with the request spelled out.
    fn fit_path(
        &self,
        x_train: &DMatrix<f64>,
        y_train: &[f64],
        x_eval: &DMatrix<f64>,
        final_fit: bool,
    ) -> Result<Vec<SettingFit>, FitError> {
        self.fit_classes(x_train, y_train, x_eval, final_fit, 0)
    }

    /// [`Family::fit_grid`] for a target of `classes` classes (0: numbers).
    fn fit_classes(
        &self,
        x_train: &DMatrix<f64>,
        y_train: &[f64],
        x_eval: &DMatrix<f64>,
        final_fit: bool,
        classes: usize,
    ) -> Result<Vec<SettingFit>, FitError> {
        self.fit_grid(&FitRequest {
            x_train,
            y_train,
            x_eval,
            final_fit,
            classes,
        })
    }

    /// Leave-one-out predictions at every training row, for every setting
    /// (outer index: setting, inner: row), without refits. Families that are
    /// linear smoothers (ŷ = Hy) implement it with the hat-diagonal shortcut
    /// ŷ₋ᵢ = yᵢ − (yᵢ − ŷᵢ)/(1 − hᵢᵢ); the default `None` means "refit once
    /// per left-out row".
    fn leave_one_out(&self, _x_train: &DMatrix<f64>, _y_train: &[f64]) -> Option<LeaveOneOut> {
        None
    }
}

/// The leave-one-out prediction of row i from its fitted value and leverage
/// (hat-diagonal shortcut for linear smoothers: the deleted residual is the
/// ordinary residual over 1 − hᵢᵢ; Cook & Weisberg 1982, *Residuals and
/// Influence in Regression*, §2.2). A leverage of 1 means the row alone
/// determines its fit.
pub(crate) fn loo_from_leverage(y: f64, fitted: f64, leverage: f64) -> Option<f64> {
    let denominator = 1.0 - leverage;
    (denominator > 1e-10).then(|| y - (y - fitted) / denominator)
}

/// One setting's leave-one-out predictions at training rows `0..rows`.
/// `left_out(i)` is `None` when row i alone determines its own fit
/// (leverage 1); that fails, naming `setting` and the row.
pub(crate) fn leave_one_out_rows(
    setting: &str,
    rows: usize,
    left_out: impl Fn(usize) -> Option<f64>,
) -> Result<Vec<f64>, FitError> {
    (0..rows)
        .map(|i| {
            left_out(i).ok_or_else(|| FitError::FullLeverage {
                setting: setting.to_string(),
                row: i + 1,
            })
        })
        .collect()
}

/// The grid of a penalised smoother: penalties, or target degrees of freedom
/// (each turned into a penalty by root finding on the smoother's trace).
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum SmootherGrid {
    Penalty(Vec<f64>),
    Df(Vec<f64>),
}

impl SmootherGrid {
    /// Exactly one of `penalty` (≥ 0) and `df` (≥ 1), checked as a grid.
    pub(crate) fn from_settings(settings: &Settings) -> Result<Self, SettingProblem> {
        match (settings.reals("penalty"), settings.reals("df")) {
            (Some(_), None) => Ok(SmootherGrid::Penalty(settings.real_grid("penalty", 0.0)?)),
            (None, Some(_)) => Ok(SmootherGrid::Df(settings.real_grid("df", 1.0)?)),
            _ => Err(SettingProblem::new(
                "penalty",
                format!(
                    "family \"{}\" needs exactly one grid: `penalty = [...]` or `df = [...]`",
                    settings.family()
                ),
            )),
        }
    }

    /// The settings of the grid, in spec order.
    pub(crate) fn settings(&self) -> Vec<Setting> {
        match self {
            SmootherGrid::Penalty(values) => values
                .iter()
                .map(|&penalty| Setting::real("penalty", penalty))
                .collect(),
            SmootherGrid::Df(values) => values.iter().map(|&df| Setting::real("df", df)).collect(),
        }
    }
}

/// Mean and population standard deviation of a column, summed in row order.
pub(crate) fn mean_and_sd(values: impl ExactSizeIterator<Item = f64> + Clone) -> (f64, f64) {
    let n = values.len() as f64;
    let mean = values.clone().sum::<f64>() / n;
    let var = values.map(|v| (v - mean) * (v - mean)).sum::<f64>() / n;
    (mean, var.sqrt())
}

/// Fails with [`FitError::ConstantFeature`] when a training column has no spread.
pub(crate) fn require_spread(
    features: &[String],
    x_train: &DMatrix<f64>,
    why: &'static str,
) -> Result<(), FitError> {
    for (j, name) in features.iter().enumerate() {
        let column = x_train.column(j);
        let first = column[0];
        if column.iter().all(|&v| v == first) {
            return Err(FitError::ConstantFeature {
                feature: name.clone(),
                value: first,
                why,
            });
        }
    }
    Ok(())
}
