//! A YAML document as a tree whose every node knows its line and column, so that
//! semantic problems (a duplicate id, a bad λ) can be reported where they are.

use std::collections::HashMap;
use yaml_rust2::parser::{Event, MarkedEventReceiver, Parser};
use yaml_rust2::scanner::{Marker, TScalarStyle};

/// A 1-based line and column.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Pos {
    /// line, from 1
    pub line: usize,
    /// column, from 1
    pub col: usize,
}

/// A YAML value.
#[derive(Debug, Clone, PartialEq)]
pub enum Value {
    /// `null`, `~` or nothing
    Null,
    /// `true` / `false`
    Bool(bool),
    /// an integer
    Int(i64),
    /// a floating-point number
    Float(f64),
    /// a string (quoted, or plain text that is no other type)
    Str(String),
    /// a sequence
    Seq(Vec<Node>),
    /// a mapping, in file order (duplicate keys are kept so that they can be reported)
    Map(Vec<(Node, Node)>),
}

/// A value and where it starts.
#[derive(Debug, Clone, PartialEq)]
pub struct Node {
    /// the value
    pub value: Value,
    /// where it starts
    pub pos: Pos,
}

impl Node {
    /// What kind of value this is, for messages ("a string", "a list", …).
    pub fn kind(&self) -> &'static str {
        match &self.value {
            Value::Null => "nothing (null)",
            Value::Bool(_) => "a boolean",
            Value::Int(_) => "an integer",
            Value::Float(_) => "a number",
            Value::Str(_) => "a string",
            Value::Seq(_) => "a list",
            Value::Map(_) => "a mapping",
        }
    }

    /// The text of a string key or scalar, if it is one.
    pub fn as_str(&self) -> Option<&str> {
        match &self.value {
            Value::Str(s) => Some(s),
            _ => None,
        }
    }

    /// The value as plain JSON (for free-form `vars` and the sections whose types
    /// live in other modules).
    pub fn to_json(&self) -> serde_json::Value {
        use serde_json::Value as J;
        match &self.value {
            Value::Null => J::Null,
            Value::Bool(b) => J::Bool(*b),
            Value::Int(i) => J::from(*i),
            Value::Float(f) => serde_json::Number::from_f64(*f)
                .map(J::Number)
                .unwrap_or(J::Null),
            Value::Str(s) => J::String(s.clone()),
            Value::Seq(items) => J::Array(items.iter().map(Node::to_json).collect()),
            Value::Map(entries) => {
                let mut m = serde_json::Map::new();
                for (k, v) in entries {
                    m.insert(k.key_text(), v.to_json());
                }
                J::Object(m)
            }
        }
    }

    /// A key's text: strings as they are, other scalars as they were written.
    pub fn key_text(&self) -> String {
        match &self.value {
            Value::Str(s) => s.clone(),
            Value::Int(i) => i.to_string(),
            Value::Float(f) => f.to_string(),
            Value::Bool(b) => b.to_string(),
            Value::Null => "null".into(),
            _ => "<complex key>".into(),
        }
    }
}

/// A YAML syntax error.
#[derive(Debug, Clone, PartialEq)]
pub struct SyntaxError {
    /// where
    pub pos: Pos,
    /// what
    pub message: String,
}

fn pos(m: &Marker) -> Pos {
    Pos {
        line: m.line(),
        col: m.col() + 1,
    }
}

enum Open {
    Seq(Vec<Node>, Pos, usize),
    Map(Vec<(Node, Node)>, Option<Node>, Pos, usize),
}

/// Most values that aliases may copy into one document, all aliases together:
/// far above what any campaign repeats by alias, far below what exhausts memory
/// (an "alias bomb" of nested anchors grows tenfold per line).
pub const MAX_ALIASED_VALUES: usize = 100_000;

/// Most aliases in one document.
pub const MAX_ALIASES: usize = 10_000;

#[derive(Default)]
struct Builder {
    stack: Vec<Open>,
    /// anchored nodes and how many values each holds
    anchors: HashMap<usize, (Node, usize)>,
    root: Option<Node>,
    error: Option<SyntaxError>,
    aliases: usize,
    aliased_values: usize,
}

/// How many values a node holds, itself included.
fn size(node: &Node) -> usize {
    match &node.value {
        Value::Seq(items) => 1 + items.iter().map(size).sum::<usize>(),
        Value::Map(entries) => {
            1 + entries
                .iter()
                .map(|(k, v)| size(k) + size(v))
                .sum::<usize>()
        }
        _ => 1,
    }
}

impl Builder {
    fn push(&mut self, node: Node, anchor: usize) {
        if anchor > 0 {
            let n = size(&node);
            self.anchors.insert(anchor, (node.clone(), n));
        }
        match self.stack.last_mut() {
            None => {
                if self.root.is_none() {
                    self.root = Some(node);
                }
            }
            Some(Open::Seq(items, _, _)) => items.push(node),
            Some(Open::Map(entries, key, _, _)) => match key.take() {
                None => *key = Some(node),
                Some(k) => entries.push((k, node)),
            },
        }
    }
}

fn resolve_plain(s: &str) -> Value {
    match s {
        "" | "~" | "null" | "Null" | "NULL" => return Value::Null,
        "true" | "True" | "TRUE" => return Value::Bool(true),
        "false" | "False" | "FALSE" => return Value::Bool(false),
        ".inf" | "+.inf" | ".Inf" | ".INF" => return Value::Float(f64::INFINITY),
        "-.inf" | "-.Inf" | "-.INF" => return Value::Float(f64::NEG_INFINITY),
        ".nan" | ".NaN" | ".NAN" => return Value::Float(f64::NAN),
        _ => {}
    }
    let digits = s.strip_prefix(['+', '-']).unwrap_or(s);
    if !digits.is_empty() && digits.bytes().all(|b| b.is_ascii_digit()) {
        if let Ok(i) = s.parse::<i64>() {
            return Value::Int(i);
        }
    }
    if let Some(h) = s.strip_prefix("0x") {
        if let Ok(i) = i64::from_str_radix(h, 16) {
            return Value::Int(i);
        }
    }
    if let Some(o) = s.strip_prefix("0o") {
        if let Ok(i) = i64::from_str_radix(o, 8) {
            return Value::Int(i);
        }
    }
    let looks_numeric = digits
        .bytes()
        .next()
        .is_some_and(|b| b.is_ascii_digit() || b == b'.')
        && digits
            .bytes()
            .all(|b| b.is_ascii_digit() || matches!(b, b'.' | b'e' | b'E' | b'+' | b'-'));
    if looks_numeric {
        if let Ok(f) = s.parse::<f64>() {
            return Value::Float(f);
        }
    }
    Value::Str(s.to_string())
}

impl MarkedEventReceiver for Builder {
    fn on_event(&mut self, ev: Event, mark: Marker) {
        if self.error.is_some() {
            return;
        }
        let p = pos(&mark);
        match ev {
            Event::Scalar(text, style, anchor, tag) => {
                let is_str_tag = tag.as_ref().is_some_and(|t| t.suffix == "str");
                let value = if style == TScalarStyle::Plain && !is_str_tag {
                    resolve_plain(&text)
                } else {
                    Value::Str(text)
                };
                self.push(Node { value, pos: p }, anchor);
            }
            Event::SequenceStart(anchor, _) => self.stack.push(Open::Seq(Vec::new(), p, anchor)),
            Event::MappingStart(anchor, _) => {
                self.stack.push(Open::Map(Vec::new(), None, p, anchor))
            }
            Event::SequenceEnd | Event::MappingEnd => match self.stack.pop() {
                Some(Open::Seq(items, p, anchor)) => self.push(
                    Node {
                        value: Value::Seq(items),
                        pos: p,
                    },
                    anchor,
                ),
                Some(Open::Map(entries, _, p, anchor)) => self.push(
                    Node {
                        value: Value::Map(entries),
                        pos: p,
                    },
                    anchor,
                ),
                None => {}
            },
            Event::Alias(id) => match self.anchors.get(&id) {
                Some((_, n)) if self.aliases >= MAX_ALIASES
                    || self.aliased_values + n > MAX_ALIASED_VALUES =>
                {
                    self.error = Some(SyntaxError {
                        pos: p,
                        message: format!(
                            "aliases here would copy more than {MAX_ALIASED_VALUES} values (or use more than {MAX_ALIASES} aliases): the file is refused rather than expanded"
                        ),
                    })
                }
                Some((node, n)) => {
                    self.aliases += 1;
                    self.aliased_values += n;
                    let mut node = node.clone();
                    node.pos = p;
                    self.push(node, 0)
                }
                None => {
                    self.error = Some(SyntaxError {
                        pos: p,
                        message: "alias to an unknown anchor".into(),
                    })
                }
            },
            _ => {}
        }
    }
}

/// Parses one YAML document. An empty document is `Null` at 1:1. A byte-order
/// mark at the start is skipped.
pub fn parse(text: &str) -> Result<Node, SyntaxError> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut b = Builder::default();
    let mut parser = Parser::new_from_str(text);
    parser.load(&mut b, false).map_err(|e| SyntaxError {
        pos: pos(e.marker()),
        message: e.info().to_string(),
    })?;
    if let Some(e) = b.error {
        return Err(e);
    }
    Ok(b.root.unwrap_or(Node {
        value: Value::Null,
        pos: Pos { line: 1, col: 1 },
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn positions_and_types() {
        let n = parse("a: 1\nb:\n  - x\n  - 2.5\nc: \"3\"\n").unwrap();
        let Value::Map(m) = &n.value else { panic!() };
        assert_eq!(m[0].1.value, Value::Int(1));
        assert_eq!(m[0].1.pos, Pos { line: 1, col: 4 });
        let Value::Seq(s) = &m[1].1.value else {
            panic!()
        };
        assert_eq!(s[1].value, Value::Float(2.5));
        assert_eq!(s[1].pos.line, 4);
        assert_eq!(m[2].1.value, Value::Str("3".into()));
        assert_eq!(m[2].0.pos, Pos { line: 5, col: 1 });
    }

    #[test]
    fn syntax_error_has_a_line() {
        let e = parse("a: [1, 2\nb: 3\n").unwrap_err();
        assert!(e.pos.line >= 1, "{e:?}");
    }

    #[test]
    fn a_byte_order_mark_is_not_part_of_the_first_key() {
        let n = parse("\u{feff}campaign: t\n").unwrap();
        let Value::Map(m) = &n.value else { panic!() };
        assert_eq!(m[0].0.as_str(), Some("campaign"));
    }

    #[test]
    fn an_alias_bomb_is_refused_at_the_alias() {
        let mut text = String::from("a0: &a0 [x, x, x, x, x, x, x, x, x, x]\n");
        for i in 1..30 {
            let prev = format!("*a{}", i - 1);
            let list = [prev.as_str(); 10].join(", ");
            text.push_str(&format!("a{i}: &a{i} [{list}]\n"));
        }
        let e = parse(&text).unwrap_err();
        assert!(e.message.contains("aliases"), "{e:?}");
        // 10 → 100 → 1000 → 10 000 → 100 000 values: line 5 passes the limit.
        assert_eq!(e.pos.line, 5, "{e:?}");
    }

    #[test]
    fn modest_aliases_still_work() {
        let n = parse("base: &b { cpus: 2 }\nx: *b\ny: *b\n").unwrap();
        let Value::Map(m) = &n.value else { panic!() };
        assert_eq!(m[1].1.value, m[0].1.value);
        assert_eq!(m[2].1.pos.line, 3);
    }

    #[test]
    fn words_stay_strings() {
        assert_eq!(resolve_plain("4h"), Value::Str("4h".into()));
        assert_eq!(resolve_plain("1e3"), Value::Float(1000.0));
        assert_eq!(resolve_plain("-3"), Value::Int(-3));
        assert_eq!(resolve_plain("01:30:00"), Value::Str("01:30:00".into()));
    }
}
