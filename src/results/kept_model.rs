//! `final.model` in `results.json`: the kept setting as data, so that a
//! reader can apply it without heldout (docs/predict.md, "The kept model as
//! data"). Families whose fit is a sum of coefficients times powers of the
//! features (those that report `final.coefficients` in raw units) get one
//! term per design column, each naming its feature and power; every other
//! fit (neighbours, smoothers, discriminants, standardised polynomials) is
//! stated to need the training rows, which `heldout predict` reads from the
//! spec's table.
//!
//! The terms are read back from the coefficient names the families write
//! (`intercept`, `<feature>`, `<feature>^<power>`, with `class <c>: ` before
//! them for a class target), matched exactly against the candidate's
//! feature names, so no family is named here.

use serde::{Deserialize, Serialize};

use super::lenient;
use crate::plan::{CandidatePlan, ExperimentPlan};

/// `form` of a model that is a sum of terms.
pub const FORM_COEFFICIENTS: &str = "coefficients";
/// `form` of a model that needs its training rows to predict.
pub const FORM_TRAINING_ROWS: &str = "training-rows";

/// The kept setting as data.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct KeptModel {
    /// The family's spec name.
    pub family: String,
    /// The features the fit uses, in design order.
    pub features: Vec<String>,
    /// [`FORM_COEFFICIENTS`] or [`FORM_TRAINING_ROWS`].
    pub form: String,
    /// One per design column, intercept first (per class for a class
    /// target); empty for [`FORM_TRAINING_ROWS`].
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub terms: Vec<Term>,
    /// The encoding of each categorical feature among `features`.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub encodings: Vec<Encoding>,
    /// How a prediction is made, in words.
    pub prediction: String,
}

/// One design column and its coefficient in the raw units of its feature:
/// coefficient × value^power, where the value is the feature's number, or
/// for a categorical feature (`level` given) 1 when the row's label is that
/// level and 0 otherwise; an interaction multiplies by a second factor
/// (`times`).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Term {
    /// The name in `final.coefficients`.
    pub name: String,
    /// A class target: the class whose log-odds against the reference
    /// class this term adds to.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub class: Option<String>,
    /// The feature (absent for the intercept).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub feature: Option<String>,
    /// The power of the feature (0 for the intercept).
    pub power: u32,
    /// A categorical feature: the level whose indicator this term is
    /// (`other` stands for the pooled levels listed in `encodings`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub level: Option<String>,
    /// An interaction: the second factor the term is multiplied by.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub times: Option<Factor>,
    #[serde(deserialize_with = "lenient::number")]
    pub coefficient: f64,
}

/// The second factor of an interaction term: a numeric feature's value, or
/// a categorical feature's indicator of `level`.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Factor {
    pub feature: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub level: Option<String>,
}

/// How the fit on all non-test rows encoded one categorical feature: its
/// levels in byte order, the reference level (no term: it scores 0, as does
/// a level the fit never saw), and the rare levels pooled into `other`.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Encoding {
    pub column: String,
    pub levels: Vec<String>,
    pub reference: String,
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub pooled: Vec<String>,
}

/// The kept model of `candidate` from its final fit's named coefficients.
pub(crate) fn describe(
    plan: &ExperimentPlan,
    candidate: &CandidatePlan,
    coefficients: Option<&[(String, f64)]>,
    encodings: Vec<Encoding>,
) -> KeptModel {
    let labels = plan.task.classes.as_ref().map(|c| c.labels.as_slice());
    let terms = coefficients.and_then(|named| {
        named
            .iter()
            .map(|(name, value)| term(name, *value, &candidate.features, labels))
            .collect::<Option<Vec<Term>>>()
    });
    let (form, terms, prediction) = match terms {
        Some(terms) if !terms.is_empty() => {
            let prediction = match labels {
                None => "the prediction is the sum over the terms of coefficient × feature^power \
                         (the intercept's power is 0), with the features in their raw units"
                    .to_string(),
                Some(_) => "each named class's score is the sum over its terms of coefficient × \
                            feature^power (the intercept's power is 0), with the features in \
                            their raw units; the reference class (the first class in class order \
                            present among the training rows) scores 0, and each class's \
                            probability is exp(score) divided by the sum of exp(score) over the \
                            classes"
                    .to_string(),
            };
            let prediction = if terms.iter().any(|t| t.level.is_some() || t.times.is_some()) {
                format!(
                    "{prediction}; a term with a level counts 1 when the row's label is that \
                     level and 0 otherwise (the reference level and a level the fit never saw \
                     have no term), and a term with `times` is multiplied by that factor"
                )
            } else {
                prediction
            };
            let prediction = if plan.spec.data().missing == crate::spec::MissingPolicy::Impute {
                format!(
                    "{prediction}; a missing cell is first filled with its feature's median over \
                     the training rows (the non-test rows of the spec's table), and a \
                     missing(<feature>) term is 1 where the cell was missing, 0 elsewhere"
                )
            } else {
                prediction
            };
            (FORM_COEFFICIENTS, terms, prediction)
        }
        _ => (
            FORM_TRAINING_ROWS,
            Vec::new(),
            "the fit is not a sum of coefficients in the raw units of the features: predicting \
             needs the training rows (the non-test rows of the spec's table), which `heldout \
             predict` reads from the spec's table and refits on"
                .to_string(),
        ),
    };
    KeptModel {
        family: candidate.family_name.to_string(),
        features: candidate.features.clone(),
        form: form.to_string(),
        terms,
        encodings,
        prediction,
    }
}

/// One coefficient's term, or `None` when its name is not a raw-unit
/// power of one of `features` (a standardised column, say).
fn term(
    name: &str,
    coefficient: f64,
    features: &[String],
    labels: Option<&[String]>,
) -> Option<Term> {
    let (class, column) = match labels {
        None => (None, name),
        Some(labels) => {
            // `class <c>: <column>`, c the 1-based position in class order.
            let rest = name.strip_prefix("class ")?;
            let (number, column) = rest.split_once(": ")?;
            let position: usize = number.parse().ok()?;
            let label = labels.get(position.checked_sub(1)?)?;
            (Some(label.clone()), column)
        }
    };
    if column == "intercept" {
        return Some(Term {
            name: name.to_string(),
            class,
            feature: None,
            power: 0,
            level: None,
            times: None,
            coefficient,
        });
    }
    let (main, times) = match factor(column, features) {
        // A whole name first: a feature may itself contain ':'.
        Some(main) => (main, None),
        None => {
            let (left, right) = column.split_once(':')?;
            let (feature, power, level) = factor(left, features)?;
            let (second, second_power, second_level) = factor(right, features)?;
            if second_power != 1 {
                return None;
            }
            (
                (feature, power, level),
                Some(Factor {
                    feature: second.clone(),
                    level: second_level,
                }),
            )
        }
    };
    let (feature, power, level) = main;
    Some(Term {
        name: name.to_string(),
        class,
        feature: Some(feature.clone()),
        power,
        level,
        times,
        coefficient,
    })
}

/// One factor of a column name: `<feature>`, `<feature>^<power>` or
/// `<feature>=<level>`, matched exactly against `features`.
fn factor<'f>(column: &str, features: &'f [String]) -> Option<(&'f String, u32, Option<String>)> {
    // A feature's own name first, so a feature named `x^2` is never taken
    // for the square of a feature named `x`.
    if let Some(feature) = features.iter().find(|f| f.as_str() == column) {
        return Some((feature, 1, None));
    }
    features.iter().find_map(|feature| {
        let rest = column.strip_prefix(feature.as_str())?;
        if let Some(level) = rest.strip_prefix('=') {
            return Some((feature, 1, Some(level.to_string())));
        }
        let exponent = rest.strip_prefix('^')?;
        let power: u32 = exponent.parse().ok()?;
        (exponent == power.to_string() && power >= 2).then_some((feature, power, None))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn names(list: &[&str]) -> Vec<String> {
        list.iter().map(|s| s.to_string()).collect()
    }

    #[test]
    fn names_become_features_and_powers() {
        let features = names(&["x", "x2"]);
        let t = term("x^3", 1.5, &features, None).unwrap();
        assert_eq!((t.feature.as_deref(), t.power), (Some("x"), 3));
        let t = term("x2", 2.0, &features, None).unwrap();
        assert_eq!((t.feature.as_deref(), t.power), (Some("x2"), 1));
        let t = term("x2^2", 2.0, &features, None).unwrap();
        assert_eq!((t.feature.as_deref(), t.power), (Some("x2"), 2));
        let t = term("intercept", 0.5, &features, None).unwrap();
        assert_eq!((t.feature, t.power), (None, 0));
        // Standardised columns are not raw-unit terms.
        assert!(term("z(x)^2", 1.0, &features, None).is_none());
        assert!(term("x^02", 1.0, &features, None).is_none());
        assert!(term("y", 1.0, &features, None).is_none());
        // A feature named like a power of another is itself.
        let odd = names(&["x", "x^2"]);
        let t = term("x^2", 1.0, &odd, None).unwrap();
        assert_eq!((t.feature.as_deref(), t.power), (Some("x^2"), 1));
    }

    #[test]
    fn class_terms_name_their_class() {
        let features = names(&["a"]);
        let labels = names(&["no", "yes"]);
        let t = term("class 2: a", -0.25, &features, Some(&labels)).unwrap();
        assert_eq!(t.class.as_deref(), Some("yes"));
        assert_eq!((t.feature.as_deref(), t.power), (Some("a"), 1));
        assert!(term("class 3: a", 1.0, &features, Some(&labels)).is_none());
        assert!(term("class 2: z(a)^1", 1.0, &features, Some(&labels)).is_none());
    }
}
