//! Running a Python reference check (tests/python/*.py, numpy and scipy) with a
//! JSON document on stdin and JSON back on stdout.

use std::io::Write;
use std::process::{Command, Stdio};

/// Runs `tests/python/<script>` with `input`; `None` (after a loud SKIPPED line)
/// when `LEGWORK_PYTHON` is not set.
pub fn python(script: &str, input: serde_json::Value) -> Option<serde_json::Value> {
    let Ok(py) = std::env::var("LEGWORK_PYTHON") else {
        crate::skip::skipped(&format!(
            "{script} reference check needs Python with numpy and scipy (set LEGWORK_PYTHON)"
        ));
        return None;
    };
    let path = format!("{}/tests/python/{script}", env!("CARGO_MANIFEST_DIR"));
    let mut child = Command::new(py)
        .arg(&path)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .spawn()
        .expect("start python");
    child
        .stdin
        .take()
        .unwrap()
        .write_all(input.to_string().as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success(), "{script} failed");
    Some(serde_json::from_slice(&out.stdout).unwrap())
}
