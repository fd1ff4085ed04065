//! Paths in a campaign file: made absolute against the file's folder, and
//! confined to their folder where they name a file inside it (stage and batch
//! templates, stage outputs).

use super::ids::unsafe_reason;
use std::path::{Component, Path, PathBuf};

/// Lexically resolves `.` and `..` in an absolute path.
pub fn normalize(path: &Path) -> PathBuf {
    let mut out = PathBuf::new();
    for c in path.components() {
        match c {
            Component::ParentDir => {
                out.pop();
            }
            Component::CurDir => {}
            other => out.push(other.as_os_str()),
        }
    }
    out
}

/// `path` made absolute against `base`, `.`/`..` resolved.
pub fn resolve(base: &Path, path: &Path) -> PathBuf {
    if path.is_absolute() {
        normalize(path)
    } else {
        normalize(&base.join(path))
    }
}

/// Whether a relative path stays inside the folder it is relative to: only plain
/// components, each a safe name.
pub fn confined_relative(path: &str) -> Result<(), String> {
    let p = Path::new(path);
    if p.is_absolute() {
        return Err(format!("'{path}' is absolute"));
    }
    for c in p.components() {
        match c {
            Component::Normal(s) => {
                let s = s.to_string_lossy();
                if let Some(why) = unsafe_reason(&s) {
                    return Err(format!(
                        "'{path}' has a part '{s}' that is not a safe name: {why}"
                    ));
                }
            }
            _ => return Err(format!("'{path}' leaves its folder (uses '..' or '.')")),
        }
    }
    if path.is_empty() {
        return Err("the path is empty".into());
    }
    Ok(())
}
