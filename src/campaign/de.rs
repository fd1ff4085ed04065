//! A serde [`Deserializer`](serde::Deserializer) over the positioned YAML tree of
//! [`yaml`](super::yaml).
//!
//! Every error carries the position of the node it arose at and a structured
//! [`Problem`] (unknown key with the keys allowed, missing key, wrong type, a number
//! out of range, …), so a located message never depends on how serde words its
//! own messages. Integers are converted with checked conversions: `4294967297`
//! for a `u32` is an error at its line and column, never a truncated value.

use super::fields::did_you_mean;
use super::yaml::{Node, Pos, Value};
use serde::de::{self, DeserializeOwned, DeserializeSeed, IntoDeserializer, Visitor};
use std::fmt;

/// What went wrong while reading a typed section.
#[derive(Debug, Clone, PartialEq)]
pub enum Problem {
    /// A key the type does not have.
    UnknownKey {
        /// the key as written
        key: String,
        /// the keys the type has
        expected: &'static [&'static str],
    },
    /// A word that is none of the allowed values.
    UnknownVariant {
        /// the word as written
        word: String,
        /// the allowed words
        expected: &'static [&'static str],
    },
    /// A required key is absent.
    MissingKey(&'static str),
    /// A key given twice in one mapping.
    DuplicateKey(String),
    /// A value of the wrong kind.
    WrongType {
        /// what was wanted
        expected: String,
        /// what was found ("a string", "a list", …)
        found: String,
    },
    /// A value of the right kind that is not allowed (out of range, …).
    Invalid {
        /// what was wanted
        expected: String,
        /// what was found
        found: String,
    },
    /// Any other message (from a type's own validation).
    Other(String),
}

/// An error at a node of the tree.
#[derive(Debug, Clone, PartialEq)]
pub struct DeError {
    /// Where; `None` only until the node that saw it fills it in.
    pub pos: Option<Pos>,
    /// The dotted path of the value (`scheduler.max_queued`), filled in with `pos`.
    pub path: String,
    /// What.
    pub problem: Problem,
}

impl DeError {
    fn new(problem: Problem) -> Self {
        DeError {
            pos: None,
            path: String::new(),
            problem,
        }
    }

    fn at(mut self, pos: Pos, path: &str) -> Self {
        if self.pos.is_none() {
            self.pos = Some(pos);
            self.path = path.to_string();
        }
        self
    }

    /// The message, naming the value by its path.
    pub fn message(&self) -> String {
        let p = &self.path;
        match &self.problem {
            Problem::UnknownKey { key, .. } => format!("unknown key '{key}' in {p}"),
            Problem::UnknownVariant { word, .. } => format!("{p}: unknown value '{word}'"),
            Problem::MissingKey(k) => format!("{p} has no '{k}'"),
            Problem::DuplicateKey(k) => format!("key '{k}' appears twice in {p}"),
            Problem::WrongType { expected, found } => {
                format!("{p} must be {expected}, not {found}")
            }
            Problem::Invalid { expected, found } => format!("{p} must be {expected}, not {found}"),
            Problem::Other(m) => format!("{p}: {m}"),
        }
    }

    /// How to fix it, where there is something better to say than the message.
    pub fn hint(&self) -> Option<String> {
        match &self.problem {
            Problem::UnknownKey { key, expected }
            | Problem::UnknownVariant {
                word: key,
                expected,
            } => Some(match did_you_mean(key, expected) {
                Some(s) => format!("did you mean '{s}'?"),
                None if expected.is_empty() => "remove it".to_string(),
                None => format!("use one of: {}", expected.join(", ")),
            }),
            Problem::MissingKey(k) => Some(format!("add {k}: to {}", self.path)),
            Problem::DuplicateKey(_) => {
                Some("remove one of them: the later one would silently win".into())
            }
            Problem::WrongType { expected, .. } if expected.starts_with("a whole number") => {
                Some("write a whole number such as 3, without quotes".into())
            }
            Problem::WrongType { expected, .. } if expected == "a number" => {
                Some("write a number such as 2.5, without quotes".into())
            }
            Problem::WrongType { expected, .. } if expected == "text" => {
                Some("put it in quotes".into())
            }
            _ => None,
        }
    }
}

impl fmt::Display for DeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message())
    }
}

impl std::error::Error for DeError {}

fn describe(u: &de::Unexpected) -> String {
    use de::Unexpected as U;
    match u {
        U::Bool(b) => format!("a boolean ({b})"),
        U::Unsigned(i) => format!("{i}"),
        U::Signed(i) => format!("{i}"),
        U::Float(f) => format!("{f}"),
        U::Char(c) => format!("'{c}'"),
        U::Str(s) => format!("a string ('{s}')"),
        U::Unit | U::Option => "nothing (null)".into(),
        U::Seq => "a list".into(),
        U::Map => "a mapping".into(),
        other => other.to_string(),
    }
}

impl de::Error for DeError {
    fn custom<T: fmt::Display>(msg: T) -> Self {
        DeError::new(Problem::Other(msg.to_string()))
    }
    fn invalid_type(unexp: de::Unexpected, exp: &dyn de::Expected) -> Self {
        DeError::new(Problem::WrongType {
            expected: exp.to_string(),
            found: describe(&unexp),
        })
    }
    fn invalid_value(unexp: de::Unexpected, exp: &dyn de::Expected) -> Self {
        DeError::new(Problem::Invalid {
            expected: exp.to_string(),
            found: describe(&unexp),
        })
    }
    fn unknown_field(field: &str, expected: &'static [&'static str]) -> Self {
        DeError::new(Problem::UnknownKey {
            key: field.to_string(),
            expected,
        })
    }
    fn unknown_variant(variant: &str, expected: &'static [&'static str]) -> Self {
        DeError::new(Problem::UnknownVariant {
            word: variant.to_string(),
            expected,
        })
    }
    fn missing_field(field: &'static str) -> Self {
        DeError::new(Problem::MissingKey(field))
    }
}

/// Reads `node` as a `T`, naming it `path` in messages.
pub fn from_node<T: DeserializeOwned>(node: &Node, path: &str) -> Result<T, DeError> {
    T::deserialize(NodeDe { node, path })
}

/// A deserializer for one node.
pub struct NodeDe<'a> {
    node: &'a Node,
    path: &'a str,
}

impl NodeDe<'_> {
    fn wrong(&self, expected: &str) -> DeError {
        DeError::new(Problem::WrongType {
            expected: expected.to_string(),
            found: self.node.kind().to_string(),
        })
        .at(self.node.pos, self.path)
    }

    fn integer<T: TryFrom<i64> + fmt::Display>(&self, lo: T, hi: T) -> Result<T, DeError> {
        let range = || format!("a whole number from {lo} to {hi}");
        match &self.node.value {
            Value::Int(i) => T::try_from(*i).map_err(|_| {
                DeError::new(Problem::Invalid {
                    expected: range(),
                    found: i.to_string(),
                })
                .at(self.node.pos, self.path)
            }),
            Value::Str(s) if is_big_integer(s) => Err(DeError::new(Problem::Invalid {
                expected: range(),
                found: s.clone(),
            })
            .at(self.node.pos, self.path)),
            Value::Float(f) => Err(DeError::new(Problem::WrongType {
                expected: range(),
                found: format!("{f}, a number written with a fraction or an exponent"),
            })
            .at(self.node.pos, self.path)),
            _ => Err(self.wrong(&range())),
        }
    }

    fn float(&self) -> Result<f64, DeError> {
        match &self.node.value {
            // i64 → f64 rounds beyond 2^53; exact for every number a campaign needs.
            Value::Int(i) => Ok(*i as f64),
            Value::Float(f) if f.is_finite() => Ok(*f),
            Value::Float(f) => Err(DeError::new(Problem::Invalid {
                expected: "a finite number".into(),
                found: f.to_string(),
            })
            .at(self.node.pos, self.path)),
            _ => Err(self.wrong("a number")),
        }
    }

    fn text(&self) -> Result<&str, DeError> {
        match &self.node.value {
            Value::Str(s) => Ok(s),
            _ => Err(self.wrong("text")),
        }
    }
}

/// Digits too many for an i64: the YAML reader leaves them as text.
fn is_big_integer(s: &str) -> bool {
    let d = s.strip_prefix(['+', '-']).unwrap_or(s);
    d.len() > 18 && d.bytes().all(|b| b.is_ascii_digit())
}

macro_rules! integer_method {
    ($method:ident, $visit:ident, $t:ty) => {
        fn $method<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
            let v = self.integer::<$t>(<$t>::MIN, <$t>::MAX)?;
            visitor
                .$visit(v)
                .map_err(|e: DeError| e.at(self.node.pos, self.path))
        }
    };
}

impl<'de> de::Deserializer<'de> for NodeDe<'_> {
    type Error = DeError;

    fn deserialize_any<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        let (pos, path) = (self.node.pos, self.path);
        let r = match &self.node.value {
            Value::Null => visitor.visit_unit(),
            Value::Bool(b) => visitor.visit_bool(*b),
            Value::Int(i) => visitor.visit_i64(*i),
            Value::Float(f) => visitor.visit_f64(*f),
            Value::Str(s) => visitor.visit_str(s),
            Value::Seq(items) => visitor.visit_seq(SeqDe {
                items: items.iter(),
                path,
                index: 0,
            }),
            Value::Map(entries) => visitor.visit_map(MapDe::new(entries, path)),
        };
        r.map_err(|e| e.at(pos, path))
    }

    integer_method!(deserialize_u8, visit_u8, u8);
    integer_method!(deserialize_u16, visit_u16, u16);
    integer_method!(deserialize_u32, visit_u32, u32);
    integer_method!(deserialize_u64, visit_u64, u64);
    integer_method!(deserialize_i8, visit_i8, i8);
    integer_method!(deserialize_i16, visit_i16, i16);
    integer_method!(deserialize_i32, visit_i32, i32);
    integer_method!(deserialize_i64, visit_i64, i64);

    fn deserialize_f32<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        self.deserialize_f64(visitor)
    }

    fn deserialize_f64<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        let v = self.float()?;
        visitor
            .visit_f64(v)
            .map_err(|e: DeError| e.at(self.node.pos, self.path))
    }

    fn deserialize_bool<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        match &self.node.value {
            Value::Bool(b) => visitor.visit_bool(*b),
            _ => Err(self.wrong("true or false")),
        }
    }

    fn deserialize_char<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        let s = self.text()?;
        let mut it = s.chars();
        match (it.next(), it.next()) {
            (Some(c), None) => visitor.visit_char(c),
            _ => Err(DeError::new(Problem::Invalid {
                expected: "a single character".into(),
                found: format!("'{s}'"),
            })
            .at(self.node.pos, self.path)),
        }
    }

    fn deserialize_str<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        let s = self.text()?;
        visitor
            .visit_str(s)
            .map_err(|e: DeError| e.at(self.node.pos, self.path))
    }

    fn deserialize_string<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        self.deserialize_str(visitor)
    }

    fn deserialize_option<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        match &self.node.value {
            Value::Null => visitor.visit_none(),
            _ => visitor.visit_some(self),
        }
    }

    fn deserialize_newtype_struct<V: Visitor<'de>>(
        self,
        _name: &'static str,
        visitor: V,
    ) -> Result<V::Value, DeError> {
        visitor.visit_newtype_struct(self)
    }

    fn deserialize_seq<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        match &self.node.value {
            Value::Seq(_) => self.deserialize_any(visitor),
            _ => Err(self.wrong("a list")),
        }
    }

    fn deserialize_map<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        match &self.node.value {
            Value::Map(_) => self.deserialize_any(visitor),
            _ => Err(self.wrong("a mapping of keys to values")),
        }
    }

    fn deserialize_struct<V: Visitor<'de>>(
        self,
        _name: &'static str,
        _fields: &'static [&'static str],
        visitor: V,
    ) -> Result<V::Value, DeError> {
        self.deserialize_map(visitor)
    }

    fn deserialize_enum<V: Visitor<'de>>(
        self,
        _name: &'static str,
        _variants: &'static [&'static str],
        visitor: V,
    ) -> Result<V::Value, DeError> {
        let (pos, path) = (self.node.pos, self.path);
        let r = match &self.node.value {
            Value::Str(s) => visitor.visit_enum(s.as_str().into_deserializer()),
            Value::Map(entries) if entries.len() == 1 => visitor.visit_enum(EnumDe {
                key: &entries[0].0,
                value: &entries[0].1,
                path,
            }),
            _ => return Err(self.wrong("one of the listed words")),
        };
        r.map_err(|e| e.at(pos, path))
    }

    fn deserialize_identifier<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        self.deserialize_str(visitor)
    }

    serde::forward_to_deserialize_any! {
        i128 u128 bytes byte_buf unit unit_struct tuple tuple_struct ignored_any
    }
}

/// A mapping's key, read as its text.
struct KeyDe<'a> {
    key: &'a Node,
    path: &'a str,
}

impl<'de> de::Deserializer<'de> for KeyDe<'_> {
    type Error = DeError;

    fn deserialize_any<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, DeError> {
        visitor
            .visit_string(self.key.key_text())
            .map_err(|e: DeError| e.at(self.key.pos, self.path))
    }

    serde::forward_to_deserialize_any! {
        bool i8 i16 i32 i64 i128 u8 u16 u32 u64 u128 f32 f64 char str string
        bytes byte_buf option unit unit_struct newtype_struct seq tuple
        tuple_struct map struct enum identifier ignored_any
    }
}

struct SeqDe<'a> {
    items: std::slice::Iter<'a, Node>,
    path: &'a str,
    index: usize,
}

impl<'de> de::SeqAccess<'de> for SeqDe<'_> {
    type Error = DeError;

    fn next_element_seed<T: DeserializeSeed<'de>>(
        &mut self,
        seed: T,
    ) -> Result<Option<T::Value>, DeError> {
        let Some(node) = self.items.next() else {
            return Ok(None);
        };
        let path = format!("{}[{}]", self.path, self.index);
        self.index += 1;
        seed.deserialize(NodeDe { node, path: &path }).map(Some)
    }

    fn size_hint(&self) -> Option<usize> {
        Some(self.items.len())
    }
}

struct MapDe<'a> {
    entries: &'a [(Node, Node)],
    next: usize,
    path: &'a str,
}

impl<'a> MapDe<'a> {
    fn new(entries: &'a [(Node, Node)], path: &'a str) -> Self {
        MapDe {
            entries,
            next: 0,
            path,
        }
    }
}

impl<'de> de::MapAccess<'de> for MapDe<'_> {
    type Error = DeError;

    fn next_key_seed<K: DeserializeSeed<'de>>(
        &mut self,
        seed: K,
    ) -> Result<Option<K::Value>, DeError> {
        let Some((key, _)) = self.entries.get(self.next) else {
            return Ok(None);
        };
        let text = key.key_text();
        if self.entries[..self.next]
            .iter()
            .any(|(k, _)| k.key_text() == text)
        {
            return Err(DeError::new(Problem::DuplicateKey(text)).at(key.pos, self.path));
        }
        seed.deserialize(KeyDe {
            key,
            path: self.path,
        })
        .map(Some)
    }

    fn next_value_seed<V: DeserializeSeed<'de>>(&mut self, seed: V) -> Result<V::Value, DeError> {
        let (key, node) = &self.entries[self.next];
        self.next += 1;
        let path = child_path(self.path, &key.key_text());
        seed.deserialize(NodeDe { node, path: &path })
    }

    fn size_hint(&self) -> Option<usize> {
        Some(self.entries.len() - self.next)
    }
}

/// How a value inside `parent` is named: `scheduler.max_queued`, or `cpus in
/// resources of leg 'complex'` where the parent is a description.
fn child_path(parent: &str, key: &str) -> String {
    if parent.is_empty() {
        key.to_string()
    } else if parent.contains(' ') {
        format!("{key} in {parent}")
    } else {
        format!("{parent}.{key}")
    }
}

struct EnumDe<'a> {
    key: &'a Node,
    value: &'a Node,
    path: &'a str,
}

impl<'de, 'a> de::EnumAccess<'de> for EnumDe<'a> {
    type Error = DeError;
    type Variant = NodeVariant<'a>;

    fn variant_seed<V: DeserializeSeed<'de>>(
        self,
        seed: V,
    ) -> Result<(V::Value, Self::Variant), DeError> {
        let v = seed.deserialize(KeyDe {
            key: self.key,
            path: self.path,
        })?;
        let path = child_path(self.path, &self.key.key_text());
        Ok((
            v,
            NodeVariant {
                node: self.value,
                path,
            },
        ))
    }
}

/// The value of a `{variant: value}` mapping.
pub struct NodeVariant<'a> {
    node: &'a Node,
    path: String,
}

impl<'de> de::VariantAccess<'de> for NodeVariant<'_> {
    type Error = DeError;

    fn unit_variant(self) -> Result<(), DeError> {
        match &self.node.value {
            Value::Null => Ok(()),
            _ => Err(DeError::new(Problem::WrongType {
                expected: "nothing".into(),
                found: self.node.kind().into(),
            })
            .at(self.node.pos, &self.path)),
        }
    }

    fn newtype_variant_seed<T: DeserializeSeed<'de>>(self, seed: T) -> Result<T::Value, DeError> {
        seed.deserialize(NodeDe {
            node: self.node,
            path: &self.path,
        })
    }

    fn tuple_variant<V: Visitor<'de>>(self, _len: usize, visitor: V) -> Result<V::Value, DeError> {
        de::Deserializer::deserialize_seq(
            NodeDe {
                node: self.node,
                path: &self.path,
            },
            visitor,
        )
    }

    fn struct_variant<V: Visitor<'de>>(
        self,
        _fields: &'static [&'static str],
        visitor: V,
    ) -> Result<V::Value, DeError> {
        de::Deserializer::deserialize_map(
            NodeDe {
                node: self.node,
                path: &self.path,
            },
            visitor,
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde::Deserialize;

    #[derive(Debug, Deserialize, PartialEq)]
    #[serde(deny_unknown_fields)]
    struct T {
        n: u32,
        #[serde(default)]
        x: Option<f64>,
        #[serde(default)]
        w: Vec<String>,
    }

    fn node(text: &str) -> Node {
        super::super::yaml::parse(text).unwrap()
    }

    #[test]
    fn reads_a_struct() {
        let t: T = from_node(&node("n: 3\nx: 2\nw: [a, b]\n"), "t").unwrap();
        assert_eq!(
            t,
            T {
                n: 3,
                x: Some(2.0),
                w: vec!["a".into(), "b".into()]
            }
        );
    }

    #[test]
    fn a_number_too_large_for_its_type_is_an_error_at_its_place() {
        let e = from_node::<T>(&node("x: 1\nn: 4294967297\n"), "t").unwrap_err();
        assert_eq!(e.pos, Some(Pos { line: 2, col: 4 }));
        assert_eq!(e.path, "t.n");
        assert!(matches!(e.problem, Problem::Invalid { .. }), "{e:?}");
        assert!(e.message().contains("0 to 4294967295"), "{}", e.message());
        let e = from_node::<T>(&node("n: -1\n"), "t").unwrap_err();
        assert!(matches!(e.problem, Problem::Invalid { .. }), "{e:?}");
    }

    #[test]
    fn unknown_key_is_structured_with_its_place() {
        let e = from_node::<T>(&node("n: 1\nnn: 2\n"), "t").unwrap_err();
        assert_eq!(e.pos, Some(Pos { line: 2, col: 1 }));
        let Problem::UnknownKey { key, expected } = &e.problem else {
            panic!("{e:?}")
        };
        assert_eq!(key, "nn");
        assert_eq!(*expected, &["n", "x", "w"]);
        assert_eq!(e.hint().unwrap(), "did you mean 'n'?");
    }

    #[test]
    fn missing_duplicate_and_wrong_type() {
        let e = from_node::<T>(&node("x: 1\n"), "t").unwrap_err();
        assert_eq!(e.problem, Problem::MissingKey("n"));
        assert_eq!(e.pos.map(|p| p.line), Some(1));
        let e = from_node::<T>(&node("n: 1\nn: 2\n"), "t").unwrap_err();
        assert_eq!(e.problem, Problem::DuplicateKey("n".into()));
        assert_eq!(e.pos.unwrap().line, 2);
        let e = from_node::<T>(&node("n: 1\nx: lots\n"), "t").unwrap_err();
        assert_eq!(e.pos, Some(Pos { line: 2, col: 4 }));
        assert_eq!(e.message(), "t.x must be a number, not a string");
        let e = from_node::<T>(&node("n: 1\nx: .nan\n"), "t").unwrap_err();
        assert!(e.message().contains("finite"), "{}", e.message());
    }
}
