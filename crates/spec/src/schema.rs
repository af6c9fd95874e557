//! The raw YAML schema, as serde reads it. Every name and formula keeps its position.
//!
//! The same types give the spec's JSON Schema ([`json_schema`]), so editors can validate a
//! spec as it is typed; `schema/spec.schema.json` is that output, committed and checked for
//! staleness by the tests.

use schemars::{json_schema, JsonSchema, Schema, SchemaGenerator};
use serde::Deserialize;
use serde_saphyr::Spanned;
use std::fmt;
use std::marker::PhantomData;

/// A string with the position of its YAML scalar.
pub type SpannedStr = Spanned<String>;

/// `[min, max]` with the position of the list and of each number (so the loader can read
/// each end as the decimal it was written as).
pub type RawRange = Spanned<Vec<Spanned<f64>>>;

/// A YAML mapping whose order matters (laws are evaluated in order) and whose keys keep their
/// positions.
#[derive(Debug, Clone)]
pub struct Ordered<V>(pub Vec<(SpannedStr, V)>);

impl<V> Default for Ordered<V> {
    fn default() -> Self {
        Ordered(Vec::new())
    }
}

impl<'de, V: Deserialize<'de>> Deserialize<'de> for Ordered<V> {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct Visit<V>(PhantomData<V>);
        impl<'de, V: Deserialize<'de>> serde::de::Visitor<'de> for Visit<V> {
            type Value = Ordered<V>;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a mapping of names")
            }
            fn visit_map<A: serde::de::MapAccess<'de>>(
                self,
                mut m: A,
            ) -> Result<Self::Value, A::Error> {
                let mut out = Vec::new();
                while let Some((k, v)) = m.next_entry::<SpannedStr, V>()? {
                    out.push((k, v));
                }
                Ok(Ordered(out))
            }
            fn visit_unit<E>(self) -> Result<Self::Value, E> {
                Ok(Ordered(Vec::new()))
            }
        }
        d.deserialize_map(Visit(PhantomData))
    }
}

impl<V: JsonSchema> JsonSchema for Ordered<V> {
    fn schema_name() -> std::borrow::Cow<'static, str> {
        format!("Ordered_{}", V::schema_name()).into()
    }

    fn json_schema(g: &mut SchemaGenerator) -> Schema {
        let value = g.subschema_for::<V>();
        json_schema!({
            "type": ["object", "null"],
            "description": "A mapping of names (identifiers), in the order they are evaluated.",
            "propertyNames": { "pattern": "^[A-Za-z_][A-Za-z0-9_]*$" },
            "additionalProperties": value,
        })
    }
}

/// A unit or a formula: YAML may read `1` or `0` as a number, which serde takes as text.
struct Scalar;

impl JsonSchema for Scalar {
    fn schema_name() -> std::borrow::Cow<'static, str> {
        "Scalar".into()
    }

    fn json_schema(_: &mut SchemaGenerator) -> Schema {
        json_schema!({ "type": ["string", "number"] })
    }
}

/// A claim: one of the named claims, `{ exponential: RATE }`, `{ ultimate_bound: … }` or
/// `{ negative_definite_in: [STATE, …] }`.
fn claim_schema(_: &mut SchemaGenerator) -> Schema {
    json_schema!({
        "oneOf": [
            { "enum": ["negative_definite", "negative_semidefinite"] },
            {
                "type": "object",
                "properties": { "exponential": { "type": "number", "exclusiveMinimum": 0 } },
                "required": ["exponential"],
                "additionalProperties": false
            },
            {
                "type": "object",
                "properties": {
                    "negative_definite_in": {
                        "type": "array",
                        "items": { "type": "string" },
                        "minItems": 1
                    }
                },
                "required": ["negative_definite_in"],
                "additionalProperties": false
            },
            {
                "type": "object",
                "properties": {
                    "ultimate_bound": {
                        "oneOf": [
                            { "const": "auto" },
                            { "type": "array", "items": { "type": "number", "exclusiveMinimum": 0 } },
                            {
                                "type": "object",
                                "additionalProperties": { "type": "number", "exclusiveMinimum": 0 }
                            }
                        ]
                    }
                },
                "required": ["ultimate_bound"],
                "additionalProperties": false
            }
        ]
    })
}

/// The JSON Schema (draft 2020-12) of a spec file, from the types serde reads it with.
pub fn json_schema() -> serde_json::Value {
    let mut schema = schemars::generate::SchemaSettings::draft2020_12()
        .into_generator()
        .into_root_schema_for::<RawSpec>();
    schema.insert("title".into(), "lawsmith spec".into());
    schema.insert(
        "description".into(),
        "A control law with its plant model, energies, Lyapunov candidate and claim, actuators and guidance (see README.md).".into(),
    );
    schema.to_value()
}

/// Top level of a spec file.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawSpec {
    #[schemars(with = "String")]
    pub name: SpannedStr,
    #[serde(default)]
    pub summary: Option<String>,
    #[serde(default)]
    pub assumptions: Vec<String>,
    #[serde(default)]
    pub parameters: Ordered<RawParameter>,
    #[serde(default)]
    pub gains: Ordered<RawGain>,
    #[serde(default)]
    #[schemars(with = "Vec<String>")]
    pub constraints: Vec<SpannedStr>,
    #[serde(default)]
    pub states: Ordered<RawState>,
    #[serde(default)]
    pub references: Ordered<RawReference>,
    #[serde(default)]
    pub signals: Ordered<RawSignal>,
    #[serde(default)]
    pub inputs: Ordered<RawInput>,
    #[serde(default)]
    pub uncertain: Ordered<RawUncertain>,
    /// Controller states: integrators and adaptive estimates the law carries from one period
    /// to the next.
    #[serde(default)]
    pub memory: Ordered<RawMemory>,
    #[serde(default)]
    #[schemars(with = "Ordered<Scalar>")]
    pub dynamics: Ordered<SpannedStr>,
    #[serde(default)]
    #[schemars(with = "Ordered<Scalar>")]
    pub energies: Ordered<SpannedStr>,
    pub lyapunov: RawLyapunov,
    #[serde(default)]
    #[schemars(with = "Ordered<Scalar>")]
    pub laws: Ordered<SpannedStr>,
    #[serde(default)]
    pub actuators: Ordered<RawActuator>,
    #[serde(default)]
    pub guidance: Ordered<RawGuidance>,
}

#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawParameter {
    #[schemars(with = "f64")]
    pub value: Spanned<f64>,
    #[schemars(with = "Scalar")]
    pub unit: SpannedStr,
}

#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawGain {
    #[schemars(with = "[f64; 2]")]
    pub range: RawRange,
    #[schemars(with = "Scalar")]
    pub unit: SpannedStr,
    #[serde(default)]
    #[schemars(with = "Option<f64>")]
    pub default: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawState {
    #[schemars(with = "Scalar")]
    pub unit: SpannedStr,
    #[serde(default)]
    #[schemars(with = "Option<String>")]
    pub reference: Option<SpannedStr>,
    #[serde(default)]
    #[schemars(with = "Option<f64>")]
    pub equilibrium: Option<Spanned<f64>>,
    #[schemars(with = "[f64; 2]")]
    pub error: RawRange,
}

#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawReference {
    #[schemars(with = "Scalar")]
    pub unit: SpannedStr,
    #[schemars(with = "[f64; 2]")]
    pub range: RawRange,
    #[schemars(with = "String")]
    pub rate: SpannedStr,
    #[schemars(with = "[f64; 2]")]
    pub rate_range: RawRange,
    /// The name of the rate's own time derivative (with `accel_range`), for laws that need
    /// `ddt` of the reference's rate.
    #[serde(default)]
    #[schemars(with = "Option<String>")]
    pub accel: Option<SpannedStr>,
    /// The range of `accel`.
    #[serde(default)]
    #[schemars(with = "Option<[f64; 2]>")]
    pub accel_range: Option<RawRange>,
}

#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawSignal {
    #[schemars(with = "Scalar")]
    pub unit: SpannedStr,
    #[schemars(with = "[f64; 2]")]
    pub range: RawRange,
}

#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawInput {
    #[schemars(with = "Scalar")]
    pub unit: SpannedStr,
}

#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawLyapunov {
    #[serde(default, rename = "where")]
    #[schemars(with = "Ordered<Scalar>")]
    pub where_: Ordered<SpannedStr>,
    #[schemars(with = "Scalar")]
    pub candidate: SpannedStr,
    #[schemars(schema_with = "claim_schema")]
    pub claim: Spanned<RawClaim>,
}

/// The plant's true value of a signal or input (`estimate` with `relative` or `absolute`,
/// the error optionally named by `error`), or a constant unknown (`constant` with `unit`).
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawUncertain {
    #[serde(default)]
    #[schemars(with = "Option<String>")]
    pub estimate: Option<SpannedStr>,
    #[serde(default)]
    #[schemars(with = "Option<[f64; 2]>")]
    pub relative: Option<RawRange>,
    #[serde(default)]
    #[schemars(with = "Option<[f64; 2]>")]
    pub absolute: Option<RawRange>,
    /// A name for the error (constant in time), so the candidate and an estimate can use it.
    #[serde(default)]
    #[schemars(with = "Option<String>")]
    pub error: Option<SpannedStr>,
    /// A constant unknown's range (with `unit`, instead of `estimate`).
    #[serde(default)]
    #[schemars(with = "Option<[f64; 2]>")]
    pub constant: Option<RawRange>,
    /// A constant unknown's unit.
    #[serde(default)]
    #[schemars(with = "Option<Scalar>")]
    pub unit: Option<SpannedStr>,
}

/// A controller state: its unit, initial value, update law (its time derivative), limits,
/// and what it settles at (`estimates`: a constant unknown; `equilibrium`: a number).
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawMemory {
    #[schemars(with = "Scalar")]
    pub unit: SpannedStr,
    #[schemars(with = "f64")]
    pub initial: Spanned<f64>,
    /// Its time derivative (required; the loader reports it missing with a position).
    #[serde(default)]
    #[schemars(with = "Scalar")]
    pub update: Option<SpannedStr>,
    #[schemars(with = "[f64; 2]")]
    pub limits: RawRange,
    #[serde(default)]
    #[schemars(with = "Option<String>")]
    pub estimates: Option<SpannedStr>,
    #[serde(default)]
    #[schemars(with = "Option<f64>")]
    pub equilibrium: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(untagged)]
pub enum RawClaim {
    Named(String),
    Exponential { exponential: f64 },
    Bound { ultimate_bound: RawBound },
    DefiniteIn { negative_definite_in: Vec<String> },
}

/// `auto`, a list of bounds in state order, or a mapping state → bound.
#[derive(Debug, Deserialize)]
#[serde(untagged)]
pub enum RawBound {
    Auto(String),
    List(Vec<f64>),
    Map(std::collections::BTreeMap<String, f64>),
}

#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawActuator {
    #[schemars(with = "Scalar")]
    pub law: SpannedStr,
    #[schemars(with = "Scalar")]
    pub unit: SpannedStr,
    #[schemars(with = "[f64; 2]")]
    pub limits: RawRange,
    /// The command sent when the law's value is not finite (in the actuator's unit, inside
    /// its limits); zero clamped into the limits when absent.
    #[serde(default)]
    #[schemars(with = "Option<f64>")]
    pub safe: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawGuidance {
    #[schemars(with = "String")]
    pub command: SpannedStr,
    #[schemars(with = "String")]
    pub gain: SpannedStr,
    #[schemars(with = "[f64; 2]")]
    pub rate_limit: RawRange,
}
