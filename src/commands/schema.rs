//! `heldout schema`: the JSON Schema of the spec, for editors that complete
//! and check TOML or YAML against one (TOML and YAML specs share one
//! structure, so one schema serves both).

use std::io::Write as _;

use anyhow::Context;
use serde_json::Value;

use crate::spec::SpecFile;

/// The schema as pretty-printed JSON, with a trailing newline.
pub(crate) fn schema_text() -> anyhow::Result<String> {
    let schema = schemars::schema_for!(SpecFile);
    let mut value = serde_json::to_value(&schema).context("cannot build the schema")?;
    drop_null(&mut value);
    if let Value::Object(root) = &mut value {
        root.insert(
            "title".into(),
            "heldout spec (TOML or YAML; see docs/spec.md)".into(),
        );
    }
    let mut text = serde_json::to_string_pretty(&value).context("cannot write the schema")?;
    text.push('\n');
    Ok(text)
}

/// Removes the `null` alternatives and defaults that `Option` fields get:
/// TOML has no null, and in YAML an optional key is left out, not null.
fn drop_null(value: &mut Value) {
    match value {
        Value::Object(map) => {
            if map.get("default").is_some_and(Value::is_null) {
                map.remove("default");
            }
            if let Some(Value::Object(default)) = map.get_mut("default") {
                default.retain(|_, v| !v.is_null());
            }
            if let Some(Value::Array(types)) = map.get_mut("type") {
                types.retain(|t| t != "null");
                if types.len() == 1 {
                    let only = types.remove(0);
                    map.insert("type".into(), only);
                }
            }
            if let Some(Value::Array(options)) = map.get_mut("anyOf") {
                options.retain(|o| o.get("type").is_none_or(|t| t != "null"));
                if options.len() == 1 {
                    let only = options.remove(0);
                    map.remove("anyOf");
                    if let Value::Object(inner) = only {
                        map.extend(inner);
                    }
                }
            }
            map.values_mut().for_each(drop_null);
        }
        Value::Array(items) => items.iter_mut().for_each(drop_null),
        _ => {}
    }
}

pub(crate) fn schema() -> anyhow::Result<()> {
    std::io::stdout()
        .write_all(schema_text()?.as_bytes())
        .context("cannot write to stdout")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_schema_lists_exactly_the_registered_families_with_their_keys() {
        let schema: Value = serde_json::from_str(&schema_text().unwrap()).unwrap();
        let alternatives = schema["$defs"]["CandidateSpec"]["oneOf"]
            .as_array()
            .unwrap();
        let listed: Vec<&str> = alternatives
            .iter()
            .map(|a| a["properties"]["family"]["const"].as_str().unwrap())
            .collect();
        assert_eq!(listed, crate::models::registry::names());
        for (alternative, def) in alternatives.iter().zip(crate::models::registry::FAMILIES) {
            assert_eq!(alternative["additionalProperties"], false);
            let mut keys: Vec<&str> = alternative["properties"]
                .as_object()
                .unwrap()
                .keys()
                .map(String::as_str)
                .collect();
            keys.sort_unstable();
            // `interactions` only where the family takes indicator columns.
            let linear_type =
                def.categorical == crate::models::registry::CategoricalUse::Indicators;
            let mut expected: Vec<&str> = ["family", "label", "features"]
                .into_iter()
                .chain(linear_type.then_some("interactions"))
                .chain(def.keys.iter().map(|k| k.name))
                .collect();
            expected.sort_unstable();
            assert_eq!(keys, expected, "{}", def.name);
        }
    }

    #[test]
    fn null_alternatives_are_dropped_and_others_kept() {
        let mut value = serde_json::json!({
            "a": {"type": ["string", "null"]},
            "b": {"anyOf": [{"$ref": "#/$defs/X"}, {"type": "null"}], "description": "d"},
            "c": {"type": ["array", "null"], "items": {"type": ["integer", "null"]}},
            "d": {"anyOf": [{"type": "string"}, {"type": "number"}]},
            "e": {"type": ["integer", "null"], "default": null},
            "f": {"default": {"folds": null, "repeats": 1}}
        });
        drop_null(&mut value);
        assert_eq!(
            value,
            serde_json::json!({
                "a": {"type": "string"},
                "b": {"$ref": "#/$defs/X", "description": "d"},
                "c": {"type": "array", "items": {"type": "integer"}},
                "d": {"anyOf": [{"type": "string"}, {"type": "number"}]},
                "e": {"type": "integer"},
                "f": {"default": {"repeats": 1}}
            })
        );
    }
}
