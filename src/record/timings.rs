//! Per-stage wall times, kept in the order the stages ran and written as a JSON object whose
//! keys are in that order (serde_json's own map would sort them).

use serde::de::{MapAccess, Visitor};
use serde::ser::SerializeMap;
use serde::{Deserialize, Deserializer, Serialize, Serializer};
use std::fmt;

/// Wall time per stage in milliseconds, kept in the order the stages ran. Written as a
/// JSON object whose keys are in that order.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Timings(pub Vec<(String, f64)>);

impl Timings {
    /// Adds a stage; a stage seen again has its time added.
    pub fn add(&mut self, stage: &str, ms: f64) {
        match self.0.iter_mut().find(|(s, _)| s == stage) {
            Some((_, t)) => *t += ms,
            None => self.0.push((stage.to_string(), ms)),
        }
    }
    /// The stages in order.
    pub fn iter(&self) -> impl Iterator<Item = (&str, f64)> {
        self.0.iter().map(|(s, t)| (s.as_str(), *t))
    }
    /// Whether no stage was timed.
    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }
}

impl Serialize for Timings {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        let mut map = serializer.serialize_map(Some(self.0.len()))?;
        for (stage, ms) in &self.0 {
            map.serialize_entry(stage, ms)?;
        }
        map.end()
    }
}

impl<'de> Deserialize<'de> for Timings {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct InOrder;
        impl<'de> Visitor<'de> for InOrder {
            type Value = Timings;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("an object of stage names to milliseconds")
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Timings, A::Error> {
                let mut out = Timings::default();
                while let Some((stage, ms)) = map.next_entry::<String, f64>()? {
                    out.add(&stage, ms);
                }
                Ok(out)
            }
        }
        deserializer.deserialize_map(InOrder)
    }
}

#[cfg(test)]
mod tests {
    use crate::record::{Record, fixture};

    #[test]
    fn timings_keep_pipeline_order() {
        let mut record = fixture::minimal_record();
        record
            .time("decode", 120.0)
            .time("scale", 3.0)
            .time("find", 40.0);
        record.time("decode", 5.0);
        let json = record.to_json().unwrap();
        let timings = &json[json.find("\"timings_ms\"").unwrap()..];
        let (d, s, f) = (
            timings.find("\"decode\"").unwrap(),
            timings.find("\"scale\"").unwrap(),
            timings.find("\"find\"").unwrap(),
        );
        assert!(d < s && s < f, "{json}");
        let back = Record::from_json(&json).unwrap();
        let stages: Vec<_> = back.timings_ms.iter().collect();
        assert_eq!(
            stages,
            vec![("decode", 125.0), ("scale", 3.0), ("find", 40.0)]
        );
    }
}
