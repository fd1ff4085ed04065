//! Ids of ligands, legs and stages become path components and appear in shell
//! scripts, so only a small, safe alphabet is allowed.

/// The longest id, in characters. Ids are joined into path components (an edge's
/// `a+b`, task folder names), which most file systems limit to 255 bytes.
pub const MAX_ID_LEN: usize = 64;

/// Why `id` is not a safe id, or `None` when it is: only `[A-Za-z0-9._-]`, not
/// empty, not starting with `.` or `-`, at most [`MAX_ID_LEN`] characters.
pub fn unsafe_reason(id: &str) -> Option<String> {
    if id.is_empty() {
        return Some("it is empty".into());
    }
    let len = id.chars().count();
    if len > MAX_ID_LEN {
        return Some(format!(
            "it is {len} characters long, more than {MAX_ID_LEN}"
        ));
    }
    if id.starts_with('.') || id.starts_with('-') {
        return Some(format!("it starts with '{}'", &id[..1]));
    }
    let bad: Vec<char> = id
        .chars()
        .filter(|c| !(c.is_ascii_alphanumeric() || matches!(c, '.' | '_' | '-')))
        .collect();
    if bad.is_empty() {
        return None;
    }
    let mut shown: Vec<String> = Vec::new();
    for c in bad {
        let s = match c {
            ' ' => "space".to_string(),
            '\t' => "tab".to_string(),
            c => format!("'{c}'"),
        };
        if !shown.contains(&s) {
            shown.push(s);
        }
    }
    Some(format!("it contains {}", shown.join(", ")))
}

/// The hint printed with an unsafe id.
pub const ID_HINT: &str = "ids are used in paths and shell scripts: use only letters, digits, '.', '_' and '-', not starting with '.' or '-', at most 64 characters";

#[cfg(test)]
mod tests {
    use super::{unsafe_reason, MAX_ID_LEN};

    #[test]
    fn safe_and_unsafe() {
        assert_eq!(unsafe_reason("ork-01"), None);
        assert_eq!(unsafe_reason("A_b.9"), None);
        assert!(unsafe_reason("").is_some());
        assert!(unsafe_reason(".hidden").is_some());
        assert!(unsafe_reason("-rf").is_some());
        assert!(unsafe_reason("..").is_some());
        assert!(unsafe_reason("a/b").is_some());
        assert!(unsafe_reason("a;rm").is_some());
        assert!(unsafe_reason("$(x)").is_some());
        assert!(unsafe_reason("a b").unwrap().contains("space"));
        assert!(unsafe_reason("a+b").is_some());
        assert_eq!(unsafe_reason(&"x".repeat(MAX_ID_LEN)), None);
        assert!(unsafe_reason(&"x".repeat(MAX_ID_LEN + 1))
            .unwrap()
            .contains("65 characters"));
    }
}
