//! Writing and reading the record as JSON, with the checks that keep a record honest:
//! at least one result, finite numbers only (JSON has no NaN), a square covariance, and the
//! schema id read before anything else.

use super::{Record, RecordError, SCHEMA_ID};
use serde::Deserialize;

impl Record {
    /// The record as pretty JSON, after checking that it is complete: at least one result,
    /// every number finite, the covariance square and matching the parameters.
    pub fn to_json(&self) -> Result<String, RecordError> {
        if self.results.is_empty() {
            return Err(RecordError::Incomplete(
                "it has no result; nothing was measured".into(),
            ));
        }
        if let Some(fit) = &self.fit {
            let n = fit.parameters.len();
            if fit.covariance.len() != n || fit.covariance.iter().any(|row| row.len() != n) {
                return Err(RecordError::Incomplete(format!(
                    "the covariance of the {} fit is not {n}×{n}",
                    fit.model
                )));
            }
        }
        let value = serde_json::to_value(self)
            .map_err(|e| RecordError::Incomplete(format!("it cannot be written as JSON: {e}")))?;
        // serde_json writes a NaN or an infinity as null, and no field of ours is ever null.
        if let Some(at) = find_null(&value, String::new()) {
            return Err(RecordError::Incomplete(format!(
                "the number at {at} is not finite"
            )));
        }
        // Written from the struct, not from `value`, whose map sorts keys: the record keeps
        // its declared field order and the timings their pipeline order.
        serde_json::to_string_pretty(self)
            .map_err(|e| RecordError::Incomplete(format!("it cannot be written as JSON: {e}")))
    }

    /// Reads a record from JSON text.
    pub fn from_json(text: &str) -> Result<Record, RecordError> {
        Record::from_json_at(text, "the record")
    }

    /// Reads a record from JSON text that came from `origin` (a path, for messages).
    pub fn from_json_at(text: &str, origin: &str) -> Result<Record, RecordError> {
        // The schema id is read first, so that a record of another version says so rather
        // than failing on its first unknown field.
        #[derive(Deserialize)]
        struct Head {
            schema: Option<serde_json::Value>,
        }
        let json_error = |source| RecordError::Json {
            path: origin.to_string(),
            source,
        };
        let head: Head = serde_json::from_str(text).map_err(json_error)?;
        let found = match head.schema {
            Some(serde_json::Value::String(s)) if s == SCHEMA_ID => None,
            Some(serde_json::Value::String(s)) => Some(format!("its schema is \"{s}\"")),
            Some(other) => Some(format!("its schema is {other}")),
            None => Some("it has no \"schema\" field".to_string()),
        };
        if let Some(found) = found {
            return Err(RecordError::BadRecord {
                path: origin.to_string(),
                reason: format!("{found}; this fringegauge reads \"{SCHEMA_ID}\""),
            });
        }
        serde_json::from_str(text).map_err(json_error)
    }
}

/// The JSON pointer of the first null in `value`.
fn find_null(value: &serde_json::Value, at: String) -> Option<String> {
    match value {
        serde_json::Value::Null => Some(if at.is_empty() { "/".into() } else { at }),
        serde_json::Value::Array(items) => items
            .iter()
            .enumerate()
            .find_map(|(i, v)| find_null(v, format!("{at}/{i}"))),
        serde_json::Value::Object(map) => map
            .iter()
            .find_map(|(k, v)| find_null(v, format!("{at}/{k}"))),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::fixture;

    #[test]
    fn round_trip_keeps_every_field() {
        let record = fixture::grating_record();
        let json = record.to_json().unwrap();
        let back = Record::from_json(&json).unwrap();
        fixture::assert_same(&back, &record);
        // Optional fields that are absent are left out, not written as null.
        let minimal = fixture::minimal_record();
        let json = minimal.to_json().unwrap();
        assert!(!json.contains("null"), "{json}");
        assert!(!json.contains("homography"), "{json}");
        fixture::assert_same(&Record::from_json(&json).unwrap(), &minimal);
    }

    #[test]
    fn incomplete_records_are_refused() {
        let mut record = fixture::minimal_record();
        record.results.clear();
        let err = record.to_json().unwrap_err();
        assert!(matches!(err, RecordError::Incomplete(_)), "{err}");

        let mut record = fixture::minimal_record();
        record.results[0].u = f64::NAN;
        let err = record.to_json().unwrap_err().to_string();
        assert!(err.contains("/results/0/u"), "{err}");

        let mut record = fixture::grating_record();
        if let Some(fit) = record.fit.as_mut() {
            fit.covariance.pop();
        }
        assert!(matches!(record.to_json(), Err(RecordError::Incomplete(_))));
    }

    #[test]
    fn from_json_says_what_is_wrong() {
        let err = Record::from_json("{ not json").unwrap_err();
        assert!(matches!(err, RecordError::Json { .. }), "{err}");
        let err = Record::from_json(r#"{"schema": "fringegauge.record/9"}"#).unwrap_err();
        assert!(err.to_string().contains("fringegauge.record/9"), "{err}");
        let err = Record::from_json(r#"{"results": []}"#).unwrap_err();
        assert!(err.to_string().contains("schema"), "{err}");
        // Right schema id, missing fields: serde names the field.
        let err = Record::from_json(r#"{"schema": "fringegauge.record/1"}"#).unwrap_err();
        assert!(err.to_string().contains("missing field"), "{err}");
    }
}
