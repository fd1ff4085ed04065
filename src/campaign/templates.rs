//! Loading the user's stage templates with tera, reporting a parse error at the
//! template's own file:line.

use super::diagnostic::{Diagnostic, Severity};
use super::model::Campaign;
use std::path::{Path, PathBuf};

/// Every template file in the folder (recursively, `*.tera`), by its name relative
/// to the folder, sorted.
pub fn template_files(dir: &Path) -> Result<Vec<(String, PathBuf)>, String> {
    let mut out = Vec::new();
    for entry in walkdir::WalkDir::new(dir)
        .follow_links(true)
        .sort_by_file_name()
    {
        let entry =
            entry.map_err(|e| format!("cannot list the template folder {}: {e}", dir.display()))?;
        if entry.file_type().is_file() && entry.path().extension().is_some_and(|e| e == "tera") {
            let rel = entry.path().strip_prefix(dir).unwrap_or(entry.path());
            out.push((
                rel.to_string_lossy().replace('\\', "/"),
                entry.path().to_path_buf(),
            ));
        }
    }
    Ok(out)
}

/// A tera instance holding every template of the campaign's folder and every
/// stage's template (named by their path relative to the folder), with legwork's
/// filters, and no auto-escaping (these are shell scripts, not HTML).
pub fn load_tera(campaign: &Campaign) -> Result<tera::Tera, Vec<Diagnostic>> {
    let mut tera = tera::Tera::default();
    tera.autoescape_on(vec![]);
    crate::text::register_filters(&mut tera);
    let mut files = template_files(&campaign.templates_dir).map_err(|e| {
        vec![Diagnostic {
            severity: Severity::Error,
            file: campaign.templates_dir.clone(),
            line: 0,
            col: 0,
            message: e,
            hint: None,
        }]
    })?;
    for s in &campaign.stages {
        if !files.iter().any(|(n, _)| *n == s.template) {
            files.push((s.template.clone(), s.template_path.clone()));
        }
    }
    let mut diags = Vec::new();
    for (name, path) in &files {
        let text = match std::fs::read_to_string(path) {
            Ok(t) => t,
            Err(e) => {
                diags.push(diag(path, 0, 0, format!("cannot read template: {e}"), None));
                continue;
            }
        };
        if let Err(e) = tera.add_raw_template(name, &text) {
            diags.push(parse_error(path, &e));
        }
    }
    if diags.is_empty() {
        if let Err(e) = tera.build_inheritance_chains() {
            diags.push(diag(
                &campaign.templates_dir,
                0,
                0,
                format!("templates do not fit together: {}", chain_text(&e)),
                Some("check the names in extends/include/import".into()),
            ));
        }
    }
    if diags.is_empty() {
        Ok(tera)
    } else {
        Err(diags)
    }
}

fn diag(path: &Path, line: usize, col: usize, message: String, hint: Option<String>) -> Diagnostic {
    Diagnostic {
        severity: Severity::Error,
        file: path.to_path_buf(),
        line,
        col,
        message,
        hint,
    }
}

/// An error and its causes on one line.
pub fn chain_text(e: &dyn std::error::Error) -> String {
    let mut parts = vec![e.to_string()];
    let mut cur = e.source();
    while let Some(c) = cur {
        parts.push(c.to_string());
        cur = c.source();
    }
    parts.join(": ")
}

/// tera's parse errors carry ` --> line:col` and a `= expected …` line in their cause.
fn parse_error(path: &Path, e: &tera::Error) -> Diagnostic {
    let mut text = String::new();
    let mut cur: Option<&dyn std::error::Error> = Some(e);
    while let Some(c) = cur {
        text.push_str(&c.to_string());
        text.push('\n');
        cur = c.source();
    }
    let (mut line, mut col) = (0, 0);
    let mut what = None;
    for l in text.lines() {
        let t = l.trim();
        if let Some(rest) = t.strip_prefix("--> ") {
            let mut it = rest.split(':');
            line = it.next().and_then(|x| x.trim().parse().ok()).unwrap_or(0);
            col = it.next().and_then(|x| x.trim().parse().ok()).unwrap_or(0);
        } else if let Some(rest) = t.strip_prefix("= ") {
            what = Some(rest.to_string());
        }
    }
    let message = match what {
        Some(w) => format!("template does not parse: {w}"),
        None => format!(
            "template does not parse: {}",
            text.lines().last().unwrap_or("")
        ),
    };
    diag(
        path,
        line,
        col,
        message,
        Some("fix the tera syntax at this position ({{ … }}, {% … %})".into()),
    )
}
