//! Ids of ligands, legs and stages become path components and appear in shell
//! scripts, so only a small, safe alphabet is allowed.

/// Why `id` is not a safe id, or `None` when it is: only `[A-Za-z0-9._-]`, not
/// empty, not starting with `.` or `-`.
pub fn unsafe_reason(id: &str) -> Option<String> {
    if id.is_empty() {
        return Some("it is empty".into());
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
pub const ID_HINT: &str = "ids are used in paths and shell scripts: use only letters, digits, '.', '_' and '-', not starting with '.' or '-'";

#[cfg(test)]
mod tests {
    use super::unsafe_reason;

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
    }
}
