//! The family registry: everything the rest of the program needs to know
//! about a model family, declared once beside its mathematics (a
//! [`FamilyDef`] constant in `models/<family>.rs`) and collected in
//! [`FAMILIES`] (in `models/mod.rs`, beside the module declarations, so a new
//! family touches its own file and that list only). Spec parsing, validation, planning, the canonical spec behind
//! receipts, cache identities and the JSON Schema read this list; none of them
//! names a family. See `docs/architecture.md` ("The family registry").

use std::sync::{Arc, LazyLock};

use super::Family;
pub(crate) use super::FAMILIES;

/// `intercept`: shared by the least-squares families.
pub(crate) const INTERCEPT: KeyDef = KeyDef::new(
    "intercept",
    KeyKind::Flag,
    "Fit an intercept (default true).",
)
.or(KeyDefault::Flag(true));

/// `penalty`: the penalties of a penalised family's grid.
pub(crate) const PENALTY: KeyDef =
    KeyDef::new("penalty", KeyKind::Reals, "The penalties to compare (≥ 0).");

/// `df`: target effective degrees of freedom of a penalised smoother's grid,
/// each reached by root finding on the smoother's trace.
pub(crate) const SMOOTHER_DF: KeyDef = KeyDef::new(
    "df",
    KeyKind::Reals,
    "Effective degrees of freedom to compare (instead of `penalty`).",
);

/// One family, as the spec and the rest of the program know it.
#[derive(Debug)]
pub(crate) struct FamilyDef {
    /// The name written in specs (`family = "polynomial"`), in candidate
    /// ids and in results.json; it is written nowhere else.
    pub(crate) name: &'static str,
    /// One line for the schema and the docs.
    pub(crate) about: &'static str,
    /// The keys a candidate of this family may set, besides `family`,
    /// `label` and `features`.
    pub(crate) keys: &'static [KeyDef],
    /// `Some(n)`: the family takes exactly n features.
    pub(crate) feature_count: Option<usize>,
    /// The family expands each feature into a basis of its own (powers,
    /// spline columns), which a 0/1 column cannot carry (its powers repeat
    /// it): `missing = "impute"` gives it no indicator columns.
    pub(crate) expands_features: bool,
    /// Version of the fitting algorithm: part of every cache identity, so
    /// bump it whenever the numbers a grid yields may change.
    pub(crate) version: u32,
    /// A grid that runs, as TOML lines (`degree = [1, 2, 3]`); the registry
    /// tests validate it and `docs/spec.md` shows the same keys.
    pub(crate) default_grid: &'static str,
    /// Checks the settings (already holding their defaults) and binds them to
    /// the candidate's features. The one place a family's values are judged.
    pub(crate) build: BuildFn,
    /// The kinds of target the family predicts.
    pub(crate) targets: Targets,
    /// How the family takes a categorical feature (`plan::encode`).
    pub(crate) categorical: CategoricalUse,
    /// For a family that expands each feature into a basis: binds it to
    /// features whose last `plain` columns enter once, as they are (0/1
    /// indicators and interaction columns, whose powers would repeat them).
    pub(crate) build_plain: Option<PlainBuildFn>,
}

/// How a family takes a categorical feature (docs/spec.md, "Categorical
/// features").
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum CategoricalUse {
    /// It cannot: a family of a fixed number of numeric features.
    Refused,
    /// Linear-type: a 0/1 column per training level but the most frequent
    /// (the reference); interactions allowed.
    Indicators,
    /// A 0/1 column per training level, treated like any numeric column
    /// (nearest neighbours: no level is singled out as the reference).
    EveryLevel,
}

/// How a family with [`FamilyDef::build_plain`] binds: settings, features,
/// and how many trailing features enter plainly.
pub(crate) type PlainBuildFn =
    fn(&Settings, Vec<String>, usize) -> Result<Box<dyn Family>, SettingProblem>;

/// The kinds of target a family predicts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Targets {
    /// Numbers only (regression).
    Numbers,
    /// Class labels only (classification).
    Classes,
    /// Either: the fit follows the target's task.
    Both,
}

impl Targets {
    /// Whether a family with these targets fits a `task` target.
    pub(crate) fn fits(self, task: crate::spec::Task) -> bool {
        use crate::spec::Task;
        matches!(
            (self, task),
            (Targets::Both, _)
                | (Targets::Numbers, Task::Regression)
                | (Targets::Classes, Task::Classification)
        )
    }
}

/// How a family checks its settings and binds them to its features.
pub(crate) type BuildFn = fn(&Settings, Vec<String>) -> Result<Box<dyn Family>, SettingProblem>;

/// A key a family takes.
#[derive(Debug)]
pub(crate) struct KeyDef {
    pub(crate) name: &'static str,
    pub(crate) kind: KeyKind,
    /// Filled in when the spec leaves the key out; the canonical spec shows it.
    pub(crate) default: Option<KeyDefault>,
    /// What the key means, for the schema.
    pub(crate) about: &'static str,
}

/// The type of a key's value. A key name has one kind across all families
/// (a registry test checks it), so the spec reader can type a value before it
/// knows the family.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum KeyKind {
    /// `true` or `false`.
    Flag,
    /// A whole number ≥ 0.
    Count,
    /// A list of whole numbers ≥ 0.
    Counts,
    /// A list of numbers.
    Reals,
    /// A list of words (names of variants, such as `shape`).
    Words,
}

/// A scalar key's default (grids have none: a spec must list them). Plain
/// data, so registry entries stay constants.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum KeyDefault {
    Flag(bool),
    Count(usize),
}

impl KeyDefault {
    /// The default as a written value.
    pub(crate) fn value(self) -> KeyValue {
        match self {
            KeyDefault::Flag(flag) => KeyValue::Flag(flag),
            KeyDefault::Count(count) => KeyValue::Count(count),
        }
    }
}

/// A key's value as written.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum KeyValue {
    Flag(bool),
    Count(usize),
    Counts(Vec<usize>),
    Reals(Vec<f64>),
    Words(Vec<String>),
}

/// What is wrong with one key of a candidate: the key (relative to the
/// candidate) and the message.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct SettingProblem {
    pub(crate) key: String,
    pub(crate) message: String,
}

impl SettingProblem {
    pub(crate) fn new(key: &str, message: String) -> Self {
        SettingProblem {
            key: key.to_string(),
            message,
        }
    }
}

/// A candidate's family keys with their values, in [`all_keys`] order.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Settings {
    family: &'static str,
    values: Vec<(&'static str, KeyValue)>,
}

/// The family with this spec name.
pub(crate) fn find(name: &str) -> Option<&'static FamilyDef> {
    FAMILIES.iter().copied().find(|def| def.name == name)
}

/// The family names, in registry order.
pub(crate) fn names() -> &'static [&'static str] {
    static NAMES: LazyLock<Vec<&'static str>> =
        LazyLock::new(|| FAMILIES.iter().map(|def| def.name).collect());
    &NAMES
}

/// Every family key, each once, in order of first appearance in [`FAMILIES`].
pub(crate) fn all_keys() -> &'static [&'static str] {
    static KEYS: LazyLock<Vec<&'static str>> = LazyLock::new(|| {
        let mut keys: Vec<&'static str> = Vec::new();
        for key in FAMILIES.iter().flat_map(|def| def.keys) {
            if !keys.contains(&key.name) {
                keys.push(key.name);
            }
        }
        keys
    });
    &KEYS
}

/// The kind of a family key (the first family declaring it decides; the
/// registry tests check that all agree).
pub(crate) fn kind_of(key: &str) -> Option<(&'static str, KeyKind)> {
    FAMILIES
        .iter()
        .flat_map(|def| def.keys)
        .find(|k| k.name == key)
        .map(|k| (k.name, k.kind))
}

impl KeyDef {
    /// A key without a default.
    pub(crate) const fn new(name: &'static str, kind: KeyKind, about: &'static str) -> Self {
        KeyDef {
            name,
            kind,
            default: None,
            about,
        }
    }

    /// With the value used when a spec leaves the key out.
    pub(crate) const fn or(self, default: KeyDefault) -> Self {
        KeyDef {
            default: Some(default),
            ..self
        }
    }
}

impl FamilyDef {
    /// A family named `name`, taking `keys`, checked and bound by `build`;
    /// any number of features, algorithm version 1, no default grid yet.
    pub(crate) const fn new(name: &'static str, keys: &'static [KeyDef], build: BuildFn) -> Self {
        FamilyDef {
            name,
            about: "",
            keys,
            feature_count: None,
            expands_features: false,
            version: 1,
            default_grid: "",
            build,
            targets: Targets::Numbers,
            categorical: CategoricalUse::Refused,
            build_plain: None,
        }
    }

    /// Taking categorical features the way `used` says.
    pub(crate) const fn takes_categorical(self, categorical: CategoricalUse) -> Self {
        FamilyDef {
            categorical,
            ..self
        }
    }

    /// Binding through `build_plain` when some trailing columns must enter
    /// once, as they are (see [`FamilyDef::build_plain`]).
    pub(crate) const fn plain_columns(self, build_plain: PlainBuildFn) -> Self {
        FamilyDef {
            build_plain: Some(build_plain),
            ..self
        }
    }

    /// Predicting these kinds of target (default: numbers only).
    pub(crate) const fn predicts(self, targets: Targets) -> Self {
        FamilyDef { targets, ..self }
    }

    /// Expanding each feature into a basis (see [`FamilyDef::expands_features`]).
    pub(crate) const fn expanding_features(self) -> Self {
        FamilyDef {
            expands_features: true,
            ..self
        }
    }

    /// With its one line of help.
    pub(crate) const fn about(self, about: &'static str) -> Self {
        FamilyDef { about, ..self }
    }

    /// With a default grid that runs (TOML lines).
    pub(crate) const fn grid(self, default_grid: &'static str) -> Self {
        FamilyDef {
            default_grid,
            ..self
        }
    }

    /// With algorithm version `version` (bumped whenever a change may alter
    /// any number the family produces; part of every cache identity).
    pub(crate) const fn version(self, version: u32) -> Self {
        FamilyDef { version, ..self }
    }

    /// Taking exactly `count` features.
    pub(crate) const fn takes_features(self, count: usize) -> Self {
        FamilyDef {
            feature_count: Some(count),
            ..self
        }
    }

    /// The definition of one of this family's keys.
    pub(crate) fn key(&self, name: &str) -> Option<&'static KeyDef> {
        self.keys.iter().find(|k| k.name == name)
    }

    /// Settings as given, checked against this family's keys, with the
    /// defaults of the keys left out filled in.
    pub(crate) fn settings(
        &'static self,
        given: &[(&'static str, KeyValue)],
    ) -> Result<Settings, SettingProblem> {
        if let Some((stray, _)) = given.iter().find(|(key, _)| self.key(key).is_none()) {
            let takes: Vec<&str> = self.keys.iter().map(|k| k.name).collect();
            return Err(SettingProblem::new(
                stray,
                format!(
                    "`{stray}` is not a setting of family \"{}\" (it takes: {})",
                    self.name,
                    if takes.is_empty() {
                        "none".to_string()
                    } else {
                        takes.join(", ")
                    }
                ),
            ));
        }
        let mut values = given.to_vec();
        for key in self.keys {
            if let (Some(default), false) =
                (&key.default, given.iter().any(|(k, _)| *k == key.name))
            {
                values.push((key.name, default.value()));
            }
        }
        let order = |key: &str| all_keys().iter().position(|k| *k == key);
        values.sort_by_key(|(key, _)| order(key));
        Ok(Settings {
            family: self.name,
            values,
        })
    }

    /// Checks `settings` and binds them to `features`, as a shared family.
    pub(crate) fn bind(
        &self,
        settings: &Settings,
        features: Vec<String>,
    ) -> Result<Arc<dyn Family>, SettingProblem> {
        (self.build)(settings, features).map(Arc::from)
    }

    /// The explicit identity of a fit of this family's grid, for cache keys:
    /// name, algorithm version, features and every setting value as bits,
    /// each length-prefixed so that no two identities share an encoding.
    pub(crate) fn identity(&self, settings: &Settings, features: &[String]) -> Vec<u8> {
        let mut bytes = Vec::new();
        let text = |bytes: &mut Vec<u8>, s: &str| {
            bytes.extend_from_slice(&(s.len() as u64).to_le_bytes());
            bytes.extend_from_slice(s.as_bytes());
        };
        text(&mut bytes, self.name);
        bytes.extend_from_slice(&u64::from(self.version).to_le_bytes());
        bytes.extend_from_slice(&(features.len() as u64).to_le_bytes());
        for feature in features {
            text(&mut bytes, feature);
        }
        bytes.extend_from_slice(&(settings.values.len() as u64).to_le_bytes());
        for (key, value) in &settings.values {
            text(&mut bytes, key);
            let numbers: Vec<u64> = match value {
                KeyValue::Flag(flag) => vec![u64::from(*flag)],
                KeyValue::Count(count) => vec![*count as u64],
                KeyValue::Counts(counts) => counts.iter().map(|&c| c as u64).collect(),
                KeyValue::Reals(reals) => reals.iter().map(|r| r.to_bits()).collect(),
                KeyValue::Words(words) => {
                    // Each word as its length and bytes, then its count below.
                    bytes.push(b'W');
                    for word in words {
                        text(&mut bytes, word);
                    }
                    vec![words.len() as u64]
                }
            };
            bytes.push(match value {
                KeyValue::Flag(_) => b'f',
                KeyValue::Count(_) => b'c',
                KeyValue::Counts(_) => b'C',
                KeyValue::Reals(_) => b'R',
                KeyValue::Words(_) => b'w',
            });
            bytes.extend_from_slice(&(numbers.len() as u64).to_le_bytes());
            for number in numbers {
                bytes.extend_from_slice(&number.to_le_bytes());
            }
        }
        bytes
    }
}

impl Settings {
    /// The family these settings belong to.
    pub(crate) fn family(&self) -> &'static str {
        self.family
    }

    /// Every key with its value, in canonical order.
    pub(crate) fn values(&self) -> &[(&'static str, KeyValue)] {
        &self.values
    }

    fn get(&self, key: &str) -> Option<&KeyValue> {
        self.values.iter().find(|(k, _)| *k == key).map(|(_, v)| v)
    }

    fn needs(&self, key: &str) -> SettingProblem {
        SettingProblem::new(
            key,
            format!("family \"{}\" needs a grid: `{key} = [...]`", self.family),
        )
    }

    /// These settings with grid key `key` narrowed to `values` (a part of
    /// the grid, in grid order), to refit only the settings that can be
    /// fitted (docs/spec.md, "Infeasible settings").
    pub(crate) fn narrowed(&self, key: &str, values: &[super::SettingValue]) -> Settings {
        use super::SettingValue;
        let mut narrowed = self.clone();
        if let Some((_, value)) = narrowed.values.iter_mut().find(|(k, _)| *k == key) {
            *value = match &*value {
                // A grid read as numbers may label its settings as counts
                // (a spline's whole df), and the other way round.
                KeyValue::Counts(_) => KeyValue::Counts(
                    values
                        .iter()
                        .filter_map(|v| match v {
                            SettingValue::Count(n) => Some(*n),
                            SettingValue::Real(r) => Some(*r as usize),
                            _ => None,
                        })
                        .collect(),
                ),
                KeyValue::Reals(_) => KeyValue::Reals(
                    values
                        .iter()
                        .filter_map(|v| match v {
                            SettingValue::Real(r) => Some(*r),
                            SettingValue::Count(n) => Some(*n as f64),
                            _ => None,
                        })
                        .collect(),
                ),
                KeyValue::Words(_) => KeyValue::Words(
                    values
                        .iter()
                        .filter_map(|v| match v {
                            SettingValue::Word(w) => Some((*w).to_string()),
                            _ => None,
                        })
                        .collect(),
                ),
                other => other.clone(),
            };
        }
        narrowed
    }

    /// A flag (families declare a default for every flag they take).
    pub(crate) fn flag(&self, key: &str) -> bool {
        matches!(self.get(key), Some(KeyValue::Flag(true)))
    }

    /// A whole number, when given or defaulted.
    pub(crate) fn count(&self, key: &str) -> Option<usize> {
        match self.get(key) {
            Some(KeyValue::Count(count)) => Some(*count),
            _ => None,
        }
    }

    /// A list of numbers, when given.
    pub(crate) fn reals(&self, key: &str) -> Option<&[f64]> {
        match self.get(key) {
            Some(KeyValue::Reals(values)) => Some(values),
            _ => None,
        }
    }

    /// A required grid of whole numbers within `[min, max]`, without repeats.
    pub(crate) fn whole_grid(
        &self,
        key: &str,
        min: usize,
        max: usize,
    ) -> Result<Vec<usize>, SettingProblem> {
        let values = match self.get(key) {
            Some(KeyValue::Counts(values)) => values.clone(),
            _ => return Err(self.needs(key)),
        };
        check_whole_grid(&values, min, max, key)?;
        Ok(values)
    }

    /// A required list of words, each one of `allowed`, without repeats.
    pub(crate) fn word_grid(
        &self,
        key: &str,
        allowed: &'static [&'static str],
    ) -> Result<Vec<&'static str>, SettingProblem> {
        let values = match self.get(key) {
            Some(KeyValue::Words(values)) => values,
            _ => return Err(self.needs(key)),
        };
        if values.is_empty() {
            return Err(SettingProblem::new(key, "give at least one value".into()));
        }
        let mut out: Vec<&'static str> = Vec::with_capacity(values.len());
        for value in values {
            let Some(&word) = allowed.iter().find(|a| **a == value.as_str()) else {
                return Err(SettingProblem::new(
                    key,
                    format!(
                        "\"{value}\" is not one of {}",
                        allowed
                            .iter()
                            .map(|a| format!("\"{a}\""))
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                ));
            };
            if out.contains(&word) {
                return Err(SettingProblem::new(
                    key,
                    format!("\"{value}\" is listed twice"),
                ));
            }
            out.push(word);
        }
        Ok(out)
    }

    /// A required grid of finite numbers ≥ `lowest`, without repeats.
    pub(crate) fn real_grid(&self, key: &str, lowest: f64) -> Result<Vec<f64>, SettingProblem> {
        let values = self.reals(key).ok_or_else(|| self.needs(key))?.to_vec();
        check_real_grid(&values, lowest, key)?;
        Ok(values)
    }
}

/// Most settings in one candidate's grid (a limit of `docs/spec.md`).
pub(crate) const GRID_LENGTH: usize = 10_000;

/// A grid of whole numbers must be non-empty, within bounds and free of repeats.
pub(crate) fn check_whole_grid(
    values: &[usize],
    min: usize,
    max: usize,
    key: &str,
) -> Result<(), SettingProblem> {
    check_grid(values, key, |value| {
        (value < min || value > max).then(|| format!("{key} = {value} is outside [{min}, {max}]"))
    })
}

/// A real-valued grid must be non-empty, finite, at least `lowest`, without repeats.
pub(crate) fn check_real_grid(
    values: &[f64],
    lowest: f64,
    key: &str,
) -> Result<(), SettingProblem> {
    check_grid(values, key, |value| {
        (!value.is_finite() || value < lowest)
            .then(|| format!("{key} = {value} must be a finite number ≥ {lowest}"))
    })
}

/// A grid must be non-empty, free of repeats, and hold no value that
/// `refuse` has a reason against.
fn check_grid<T: Copy + PartialEq + std::fmt::Display>(
    values: &[T],
    key: &str,
    refuse: impl Fn(T) -> Option<String>,
) -> Result<(), SettingProblem> {
    if values.is_empty() {
        return Err(SettingProblem::new(key, format!("list at least one {key}")));
    }
    if values.len() > GRID_LENGTH {
        return Err(SettingProblem::new(
            key,
            format!(
                "{} settings is above the limit of {GRID_LENGTH} (see docs/spec.md, \"Limits\")",
                values.len()
            ),
        ));
    }
    for (i, &value) in values.iter().enumerate() {
        if let Some(why) = refuse(value) {
            return Err(SettingProblem::new(key, why));
        }
        if values[..i].contains(&value) {
            return Err(SettingProblem::new(
                key,
                format!("{key} = {value} is listed twice"),
            ));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::{lasso, polynomial, ridge};

    #[test]
    fn family_names_are_unique_and_spelled_for_specs() {
        for (i, def) in FAMILIES.iter().enumerate() {
            assert!(
                !FAMILIES[..i].iter().any(|d| d.name == def.name),
                "{} registered twice",
                def.name
            );
            assert!(
                def.name.chars().all(|c| c.is_ascii_lowercase() || c == '-'),
                "{}",
                def.name
            );
        }
    }

    #[test]
    fn a_key_name_has_one_kind_across_families_and_no_key_shadows_a_common_one() {
        for def in FAMILIES {
            for key in def.keys {
                assert_eq!(
                    kind_of(key.name).map(|(_, k)| k),
                    Some(key.kind),
                    "{}",
                    key.name
                );
                assert!(
                    !["family", "label", "features"].contains(&key.name),
                    "{} declares the common key {}",
                    def.name,
                    key.name
                );
                if let Some(default) = &key.default {
                    let fits = matches!(
                        (key.kind, default),
                        (KeyKind::Flag, KeyDefault::Flag(_))
                            | (KeyKind::Count, KeyDefault::Count(_))
                    );
                    assert!(fits, "{}.{}: default of the wrong kind", def.name, key.name);
                }
                if key.kind == KeyKind::Flag {
                    assert!(
                        key.default.is_some(),
                        "{}.{} needs a default",
                        def.name,
                        key.name
                    );
                }
            }
        }
    }

    #[test]
    fn identities_differ_by_family_version_features_and_value_bits() {
        let def = &ridge::FAMILY;
        let with = |penalty: Vec<f64>| {
            def.settings(&[("penalty", KeyValue::Reals(penalty))])
                .unwrap()
        };
        let x = vec!["x".to_string()];
        let base = def.identity(&with(vec![1.0, 2.0]), &x);
        assert_eq!(base, def.identity(&with(vec![1.0, 2.0]), &x));
        assert_ne!(base, def.identity(&with(vec![1.0, 2.0000000000000004]), &x));
        assert_ne!(base, def.identity(&with(vec![2.0, 1.0]), &x));
        assert_ne!(
            base,
            def.identity(&with(vec![1.0, 2.0]), &["z".to_string()])
        );
        let lasso_settings = lasso::FAMILY
            .settings(&[("penalty", KeyValue::Reals(vec![1.0, 2.0]))])
            .unwrap();
        assert_ne!(base, lasso::FAMILY.identity(&lasso_settings, &x));
    }

    #[test]
    fn defaults_are_filled_and_stray_keys_named() {
        let settings = polynomial::FAMILY
            .settings(&[("degree", KeyValue::Counts(vec![1, 2]))])
            .unwrap();
        assert_eq!(
            settings.values(),
            &[
                ("intercept", KeyValue::Flag(true)),
                ("degree", KeyValue::Counts(vec![1, 2]))
            ]
        );
        let problem = ridge::FAMILY
            .settings(&[
                ("intercept", KeyValue::Flag(true)),
                ("penalty", KeyValue::Reals(vec![1.0])),
            ])
            .unwrap_err();
        assert_eq!(problem.key, "intercept");
        assert!(problem
            .message
            .contains("not a setting of family \"ridge\""));
    }
}
