//! The raw YAML schema, as serde reads it. Every name and formula keeps its position.

use serde::Deserialize;
use serde_saphyr::Spanned;
use std::fmt;
use std::marker::PhantomData;

/// A string with the position of its YAML scalar.
pub type SpannedStr = Spanned<String>;

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

/// Top level of a spec file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawSpec {
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
    pub dynamics: Ordered<SpannedStr>,
    #[serde(default)]
    pub energies: Ordered<SpannedStr>,
    pub lyapunov: RawLyapunov,
    #[serde(default)]
    pub laws: Ordered<SpannedStr>,
    #[serde(default)]
    pub actuators: Ordered<RawActuator>,
    #[serde(default)]
    pub guidance: Ordered<RawGuidance>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawParameter {
    pub value: Spanned<f64>,
    pub unit: SpannedStr,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawGain {
    pub range: Spanned<Vec<f64>>,
    pub unit: SpannedStr,
    #[serde(default)]
    pub default: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawState {
    pub unit: SpannedStr,
    #[serde(default)]
    pub reference: Option<SpannedStr>,
    #[serde(default)]
    pub equilibrium: Option<Spanned<f64>>,
    pub error: Spanned<Vec<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawReference {
    pub unit: SpannedStr,
    pub range: Spanned<Vec<f64>>,
    pub rate: SpannedStr,
    pub rate_range: Spanned<Vec<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawSignal {
    pub unit: SpannedStr,
    pub range: Spanned<Vec<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawInput {
    pub unit: SpannedStr,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawLyapunov {
    #[serde(default, rename = "where")]
    pub where_: Ordered<SpannedStr>,
    pub candidate: SpannedStr,
    pub claim: Spanned<RawClaim>,
}

#[derive(Debug, Deserialize)]
#[serde(untagged)]
pub enum RawClaim {
    Named(String),
    Exponential { exponential: f64 },
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawActuator {
    pub law: SpannedStr,
    pub unit: SpannedStr,
    pub limits: Spanned<Vec<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawGuidance {
    pub command: SpannedStr,
    pub gain: SpannedStr,
    pub rate_limit: Spanned<Vec<f64>>,
}
