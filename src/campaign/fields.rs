//! Reading typed values out of the marked YAML tree while collecting every
//! problem, each with its position.

use super::de::from_node;
use super::diagnostic::{Diagnostic, Severity};
use super::yaml::{Node, Pos, Value};
use serde::de::DeserializeOwned;
use std::path::{Path, PathBuf};

/// Collects diagnostics for one file.
#[derive(Debug)]
pub struct Ctx {
    /// The file being read.
    pub file: PathBuf,
    /// What was found so far.
    pub diags: Vec<Diagnostic>,
}

impl Ctx {
    /// A collector for `file`.
    pub fn new(file: &Path) -> Self {
        Ctx {
            file: file.to_path_buf(),
            diags: Vec::new(),
        }
    }

    /// Records an error.
    pub fn error(&mut self, pos: Pos, message: impl Into<String>, hint: impl Into<Option<String>>) {
        self.push(Severity::Error, pos, message.into(), hint.into());
    }

    /// Records a warning.
    pub fn warn(&mut self, pos: Pos, message: impl Into<String>, hint: impl Into<Option<String>>) {
        self.push(Severity::Warning, pos, message.into(), hint.into());
    }

    fn push(&mut self, severity: Severity, pos: Pos, message: String, hint: Option<String>) {
        self.diags.push(Diagnostic {
            severity,
            file: self.file.clone(),
            line: pos.line,
            col: pos.col,
            message,
            hint,
        });
    }

    /// Whether any error was recorded.
    pub fn has_errors(&self) -> bool {
        self.diags.iter().any(Diagnostic::is_error)
    }

    /// A mapping's fields, after checking that it is a mapping, that no key is
    /// repeated and that every key is one of `allowed` (else a did-you-mean).
    pub fn fields<'n>(
        &mut self,
        node: &'n Node,
        what: &str,
        allowed: &[&str],
    ) -> Option<Fields<'n>> {
        let Value::Map(entries) = &node.value else {
            self.error(
                node.pos,
                format!(
                    "{what} must be a mapping of keys to values, not {}",
                    node.kind()
                ),
                Some(format!("expected keys: {}", allowed.join(", "))),
            );
            return None;
        };
        let mut out: Vec<(String, &'n Node, Pos)> = Vec::new();
        for (k, v) in entries {
            let key = k.key_text();
            if out.iter().any(|(seen, _, _)| *seen == key) {
                self.error(
                    k.pos,
                    format!("key '{key}' appears twice in {what}"),
                    Some("remove one of them: the later one would silently win".into()),
                );
                continue;
            }
            if !allowed.is_empty() && !allowed.contains(&key.as_str()) {
                let hint = match did_you_mean(&key, allowed) {
                    Some(s) => format!("did you mean '{s}'?"),
                    None => format!("known keys here: {}", allowed.join(", ")),
                };
                self.error(k.pos, format!("unknown key '{key}' in {what}"), Some(hint));
                continue;
            }
            out.push((key, v, k.pos));
        }
        Some(Fields {
            entries: out,
            pos: node.pos,
        })
    }

    /// A string.
    pub fn string(&mut self, node: &Node, what: &str) -> Option<String> {
        match &node.value {
            Value::Str(s) => Some(s.clone()),
            Value::Int(_) | Value::Float(_) | Value::Bool(_) => {
                self.error(
                    node.pos,
                    format!("{what} must be text, not {}", node.kind()),
                    Some("put it in quotes".to_string()),
                );
                None
            }
            _ => {
                self.error(
                    node.pos,
                    format!("{what} must be text, not {}", node.kind()),
                    None,
                );
                None
            }
        }
    }

    /// `node` read as a `T` through serde (see [`de`](super::de)), named `what` in
    /// the message; a problem is recorded where it is and gives `None`.
    pub fn typed<T: DeserializeOwned>(&mut self, node: &Node, what: &str) -> Option<T> {
        match from_node::<T>(node, what) {
            Ok(v) => Some(v),
            Err(e) => {
                let hint = e.hint().unwrap_or_else(|| {
                    format!("see {what} in the README's section \"The campaign file\"")
                });
                self.error(e.pos.unwrap_or(node.pos), e.message(), Some(hint));
                None
            }
        }
    }

    /// A finite number (integers accepted).
    pub fn number(&mut self, node: &Node, what: &str) -> Option<f64> {
        self.typed::<f64>(node, what)
    }

    /// A non-negative integer.
    pub fn uint(&mut self, node: &Node, what: &str) -> Option<u64> {
        self.typed::<u64>(node, what)
    }

    /// A whole number in `lo..=hi`, else an error naming the range.
    pub fn int_in<T>(&mut self, node: &Node, what: &str, lo: T, hi: T) -> Option<T>
    where
        T: DeserializeOwned + PartialOrd + std::fmt::Display + Copy,
    {
        let v = self.typed::<T>(node, what)?;
        self.in_range(node, what, v, lo, hi)
    }

    /// A finite number in `lo..=hi`, else an error naming the range.
    pub fn number_in(&mut self, node: &Node, what: &str, lo: f64, hi: f64) -> Option<f64> {
        let v = self.number(node, what)?;
        self.in_range(node, what, v, lo, hi)
    }

    /// `v` when it lies in `lo..=hi`, else an error at `node` naming the range.
    pub fn in_range<T: PartialOrd + std::fmt::Display + Copy>(
        &mut self,
        node: &Node,
        what: &str,
        v: T,
        lo: T,
        hi: T,
    ) -> Option<T> {
        if v >= lo && v <= hi {
            return Some(v);
        }
        self.error(
            node.pos,
            format!("{what} = {v} is out of range"),
            Some(format!("allowed: {lo} to {hi}")),
        );
        None
    }

    /// A list.
    pub fn list<'n>(&mut self, node: &'n Node, what: &str) -> Option<&'n [Node]> {
        match &node.value {
            Value::Seq(items) => Some(items),
            _ => {
                self.error(
                    node.pos,
                    format!("{what} must be a list, not {}", node.kind()),
                    None,
                );
                None
            }
        }
    }

    /// A free-form `vars` mapping.
    pub fn vars(&mut self, node: Option<&Node>, what: &str) -> super::model::Vars {
        let Some(node) = node else {
            return Default::default();
        };
        match &node.value {
            Value::Null => Default::default(),
            Value::Map(_) => self.typed(node, what).unwrap_or_default(),
            _ => {
                self.error(
                    node.pos,
                    format!(
                        "{what} must be a mapping of names to values, not {}",
                        node.kind()
                    ),
                    Some("e.g. vars: { charge: 0, box: 40 }".into()),
                );
                Default::default()
            }
        }
    }
}

/// The fields of one mapping.
pub struct Fields<'n> {
    entries: Vec<(String, &'n Node, Pos)>,
    /// Where the mapping starts.
    pub pos: Pos,
}

impl<'n> Fields<'n> {
    /// A field's value.
    pub fn get(&self, key: &str) -> Option<&'n Node> {
        self.entries
            .iter()
            .find(|(k, _, _)| k == key)
            .map(|(_, v, _)| *v)
            .filter(|v| v.value != Value::Null)
    }

    /// Where a field's key is, else where the mapping starts.
    pub fn key_pos(&self, key: &str) -> Pos {
        self.entries
            .iter()
            .find(|(k, _, _)| k == key)
            .map(|(_, _, p)| *p)
            .unwrap_or(self.pos)
    }

    /// Every field, in file order.
    pub fn iter(&self) -> impl Iterator<Item = (&str, &'n Node, Pos)> + '_ {
        self.entries.iter().map(|(k, v, p)| (k.as_str(), *v, *p))
    }

    /// A required field, or an error at the mapping.
    pub fn require(&self, ctx: &mut Ctx, key: &str, what: &str, example: &str) -> Option<&'n Node> {
        let v = self.get(key);
        if v.is_none() {
            ctx.error(
                self.pos,
                format!("{what} has no '{key}'"),
                Some(format!("add it, e.g. {example}")),
            );
        }
        v
    }
}

/// The closest of `candidates` to `word`, if any is close.
pub fn did_you_mean<'a>(word: &str, candidates: &[&'a str]) -> Option<&'a str> {
    let lw = word.to_lowercase();
    candidates
        .iter()
        .map(|c| (strsim::damerau_levenshtein(&lw, &c.to_lowercase()), *c))
        .filter(|(d, c)| *d <= (c.len().max(word.len()) / 3).max(2))
        .min_by_key(|(d, _)| *d)
        .map(|(_, c)| c)
}
