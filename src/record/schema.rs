//! The JSON Schema (draft 2020-12, `$id` `fringegauge.record/1`) of the record, printed by
//! `fringegauge schema` so that other programs can check records without this crate.

/// The JSON Schema of the record, as text.
pub fn schema_json() -> &'static str {
    include_str!("schema.json")
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::{Record, fixture};
    use serde_json::{Value, json};

    fn validator() -> jsonschema::Validator {
        let schema: Value = serde_json::from_str(schema_json()).unwrap();
        jsonschema::draft202012::new(&schema).unwrap()
    }

    fn errors(v: &jsonschema::Validator, instance: &Value) -> Vec<String> {
        v.iter_errors(instance)
            .map(|e| format!("{} at {}", e, e.instance_path))
            .collect()
    }

    fn as_value(record: &Record) -> Value {
        serde_json::from_str(&record.to_json().unwrap()).unwrap()
    }

    #[test]
    fn schema_is_valid_draft_2020_12_with_our_id() {
        let schema: Value = serde_json::from_str(schema_json()).unwrap();
        assert!(jsonschema::meta::is_valid(&schema));
        assert_eq!(schema["$id"], "fringegauge.record/1");
        assert_eq!(
            schema["$schema"],
            "https://json-schema.org/draft/2020-12/schema"
        );
        assert_eq!(
            schema["properties"]["schema"]["const"],
            crate::record::SCHEMA_ID
        );
    }

    #[test]
    fn every_property_is_described() {
        fn walk(v: &Value, at: &str, missing: &mut Vec<String>) {
            if let Some(props) = v.get("properties").and_then(Value::as_object) {
                for (name, sub) in props {
                    let here = format!("{at}/{name}");
                    if sub.get("description").is_none() {
                        missing.push(here.clone());
                    }
                    walk(sub, &here, missing);
                }
            }
            for key in ["items", "additionalProperties"] {
                if let Some(sub) = v.get(key) {
                    walk(sub, &format!("{at}/{key}"), missing);
                }
            }
            if let Some(defs) = v.get("$defs").and_then(Value::as_object) {
                for (name, sub) in defs {
                    if sub.get("description").is_none() {
                        missing.push(format!("$defs/{name}"));
                    }
                    walk(sub, &format!("$defs/{name}"), missing);
                }
            }
        }
        let schema: Value = serde_json::from_str(schema_json()).unwrap();
        let mut missing = Vec::new();
        walk(&schema, "", &mut missing);
        assert!(missing.is_empty(), "no description: {missing:?}");
    }

    #[test]
    fn serialised_records_validate() {
        let v = validator();
        for record in [fixture::grating_record(), fixture::minimal_record()] {
            let value = as_value(&record);
            assert_eq!(errors(&v, &value), Vec::<String>::new());
        }
        // A record made by the constructor, with one result and nothing else set.
        let mut fresh = Record::new(
            "electron",
            fixture::photo_info(),
            crate::record::ScaleInfo::new("sheet", 0.2, 0.004),
        );
        fresh.push_result(
            crate::record::ResultEntry::new("d_spacing", 2.13e-10, 1e-12, "m", 2.0)
                .with_label("ring 1")
                .with_index("10.0"),
        );
        assert_eq!(errors(&v, &as_value(&fresh)), Vec::<String>::new());
    }

    #[test]
    fn hand_written_minimal_record_validates_and_reads() {
        let text = json!({
            "schema": "fringegauge.record/1",
            "tool": {"name": "fringegauge", "version": "0.1.0"},
            "created": "2025-01-02T03:04:05Z",
            "photo": {"path": "a.png", "sha256": "0".repeat(64), "width": 10, "height": 10,
                      "orientation": 1, "exif": {}},
            "setup": {"kind": "pinhole", "inputs": {}},
            "scale": {"method": "mm-per-px", "mm_per_px": {"value": 0.1, "u": 0.0}},
            "results": [{"name": "diameter", "value": 1e-4, "unit": "m", "u": 1e-6,
                         "k": 2, "expanded": 2e-6, "budget": []}]
        });
        assert_eq!(errors(&validator(), &text), Vec::<String>::new());
        let record = Record::from_json(&text.to_string()).unwrap();
        assert_eq!(record.results[0].name, "diameter");
        assert!(record.features.is_empty() && record.timings_ms.is_empty());
    }

    /// Each change must make the grating record invalid.
    #[test]
    fn invalid_records_fail() {
        let v = validator();
        let base = as_value(&fixture::grating_record());
        type Edit = fn(&mut Value);
        let edits: [(&str, Edit); 12] = [
            ("no results", |r| {
                r.as_object_mut().unwrap().remove("results");
            }),
            ("empty results", |r| r["results"] = json!([])),
            ("no schema", |r| {
                r.as_object_mut().unwrap().remove("schema");
            }),
            ("other schema", |r| {
                r["schema"] = json!("fringegauge.record/2")
            }),
            ("unknown kind", |r| r["setup"]["kind"] = json!("hologram")),
            ("bad source", |r| {
                r["setup"]["inputs"]["wavelength"]["source"] = json!("guessed")
            }),
            ("NaN written as null", |r| {
                r["results"][0]["u"] = Value::Null
            }),
            ("negative u", |r| r["results"][0]["u"] = json!(-1e-9)),
            ("short hash", |r| r["photo"]["sha256"] = json!("abc")),
            ("3-vector px", |r| {
                r["features"][0]["px"] = json!([1.0, 2.0, 3.0])
            }),
            ("2×3 homography", |r| {
                r["scale"]["homography"] = json!([[1, 0, 0], [0, 1, 0]])
            }),
            ("unknown field", |r| r["colour"] = json!("red")),
        ];
        for (what, edit) in edits {
            let mut bad = base.clone();
            edit(&mut bad);
            assert!(!v.is_valid(&bad), "{what}: should be invalid");
        }
        let mut bad = base.clone();
        bad["created"] = json!("14/03/2025");
        assert!(!v.is_valid(&bad), "a non-RFC 3339 date");
    }

    /// The Rust types refuse what the schema refuses, for the required fields.
    #[test]
    fn rust_types_agree_with_the_schema_on_required_fields() {
        let schema: Value = serde_json::from_str(schema_json()).unwrap();
        let base = as_value(&fixture::grating_record());
        let required = schema["required"].as_array().unwrap();
        for field in required {
            let field = field.as_str().unwrap();
            let mut bad = base.clone();
            bad.as_object_mut().unwrap().remove(field);
            assert!(
                Record::from_json(&bad.to_string()).is_err(),
                "Rust reads a record without {field}"
            );
        }
        // And what the schema leaves optional, Rust reads without.
        for field in ["features", "fit", "warnings", "assumptions", "timings_ms"] {
            let mut ok = base.clone();
            ok.as_object_mut().unwrap().remove(field);
            assert!(validator().is_valid(&ok), "{field}");
            assert!(Record::from_json(&ok.to_string()).is_ok(), "{field}");
        }
    }
}
