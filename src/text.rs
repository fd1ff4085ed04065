//! Text helpers shared by the campaign loader, the tree writer and the batch-script
//! renderer: quoting for POSIX shells and the tera filters built on it. It depends
//! on nothing else of legwork, so every module can use it without a cycle.

use std::collections::HashMap;
use tera::{Tera, Value};

/// Quotes a word for a POSIX shell: left as is when it holds only characters no
/// shell treats specially, else wrapped in single quotes (a `'` inside becomes
/// `'\''`). Lists become space-separated quoted words.
pub fn quote_word(s: &str) -> String {
    let plain = !s.is_empty()
        && s.bytes()
            .all(|b| b.is_ascii_alphanumeric() || b"._-/:=@%+,".contains(&b));
    if plain {
        s.to_string()
    } else {
        format!("'{}'", s.replace('\'', r"'\''"))
    }
}

fn shell_quote(value: &Value, _args: &HashMap<String, Value>) -> tera::Result<Value> {
    fn one(v: &Value) -> tera::Result<String> {
        Ok(match v {
            Value::String(s) => quote_word(s),
            Value::Number(n) => quote_word(&n.to_string()),
            Value::Bool(b) => b.to_string(),
            Value::Null => "''".into(),
            Value::Array(items) => items
                .iter()
                .map(one)
                .collect::<tera::Result<Vec<_>>>()?
                .join(" "),
            Value::Object(_) => {
                return Err(tera::Error::msg(
                    "shell_quote cannot quote a mapping: pick one of its values",
                ))
            }
        })
    }
    Ok(Value::String(one(value)?))
}

/// Adds legwork's filters (`shell_quote`) to a tera instance; the batch-script
/// renderer uses it too.
pub fn register_filters(tera: &mut Tera) {
    tera.register_filter("shell_quote", shell_quote);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quoting() {
        assert_eq!(quote_word("ork-01"), "ork-01");
        assert_eq!(quote_word("a b"), "'a b'");
        assert_eq!(quote_word("it's"), r"'it'\''s'");
        assert_eq!(quote_word("$(rm -rf /)"), "'$(rm -rf /)'");
        assert_eq!(quote_word(""), "''");
        let mut t = Tera::default();
        register_filters(&mut t);
        let mut c = tera::Context::new();
        c.insert("x", &vec!["a", "b c"]);
        assert_eq!(
            t.render_str("{{ x | shell_quote }}", &c).unwrap(),
            "a 'b c'"
        );
    }
}
