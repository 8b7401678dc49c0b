//! The identifier type of the set-up: detector, arm and run ids as the config and the run
//! records write them (a string or a whole number), kept as text. Read with the rest of the
//! set-up, before any stage is built.

use std::borrow::Cow;

use schemars::{json_schema, JsonSchema, Schema, SchemaGenerator};
use serde::{Deserialize, Deserializer};

/// An identifier written as a string or a whole number (`D07`, `7`, `"0101"`), kept as text.
#[derive(Debug, Clone, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Id(pub String);

impl<'de> Deserialize<'de> for Id {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct IdVisitor;
        impl serde::de::Visitor<'_> for IdVisitor {
            type Value = Id;
            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str("a string or a whole number")
            }
            fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<Id, E> {
                if v.trim().is_empty() {
                    return Err(E::invalid_value(serde::de::Unexpected::Str(v), &self));
                }
                Ok(Id(v.to_string()))
            }
            fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<Id, E> {
                Ok(Id(v.to_string()))
            }
            fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<Id, E> {
                Ok(Id(v.to_string()))
            }
        }
        deserializer.deserialize_any(IdVisitor)
    }
}

impl JsonSchema for Id {
    fn schema_name() -> Cow<'static, str> {
        "Id".into()
    }
    fn json_schema(_: &mut SchemaGenerator) -> Schema {
        json_schema!({
            "description": "An identifier: a non-empty string or a whole number, kept as text.",
            "type": ["string", "integer"]
        })
    }
}

impl std::fmt::Display for Id {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}
