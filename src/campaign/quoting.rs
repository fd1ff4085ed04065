//! `check`'s warning for a template variable that reaches a shell command line
//! without `shell_quote` while one of its values holds characters a shell acts on
//! (`$(…)`, `;`, quotes, …): such a value would run as shell code.
//!
//! The scan reads each template's `{{ … }}` expressions line by line; it follows
//! the user's variables (`vars.X`, `ligand.vars.X`, `ligand_a.vars.X`,
//! `ligand_b.vars.X`, `edge.vars.X`), whose values come from the campaign, not
//! legwork's own ones (ids, paths and numbers that legwork makes safe).

use super::diagnostic::{Diagnostic, Severity};
use super::model::{Campaign, CampaignKind, Vars};
use std::path::Path;

/// Characters a POSIX shell treats specially in an unquoted word (space and tab
/// aside: splitting a flags variable into words is often what is meant).
const ACTIVE: &[char] = &[
    '$', '`', ';', '&', '|', '<', '>', '(', ')', '\\', '"', '\'', '*', '?', '[', ']', '{', '}',
    '~', '#', '!', '\n', '\r',
];

/// Where a variable's values come from.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Scope {
    /// `vars.X`: campaign, leg, stage, edge (and, per ligand, ligand) variables
    Merged,
    /// `ligand*.vars.X`
    Ligand,
    /// `edge.vars.X`
    Edge,
}

/// One warning per template line and variable whose values include one a shell
/// would act on.
pub(super) fn unquoted_variables(c: &Campaign) -> Vec<Diagnostic> {
    let Ok(files) = super::templates::template_files(&c.templates_dir) else {
        return Vec::new();
    };
    let mut out = Vec::new();
    for (name, path) in files {
        if let Ok(text) = std::fs::read_to_string(&path) {
            scan(c, &name, &path, &text, &mut out);
        }
    }
    out
}

fn scan(c: &Campaign, name: &str, path: &Path, text: &str, out: &mut Vec<Diagnostic>) {
    for (i, line) in text.lines().enumerate() {
        let mut rest = line;
        let mut offset = 0;
        while let Some(start) = rest.find("{{") {
            let Some(len) = rest[start..].find("}}") else {
                break;
            };
            let expr = &rest[start + 2..start + len];
            let before = line[..offset + start].trim_start();
            if !expr.contains("shell_quote") && !before.starts_with('#') {
                for (var, scope, key) in references(expr) {
                    if let Some((owner, value)) = active_value(c, scope, key) {
                        out.push(warning(
                            path,
                            name,
                            i + 1,
                            offset + start + 1,
                            &var,
                            &owner,
                            &value,
                        ));
                    }
                }
            }
            offset += start + len + 2;
            rest = &rest[start + len + 2..];
        }
    }
}

/// The user variables an expression names: (as written, scope, key).
fn references(expr: &str) -> Vec<(String, Scope, &str)> {
    let word = |b: u8| b.is_ascii_alphanumeric() || b == b'_' || b == b'.';
    let bytes = expr.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i < bytes.len() {
        if !word(bytes[i]) || (i > 0 && word(bytes[i - 1])) {
            i += 1;
            continue;
        }
        let end = (i..bytes.len())
            .find(|&j| !word(bytes[j]))
            .unwrap_or(bytes.len());
        let path = &expr[i..end];
        let (scope, key) = match path.split('.').collect::<Vec<_>>().as_slice() {
            ["vars", key, ..] => (Scope::Merged, *key),
            ["ligand" | "ligand_a" | "ligand_b", "vars", key, ..] => (Scope::Ligand, *key),
            ["edge", "vars", key, ..] => (Scope::Edge, *key),
            _ => {
                i = end;
                continue;
            }
        };
        if !key.is_empty() {
            out.push((path.to_string(), scope, key));
        }
        i = end;
    }
    out
}

/// The first value of `key` in `scope` that holds a shell-active character, and
/// where it comes from.
fn active_value(c: &Campaign, scope: Scope, key: &str) -> Option<(String, String)> {
    let ligands = c
        .ligands
        .iter()
        .map(|l| (format!("ligand '{}'", l.id), &l.vars));
    let edges = c
        .edges
        .iter()
        .map(|e| (format!("edge '{}'", e.id()), &e.vars));
    let mut sources: Vec<(String, &Vars)> = Vec::new();
    match scope {
        Scope::Ligand => sources.extend(ligands),
        Scope::Edge => sources.extend(edges),
        Scope::Merged => {
            sources.push(("the campaign's vars".to_string(), &c.vars));
            sources.extend(
                c.legs
                    .iter()
                    .map(|l| (format!("leg '{}'", l.name), &l.vars)),
            );
            sources.extend(
                c.stages
                    .iter()
                    .map(|s| (format!("stage '{}'", s.name), &s.vars)),
            );
            sources.extend(edges);
            if c.kind != CampaignKind::Relative {
                sources.extend(ligands);
            }
        }
    }
    sources.into_iter().find_map(|(owner, vars)| {
        let text = vars.get(key).and_then(active_text)?;
        Some((owner, text))
    })
}

fn active_text(v: &serde_json::Value) -> Option<String> {
    match v {
        serde_json::Value::String(s) => s.contains(ACTIVE).then(|| s.clone()),
        serde_json::Value::Array(items) => items.iter().find_map(active_text),
        _ => None,
    }
}

fn warning(
    path: &Path,
    name: &str,
    line: usize,
    col: usize,
    var: &str,
    owner: &str,
    value: &str,
) -> Diagnostic {
    let shown: String = value.chars().take(40).collect();
    Diagnostic {
        severity: Severity::Warning,
        file: path.to_path_buf(),
        line,
        col,
        message: format!(
            "{var} reaches the shell unquoted in {name}, and {owner} gives it '{shown}', which a shell would act on"
        ),
        hint: Some(format!(
            "write {{{{ {var} | shell_quote }}}} so the value stays one word and never runs"
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_user_variables_only() {
        let refs = references(" ligand_a.vars.smiles ~ vars.flags ~ task.dir ~ myvars.x ");
        let found: Vec<(&str, Scope)> = refs.iter().map(|(v, s, _)| (v.as_str(), *s)).collect();
        assert_eq!(
            found,
            vec![
                ("ligand_a.vars.smiles", Scope::Ligand),
                ("vars.flags", Scope::Merged)
            ]
        );
    }

    #[test]
    fn active_characters() {
        assert!(active_text(&serde_json::json!("$(touch x)")).is_some());
        assert!(active_text(&serde_json::json!("CC(=O)O")).is_some());
        assert!(active_text(&serde_json::json!("--fast --quiet")).is_none());
        assert!(active_text(&serde_json::json!(["a", "b;c"])).is_some());
        assert!(active_text(&serde_json::json!(3)).is_none());
    }
}
