//! One `[[candidate]]` table: read as written (its family, label, features
//! and the family's own keys, typed through the family registry), then
//! checked against its family's registry entry and bound to its features.
//!
//! The table is read by a hand-written visitor rather than a derived struct,
//! because the keys it may hold come from the registry. Unknown keys and
//! family names are still refused while the key or value is being read, so
//! the TOML and YAML readers place the error at its own line and column, as
//! they do for derived `deny_unknown_fields` tables.

use std::borrow::Cow;
use std::collections::BTreeSet;
use std::fmt;
use std::sync::{Arc, LazyLock};

use serde::de::{self, MapAccess, Visitor};
use serde::ser::SerializeMap;
use serde::{Deserialize, Deserializer, Serialize, Serializer};
use serde_json::{json, Map, Value};

use super::checks::validate_feature_list;
use super::parse::closest;
use super::{SpecFile, Task};
use crate::error::SpecError;
use crate::models::registry::{
    self, CategoricalUse, FamilyDef, KeyKind, KeyValue, SettingProblem, Settings,
};
use crate::models::Family;

/// One `[[candidate]]` table as written.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct CandidateSpec {
    /// A registered family name (checked while reading).
    pub(crate) family: &'static str,
    /// Tells apart two candidates of one family in ids: a-z, 0-9 and `-`.
    pub(crate) label: Option<String>,
    /// Columns this candidate uses instead of `[data] features`.
    pub(crate) features: Option<Vec<String>>,
    /// Pairs of features whose products enter as extra columns
    /// (linear-type families; `plan::encode`).
    pub(crate) interactions: Option<Vec<Vec<String>>>,
    /// The family keys given, in the registry's key order.
    pub(crate) settings: Vec<(&'static str, KeyValue)>,
}

/// The keys every candidate may hold, whatever its family.
const COMMON_KEYS: [&str; 4] = ["family", "label", "features", "interactions"];

/// Every key a candidate table may hold: the common ones, then every
/// family's (the list an unknown key's message offers).
fn candidate_keys() -> &'static [&'static str] {
    static KEYS: LazyLock<Vec<&'static str>> = LazyLock::new(|| {
        COMMON_KEYS
            .iter()
            .copied()
            .chain(registry::all_keys().iter().copied())
            .collect()
    });
    &KEYS
}

/// A key of a candidate table, recognised while it is read.
enum CandidateKey {
    Family,
    Label,
    Features,
    Interactions,
    Setting(&'static str, KeyKind),
}

/// Why a word read from the spec is refused.
enum Refusal {
    /// No candidate takes this key.
    Key(String),
    /// No family has this name.
    Family(String),
}

/// Reads one word (a key or a name) and judges it with `judge` while the
/// reader is still at it, so a refusal is placed at the word's own line and
/// column, as a derived `deny_unknown_fields` would place it.
struct WordVisitor<T> {
    expecting: &'static str,
    judge: fn(&str) -> Result<T, Refusal>,
}

impl<T> Visitor<'_> for WordVisitor<T> {
    type Value = T;
    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str(self.expecting)
    }
    fn visit_str<E: de::Error>(self, word: &str) -> Result<T, E> {
        (self.judge)(word).map_err(|refusal| match refusal {
            Refusal::Key(key) => E::unknown_field(&key, candidate_keys()),
            Refusal::Family(name) => E::unknown_variant(&name, registry::names()),
        })
    }
}

impl<'de> Deserialize<'de> for CandidateKey {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_identifier(WordVisitor {
            expecting: "a candidate key",
            judge: |key| match key {
                "family" => Ok(CandidateKey::Family),
                "label" => Ok(CandidateKey::Label),
                "features" => Ok(CandidateKey::Features),
                "interactions" => Ok(CandidateKey::Interactions),
                other => registry::kind_of(other)
                    .map(|(name, kind)| CandidateKey::Setting(name, kind))
                    .ok_or_else(|| Refusal::Key(other.to_string())),
            },
        })
    }
}

/// A family name that the registry knows, recognised while it is read.
struct RegisteredFamily(&'static str);

impl<'de> Deserialize<'de> for RegisteredFamily {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_str(WordVisitor {
            expecting: "a family name",
            judge: |name| {
                registry::find(name)
                    .map(|def| RegisteredFamily(def.name))
                    .ok_or_else(|| Refusal::Family(name.to_string()))
            },
        })
    }
}

impl<'de> Deserialize<'de> for CandidateSpec {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct TableVisitor;
        impl<'de> Visitor<'de> for TableVisitor {
            type Value = CandidateSpec;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a candidate table")
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<CandidateSpec, A::Error> {
                let mut family = None;
                let mut label = None;
                let mut features = None;
                let mut interactions = None;
                let mut settings: Vec<(&'static str, KeyValue)> = Vec::new();
                while let Some(key) = map.next_key::<CandidateKey>()? {
                    match key {
                        CandidateKey::Family => {
                            if family.is_some() {
                                return Err(de::Error::duplicate_field("family"));
                            }
                            family = Some(map.next_value::<RegisteredFamily>()?.0);
                        }
                        CandidateKey::Label => {
                            if label.is_some() {
                                return Err(de::Error::duplicate_field("label"));
                            }
                            label = Some(map.next_value()?);
                        }
                        CandidateKey::Features => {
                            if features.is_some() {
                                return Err(de::Error::duplicate_field("features"));
                            }
                            features = Some(map.next_value()?);
                        }
                        CandidateKey::Interactions => {
                            if interactions.is_some() {
                                return Err(de::Error::duplicate_field("interactions"));
                            }
                            interactions = Some(map.next_value()?);
                        }
                        CandidateKey::Setting(name, kind) => {
                            if settings.iter().any(|(k, _)| *k == name) {
                                return Err(de::Error::duplicate_field(name));
                            }
                            let value = match kind {
                                KeyKind::Flag => KeyValue::Flag(map.next_value()?),
                                KeyKind::Count => KeyValue::Count(map.next_value()?),
                                KeyKind::Counts => KeyValue::Counts(map.next_value()?),
                                KeyKind::Reals => KeyValue::Reals(map.next_value()?),
                                KeyKind::Words => KeyValue::Words(map.next_value()?),
                            };
                            settings.push((name, value));
                        }
                    }
                }
                let family = family.ok_or_else(|| de::Error::missing_field("family"))?;
                let order = |key: &str| registry::all_keys().iter().position(|k| *k == key);
                settings.sort_by_key(|(key, _)| order(key));
                Ok(CandidateSpec {
                    family,
                    label,
                    features,
                    interactions,
                    settings,
                })
            }
        }
        deserializer.deserialize_map(TableVisitor)
    }
}

impl Serialize for KeyValue {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        match self {
            KeyValue::Flag(flag) => flag.serialize(serializer),
            KeyValue::Count(count) => count.serialize(serializer),
            KeyValue::Counts(counts) => counts.serialize(serializer),
            KeyValue::Reals(reals) => reals.serialize(serializer),
            KeyValue::Words(words) => words.serialize(serializer),
        }
    }
}

impl Serialize for CandidateSpec {
    /// `family`, `label` and `features` when given, then the family keys in
    /// registry order: the order the canonical spec and its digest rely on.
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        let mut map = serializer.serialize_map(None)?;
        map.serialize_entry("family", self.family)?;
        if let Some(label) = &self.label {
            map.serialize_entry("label", label)?;
        }
        if let Some(features) = &self.features {
            map.serialize_entry("features", features)?;
        }
        if let Some(interactions) = &self.interactions {
            map.serialize_entry("interactions", interactions)?;
        }
        for (key, value) in &self.settings {
            map.serialize_entry(key, value)?;
        }
        map.end()
    }
}

impl schemars::JsonSchema for CandidateSpec {
    fn schema_name() -> Cow<'static, str> {
        "CandidateSpec".into()
    }

    /// One alternative per registered family: its name as a constant and
    /// exactly its own keys, so an editor offers only what the family takes.
    fn json_schema(_: &mut schemars::SchemaGenerator) -> schemars::Schema {
        let alternatives: Vec<Value> = registry::FAMILIES
            .iter()
            .map(|def| {
                let mut properties = Map::new();
                properties.insert(
                    "family".into(),
                    json!({"description": def.about, "const": def.name}),
                );
                properties.insert(
                    "label".into(),
                    json!({
                        "description": "Tells apart two candidates of one family in ids: a-z, 0-9 and `-`.",
                        "type": "string"
                    }),
                );
                let mut features = json!({
                    "description": "Columns this candidate uses instead of `[data] features`.",
                    "type": "array",
                    "items": {"type": "string"}
                });
                if let Some(count) = def.feature_count {
                    features["minItems"] = count.into();
                    features["maxItems"] = count.into();
                }
                properties.insert("features".into(), features);
                if def.categorical == CategoricalUse::Indicators {
                    properties.insert(
                        "interactions".into(),
                        json!({
                            "description": "Pairs of features whose products enter as extra columns: a numeric feature times each indicator of a categorical one, or two numeric features multiplied.",
                            "type": "array",
                            "items": {"type": "array", "items": {"type": "string"}, "minItems": 2, "maxItems": 2}
                        }),
                    );
                }
                for key in def.keys {
                    let mut schema = match key.kind {
                        KeyKind::Flag => json!({"type": "boolean"}),
                        KeyKind::Count => json!({"type": "integer", "minimum": 0}),
                        KeyKind::Counts => {
                            json!({"type": "array", "items": {"type": "integer", "minimum": 0}})
                        }
                        KeyKind::Reals => json!({"type": "array", "items": {"type": "number"}}),
                        KeyKind::Words => json!({"type": "array", "items": {"type": "string"}}),
                    };
                    schema["description"] = key.about.into();
                    if let Some(default) = &key.default {
                        schema["default"] = serde_json::to_value(default.value()).unwrap_or(Value::Null);
                    }
                    properties.insert(key.name.into(), schema);
                }
                let tasks: Vec<&str> = [Task::Regression, Task::Classification]
                    .into_iter()
                    .filter(|&task| def.targets.fits(task))
                    .map(Task::name)
                    .collect();
                let mut alternative = json!({
                    "title": def.name,
                    "x-tasks": tasks,
                    "type": "object",
                    "properties": properties,
                    "required": ["family"],
                    "additionalProperties": false
                });
                if let Some(example) = default_candidate(def) {
                    alternative["examples"] = json!([example]);
                }
                alternative
            })
            .collect();
        let mut schema = Map::new();
        schema.insert(
            "description".into(),
            "One model family and its grid of settings; each family takes only its own \
             grid keys (see docs/spec.md)."
                .into(),
        );
        schema.insert("oneOf".into(), alternatives.into());
        schemars::Schema::from(schema)
    }
}

/// A family's default grid as a candidate table (JSON), for the schema's
/// examples: `{"family": "ridge", "penalty": [...]}`.
fn default_candidate(def: &FamilyDef) -> Option<Value> {
    let grid: toml::Table = toml::from_str(def.default_grid).ok()?;
    let mut example = Map::new();
    example.insert("family".into(), def.name.into());
    for (key, value) in grid {
        example.insert(key, serde_json::to_value(value).ok()?);
    }
    Some(Value::Object(example))
}

/// A validated candidate: its label, its features, its family's registry
/// entry with the settings (defaults filled in), and the family bound to
/// the features, ready to fit.
#[derive(Debug, Clone)]
pub(crate) struct FamilySpec {
    /// Replaces the family name in candidate ids.
    pub(crate) label: Option<String>,
    /// The features this candidate uses: its own list or `[data] features`.
    pub(crate) features: Vec<String>,
    /// Pairs of its features multiplied into extra columns (checked: two
    /// distinct features each, a linear-type family).
    pub(crate) interactions: Vec<(String, String)>,
    pub(crate) def: &'static FamilyDef,
    pub(crate) settings: Settings,
    pub(crate) family: Arc<dyn Family>,
}

impl FamilySpec {
    /// The stem of the candidate's ids: its label, or else its family name.
    pub(crate) fn stem(&self) -> &str {
        self.label.as_deref().unwrap_or(self.def.name)
    }

    /// The explicit identity of this candidate's fits, for cache keys.
    pub(crate) fn identity(&self) -> Vec<u8> {
        self.def.identity(&self.settings, &self.features)
    }
}

impl CandidateSpec {
    /// The family's registry entry (the name was checked while reading).
    pub(crate) fn def(&self) -> Option<&'static FamilyDef> {
        registry::find(self.family)
    }

    /// The candidate with the defaults of the keys it leaves out written in:
    /// the same meaning, spelled out (what the canonical spec shows).
    pub(crate) fn with_defaults(&self) -> CandidateSpec {
        let filled = self.def().and_then(|def| def.settings(&self.settings).ok());
        CandidateSpec {
            settings: filled.map_or_else(|| self.settings.clone(), |s| s.values().to_vec()),
            ..self.clone()
        }
    }
}

/// Checks every candidate against its family's registry entry and binds it
/// to its features (`default_features` unless it names its own). Fails on
/// the first problem, naming the key as `candidate[i] (family).key`.
pub(super) fn validate_candidates(
    spec: &SpecFile,
    default_features: &[String],
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<Vec<FamilySpec>, SpecError> {
    let mut ids = BTreeSet::new();
    let mut families = Vec::with_capacity(spec.candidates.len());
    for (index, raw) in spec.candidates.iter().enumerate() {
        let key = format!("candidate[{}] ({})", index + 1, raw.family);
        let at =
            |problem: SettingProblem| invalid(&format!("{key}.{}", problem.key), problem.message);
        let def = raw.def().ok_or_else(|| {
            invalid(
                &format!("{key}.family"),
                format!("no family is named \"{}\"", raw.family),
            )
        })?;
        let settings = def.settings(&raw.settings).map_err(at)?;
        if let Some(label) = &raw.label {
            let ok = !label.is_empty()
                && label
                    .chars()
                    .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-');
            if !ok {
                return Err(invalid(
                    &format!("{key}.label"),
                    format!("\"{label}\" must use only a-z, 0-9 and '-'"),
                ));
            }
        }
        if let Some(features) = &raw.features {
            validate_feature_list(features, &format!("{key}.features"), invalid)?;
        }
        let features = raw.features.as_deref().unwrap_or(default_features);
        if let (Some(sim), Some(own)) = (&spec.simulate, raw.features.as_deref()) {
            let inputs = sim.input_names();
            if let Some(unknown) = own.iter().find(|f| !inputs.contains(f)) {
                let names: Vec<&str> = inputs.iter().map(String::as_str).collect();
                let hint = closest(unknown, &names)
                    .map(|w| format!(" (did you mean `{w}`?)"))
                    .unwrap_or_default();
                return Err(invalid(
                    &format!("{key}.features"),
                    format!(
                        "\"{unknown}\" is not an input of [simulate] (inputs: {}){hint}",
                        inputs.join(", ")
                    ),
                ));
            }
        }
        let family = def.bind(&settings, features.to_vec()).map_err(at)?;
        if let Some(wanted) = def.feature_count.filter(|&w| w != features.len()) {
            return Err(invalid(
                &format!("{key}.features"),
                format!(
                    "{} takes exactly {wanted} feature(s), got {} ({}); set `features = [...]` on the candidate",
                    def.name,
                    features.len(),
                    features.join(", ")
                ),
            ));
        }
        let interactions = validate_interactions(raw, def, features, &key, invalid)?;
        let candidate = FamilySpec {
            label: raw.label.clone(),
            features: features.to_vec(),
            interactions,
            def,
            settings,
            family,
        };
        let stem = candidate.stem();
        if !ids.insert(stem.to_string()) {
            return Err(invalid(
                &key,
                format!(
                    "a second candidate named \"{stem}\" would give duplicate ids; \
                     add `label = \"...\"` to tell them apart"
                ),
            ));
        }
        families.push(candidate);
    }
    Ok(families)
}

/// The candidate's `interactions`: each a pair of two distinct names among
/// its features, listed once, on a family that takes indicator columns.
fn validate_interactions(
    raw: &CandidateSpec,
    def: &FamilyDef,
    features: &[String],
    key: &str,
    invalid: &impl Fn(&str, String) -> SpecError,
) -> Result<Vec<(String, String)>, SpecError> {
    let Some(pairs) = &raw.interactions else {
        return Ok(Vec::new());
    };
    let at = |i: usize| format!("{key}.interactions[{}]", i + 1);
    if def.categorical != CategoricalUse::Indicators {
        return Err(invalid(
            &format!("{key}.interactions"),
            format!(
                "family \"{}\" is not linear-type, so it takes no interaction columns \
                 (linear, polynomial, ridge, lasso, logistic and discriminant do)",
                def.name
            ),
        ));
    }
    let mut checked: Vec<(String, String)> = Vec::with_capacity(pairs.len());
    for (i, pair) in pairs.iter().enumerate() {
        let [a, b] = pair.as_slice() else {
            return Err(invalid(
                &at(i),
                format!(
                    "an interaction names exactly two features, as [\"a\", \"b\"]; got {}",
                    pair.len()
                ),
            ));
        };
        for name in [a, b] {
            if !features.contains(name) {
                return Err(invalid(
                    &at(i),
                    format!(
                        "\"{name}\" is not among the candidate's features ({})",
                        features.join(", ")
                    ),
                ));
            }
        }
        if a == b {
            return Err(invalid(
                &at(i),
                format!("names \"{a}\" twice; an interaction multiplies two different features"),
            ));
        }
        if checked
            .iter()
            .any(|(x, y)| (x == a && y == b) || (x == b && y == a))
        {
            return Err(invalid(
                &at(i),
                format!("[\"{a}\", \"{b}\"] is listed twice"),
            ));
        }
        checked.push((a.clone(), b.clone()));
    }
    Ok(checked)
}

/// Reads one candidate written as TOML lines (`family = "ridge"` and its
/// keys), checks it as a spec would and binds it to `features`. For the
/// benchmarks and the registry tests, which build families without a spec.
pub fn bind_candidate(text: &str, features: Vec<String>) -> Result<Arc<dyn Family>, String> {
    let raw: CandidateSpec = toml::from_str(text).map_err(|e| e.message().to_string())?;
    let def = raw.def().ok_or("unknown family")?;
    let describe = |p: SettingProblem| format!("{}: {}", p.key, p.message);
    let settings = def.settings(&raw.settings).map_err(describe)?;
    def.bind(&settings, features).map_err(describe)
}
