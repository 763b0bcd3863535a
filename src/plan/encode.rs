//! Binding categorical features and interactions to a candidate
//! (docs/spec.md, "Categorical features" and "Interactions").
//!
//! A candidate with a categorical feature or an interaction is bound to an
//! [`EncodedFamily`]: its design matrices carry each categorical feature as
//! one column of level codes, and every fit (a fold, the fit on all non-test
//! rows, a leave-one-out refit, the refits behind intervals and `heldout
//! predict`) turns them into indicator columns fitted on its own training
//! rows only (`data::encode::LevelEncoding`), builds the family on the
//! encoded columns and fits it. So the encoding never sees a row the fit
//! predicts, wherever the fit is made.

use std::sync::Arc;

use nalgebra::DMatrix;

use super::CandidatePlan;
use crate::data::encode::LevelEncoding;
use crate::data::missing::indicated_feature;
use crate::data::Table;
use crate::error::FitError;
use crate::models::registry::{CategoricalUse, FamilyDef, KeyValue, SettingProblem, Settings};
use crate::models::{Family, FitRequest, Setting, SettingFit, TrainingShape};
use crate::spec::{FamilySpec, LoadedSpec};

/// One raw feature of an encoded candidate.
#[derive(Debug, Clone)]
enum Feature {
    Numeric(String),
    /// A 0/1 column that enters once, as it is: the indicator of a
    /// feature's missing cells under `missing = "impute"`.
    Plain(String),
    Categorical {
        name: String,
        levels: Arc<Vec<String>>,
    },
}

impl Feature {
    fn name(&self) -> &str {
        match self {
            Feature::Numeric(name) | Feature::Plain(name) | Feature::Categorical { name, .. } => {
                name
            }
        }
    }
}

/// A family whose categorical features and interactions are encoded inside
/// each fit, on its training rows.
#[derive(Debug, Clone)]
pub(crate) struct EncodedFamily {
    def: &'static FamilyDef,
    settings: Settings,
    features: Vec<Feature>,
    /// Pairs of indices into `features`.
    interactions: Vec<(usize, usize)>,
    min_level_rows: usize,
    /// The grid, as the family bound to the raw features labels it.
    grid: Vec<Setting>,
    needs_spread: bool,
}

/// The encoded design of one fit: column names, training and evaluation
/// matrices, and how many trailing columns are indicators or interactions.
struct Encoded {
    names: Vec<String>,
    x_train: DMatrix<f64>,
    x_eval: DMatrix<f64>,
    plain: usize,
}

impl EncodedFamily {
    /// The encoding of each categorical feature on these training rows.
    fn fit_levels(&self, x_train: &DMatrix<f64>) -> Vec<Option<LevelEncoding>> {
        let with_reference = self.def.categorical == CategoricalUse::Indicators;
        self.features
            .iter()
            .enumerate()
            .map(|(j, feature)| match feature {
                Feature::Numeric(_) | Feature::Plain(_) => None,
                Feature::Categorical { levels, .. } => Some(LevelEncoding::fit(
                    x_train.column(j).iter().copied(),
                    levels.len(),
                    self.min_level_rows,
                    with_reference,
                )),
            })
            .collect()
    }

    /// Numeric features first (in order), then the missing-cell indicators,
    /// then each categorical feature's indicators, then the interactions: all
    /// but the numeric features trail, so a family that expands its features
    /// can take them plainly.
    fn encode(
        &self,
        x_train: &DMatrix<f64>,
        x_eval: &DMatrix<f64>,
        encodings: &[Option<LevelEncoding>],
    ) -> Encoded {
        // Each design column as a function of a raw row.
        type Column<'a> = Box<dyn Fn(&dyn Fn(usize) -> f64) -> f64 + 'a>;
        let mut names = Vec::new();
        let mut columns: Vec<Column<'_>> = Vec::new();
        for (j, feature) in self.features.iter().enumerate() {
            if let Feature::Numeric(name) = feature {
                names.push(name.clone());
                columns.push(Box::new(move |row| row(j)));
            }
        }
        let numeric = names.len();
        for (j, feature) in self.features.iter().enumerate() {
            if let Feature::Plain(name) = feature {
                names.push(name.clone());
                columns.push(Box::new(move |row| row(j)));
            }
        }
        let indicator = |j: usize, column: usize| {
            let encoding = encodings[j].as_ref().expect("a categorical feature");
            move |row: &dyn Fn(usize) -> f64| {
                f64::from(u8::from(encoding.column_of(row(j)) == Some(column)))
            }
        };
        for (j, feature) in self.features.iter().enumerate() {
            if let (Feature::Categorical { name, levels }, Some(encoding)) =
                (feature, &encodings[j])
            {
                for (column, group) in encoding.columns().enumerate() {
                    names.push(format!("{name}={}", encoding.name(group, levels)));
                    columns.push(Box::new(indicator(j, column)));
                }
            }
        }
        for &(a, b) in &self.interactions {
            // The numeric one first when one is categorical (the plan
            // refuses two categorical ones).
            let (n, c) = match self.features[a] {
                Feature::Categorical { .. } => (b, a),
                Feature::Numeric(_) | Feature::Plain(_) => (a, b),
            };
            let n_name = self.features[n].name();
            match (&self.features[c], &encodings[c]) {
                (Feature::Categorical { name, levels }, Some(encoding)) => {
                    for (column, group) in encoding.columns().enumerate() {
                        names.push(format!("{n_name}:{name}={}", encoding.name(group, levels)));
                        let indicator = indicator(c, column);
                        columns.push(Box::new(move |row| row(n) * indicator(row)));
                    }
                }
                (other, _) => {
                    names.push(format!("{n_name}:{}", other.name()));
                    columns.push(Box::new(move |row| row(n) * row(c)));
                }
            }
        }
        let matrix = |x: &DMatrix<f64>| {
            DMatrix::from_fn(x.nrows(), columns.len(), |i, k| columns[k](&|j| x[(i, j)]))
        };
        Encoded {
            plain: names.len() - numeric,
            x_train: matrix(x_train),
            x_eval: matrix(x_eval),
            names,
        }
    }
}

impl EncodedFamily {
    /// This family with its grid narrowed to `settings` (a part of the grid
    /// it was built from; `execute::feasible::restricted`): the registry's
    /// `build` on the candidate's features would bind the raw level codes.
    pub(crate) fn narrowed(&self, settings: &Settings) -> Result<Arc<dyn Family>, SettingProblem> {
        let names: Vec<String> = self.features.iter().map(|f| f.name().to_string()).collect();
        let raw = (self.def.build)(settings, names)?;
        Ok(Arc::new(EncodedFamily {
            settings: settings.clone(),
            grid: raw.settings(),
            ..self.clone()
        }))
    }

    /// The family bound to the encoded columns of `encoded`.
    fn bind_encoded(&self, encoded: &Encoded) -> Result<Box<dyn Family>, FitError> {
        if encoded.names.is_empty() {
            return Err(FitError::Encoding {
                message: "every categorical feature holds a single level in these training \
                          rows, so no column is left to fit"
                    .into(),
            });
        }
        let names = encoded.names.clone();
        let built = match self.def.build_plain {
            Some(build_plain) if encoded.plain > 0 => {
                build_plain(&self.settings, names, encoded.plain)
            }
            _ => (self.def.build)(&self.settings, names),
        };
        built.map_err(|problem| FitError::Encoding {
            message: format!("{}: {}", problem.key, problem.message),
        })
    }
}

impl Family for EncodedFamily {
    fn settings(&self) -> Vec<Setting> {
        self.grid.clone()
    }

    fn needs_spread(&self) -> bool {
        self.needs_spread
    }

    /// The family's own answer on these training rows, encoded as a fit
    /// would encode them (a polynomial's degree counts the distinct values
    /// of its numeric features only, its rows the encoded columns).
    fn infeasible(&self, setting: usize, shape: &TrainingShape<'_>) -> Option<String> {
        let x_train = shape.x_train();
        let encodings = self.fit_levels(x_train);
        let encoded = self.encode(x_train, &x_train.rows(0, 0).into_owned(), &encodings);
        let family = self.bind_encoded(&encoded).ok()?;
        family.infeasible(
            setting,
            &TrainingShape::new(&encoded.x_train, shape.leave_one_out()),
        )
    }

    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError> {
        let encodings = self.fit_levels(request.x_train);
        let encoded = self.encode(request.x_train, request.x_eval, &encodings);
        let family = self.bind_encoded(&encoded)?;
        family.fit_grid(&FitRequest {
            x_train: &encoded.x_train,
            x_eval: &encoded.x_eval,
            ..*request
        })
    }
}

/// Rebinds every candidate with a categorical feature or an interaction to
/// an [`EncodedFamily`], and adds the encoding options to its identity.
/// Fails (naming the candidate's key) when its family cannot take a
/// categorical feature, or an interaction joins two categorical features.
pub(super) fn bind(
    spec: &LoadedSpec,
    table: &Table,
    candidates: &mut [CandidatePlan],
) -> Result<(), (String, String)> {
    let min_level_rows = spec.data().min_level_rows.unwrap_or(1);
    for (index, (candidate, family_spec)) in candidates.iter_mut().zip(&spec.families).enumerate() {
        let key = format!("candidate[{}] ({})", index + 1, family_spec.def.name);
        let categorical: Vec<&String> = candidate
            .features
            .iter()
            .filter(|f| table.levels.contains_key(*f))
            .collect();
        if categorical.is_empty() && family_spec.interactions.is_empty() {
            continue;
        }
        check_family(family_spec, &categorical, &key)?;
        let features: Vec<Feature> = candidate
            .features
            .iter()
            .map(|name| match table.levels.get(name) {
                Some(levels) => Feature::Categorical {
                    name: name.clone(),
                    levels: Arc::new(levels.clone()),
                },
                None if indicated_feature(name).is_some() => Feature::Plain(name.clone()),
                None => Feature::Numeric(name.clone()),
            })
            .collect();
        let at = |name: &str| {
            candidate
                .features
                .iter()
                .position(|f| f == name)
                .expect("the spec checked that interactions name features")
        };
        let mut interactions = Vec::new();
        for (i, (a, b)) in family_spec.interactions.iter().enumerate() {
            if table.levels.contains_key(a) && table.levels.contains_key(b) {
                return Err((
                    format!("{key}.interactions[{}]", i + 1),
                    format!(
                        "\"{a}\" and \"{b}\" are both categorical; an interaction multiplies a \
                         numeric feature by another feature"
                    ),
                ));
            }
            interactions.push((at(a), at(b)));
        }
        let mut identity = candidate.identity.clone();
        identity.extend_from_slice(b"encoded");
        identity.extend_from_slice(&(min_level_rows as u64).to_le_bytes());
        identity.extend_from_slice(&(interactions.len() as u64).to_le_bytes());
        for &(a, b) in &interactions {
            identity.extend_from_slice(&(a as u64).to_le_bytes());
            identity.extend_from_slice(&(b as u64).to_le_bytes());
        }
        if family_spec.def.build_plain.is_some() {
            // Indicators and interactions enter once in a degree grid
            // (version 1 of that design): earlier fits of these families
            // expanded or refused them.
            identity.extend_from_slice(b"plain-columns-1");
        }
        let needs_spread = candidate.family.needs_spread();
        let family = Arc::new(EncodedFamily {
            def: family_spec.def,
            settings: family_spec.settings.clone(),
            features,
            interactions,
            min_level_rows,
            grid: candidate.settings.clone(),
            needs_spread,
        });
        candidate.family = Arc::clone(&family) as Arc<dyn Family>;
        candidate.encoded = Some(family);
        candidate.identity = identity;
    }
    Ok(())
}

/// Whether the family takes categorical features as bound (a family of a
/// fixed number of features does not; a degree grid would raise
/// indicators to powers unless the family takes them plainly, through
/// `FamilyDef::build_plain`, as `polynomial` and `logistic` do).
fn check_family(
    family_spec: &FamilySpec,
    categorical: &[&String],
    key: &str,
) -> Result<(), (String, String)> {
    let Some(first) = categorical.first() else {
        return Ok(());
    };
    let def = family_spec.def;
    if def.categorical == CategoricalUse::Refused {
        return Err((
            format!("{key}.features"),
            format!(
                "column \"{first}\" is categorical, and family \"{}\" takes numeric features \
                 only; use a linear-type family (linear, polynomial, ridge, lasso, logistic, \
                 discriminant) or nearest-neighbors, or drop it from this candidate's features",
                def.name
            ),
        ));
    }
    let raises_powers = def.build_plain.is_none()
        && family_spec.settings.values().iter().any(|(name, value)| {
            *name == "degree" && matches!(value, KeyValue::Counts(d) if d.iter().any(|&d| d > 1))
        });
    if raises_powers {
        return Err((
            format!("{key}.degree"),
            format!(
                "column \"{first}\" is categorical, and a degree above 1 would raise its 0/1 \
                 indicators to powers that repeat them; use degree = [1] or a penalty grid"
            ),
        ));
    }
    Ok(())
}

/// Rewrites the level codes of `new`'s categorical columns (codes of its
/// own levels) as codes of the plan's table, so the kept fit reads them.
/// Refuses, naming the column, the level and its first line, a level that
/// the rows of the kept fit (the non-test rows) never hold: the fit has no
/// column for it, and giving it the reference's row would be a guess the
/// report never scored (docs/predict.md).
pub(crate) fn recode_new_rows(
    plan: &super::ExperimentPlan,
    new: &mut Table,
    shown: &std::path::Path,
) -> Result<(), crate::error::DataError> {
    let train = &plan.assignment.train;
    for (column, new_levels) in &new.levels {
        let levels = &plan.table.levels[column];
        let codes = plan.table.column(column);
        let mut seen = vec![false; levels.len()];
        for &r in train {
            seen[codes[r] as usize] = true;
        }
        let mapped: Vec<Option<f64>> = new_levels
            .iter()
            .map(|level| {
                let at = levels.binary_search(level).ok()?;
                seen[at].then_some(at as f64)
            })
            .collect();
        let cells = new.numeric.get_mut(column).expect("a categorical column");
        for (i, cell) in cells.iter_mut().enumerate() {
            let level = *cell as usize;
            match mapped[level] {
                Some(code) => *cell = code,
                None => {
                    return Err(crate::error::DataError::Cell {
                        path: shown.to_path_buf(),
                        line: new.lines[i],
                        column: column.clone(),
                        message: format!(
                            "level \"{}\" never occurs in the {} rows the kept setting was \
                             fitted on, so the fit has no column for it; predict such rows \
                             after a run whose training rows hold it",
                            new_levels[level],
                            train.len()
                        ),
                    })
                }
            }
        }
    }
    Ok(())
}

/// Rows of `eval` whose level of categorical `column` never occurs in the
/// rows of `train`: they are predicted with the reference's row.
pub(crate) fn unseen_rows(table: &Table, column: &str, train: &[usize], eval: &[usize]) -> usize {
    let codes = table.column(column);
    let mut seen = vec![false; table.levels[column].len()];
    for &r in train {
        seen[codes[r] as usize] = true;
    }
    eval.iter().filter(|&&r| !seen[codes[r] as usize]).count()
}

#[cfg(test)]
mod degree_tests;
#[cfg(test)]
mod encode_tests;
