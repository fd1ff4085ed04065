//! Batch scripts, rendered at submit time from the kind's built-in template
//! (or the campaign's `scheduler.batch_template`), and the task wrapper that writes
//! the start and exit markers.

use super::{hms, SchedulerError, SchedulerKind, Submission};
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// The built-in batch template for a scheduler kind (declared in its file).
pub fn builtin_template(kind: SchedulerKind) -> &'static str {
    kind.spec().template
}

/// The task wrapper. Arguments: task directory, attempt, job id. It claims the
/// attempt (`.attempt-N.claim`, created exclusively: a second job for the same
/// attempt exits 0 without running anything), writes
/// `.started.json` (time, host, job id, attempt), runs `bash task.sh` in the task
/// directory and writes `.exited.json` (exit code or signal, end time) — also when
/// the scheduler sends SIGTERM at walltime or on cancellation, because the trap
/// records the signal and waits for the task to end.
pub const WRAPPER: &str = r#"#!/bin/bash
# legwork task wrapper (written by legwork; do not edit). Args: DIR ATTEMPT JOB
dir=$1; attempt=$2; job=$3
cd "$dir" || { echo "legwork: cannot enter task directory $dir" >&2; exit 2; }
now() { date -u +%Y-%m-%dT%H:%M:%S.%NZ; }
esc() { local s=${1//\\/\\\\}; printf '%s' "${s//\"/\\\"}"; }
# One start per attempt, whatever the queue did: a second job carrying an
# attempt already started here (a submission that reached the scheduler twice)
# stops before it touches anything.
if ! ( set -o noclobber; printf '%s\n' "$job" > ".attempt-$attempt.claim" ) 2>/dev/null; then
  echo "legwork: attempt $attempt in $dir was already started by $(cat ".attempt-$attempt.claim" 2>/dev/null); not running it twice" >&2
  exit 0
fi
started=$(now)
rm -f .exited.json
printf '{"time":"%s","host":"%s","job":"%s","attempt":%s,"pid":%s}\n' \
  "$started" "$(esc "$(hostname)")" "$(esc "$job")" "$attempt" "$$" > .started.json.tmp &&
  mv -f .started.json.tmp .started.json
# Every attempt's start and end, kept across attempts (the markers are replaced).
cat .started.json >> .attempts.jsonl
sig=
child=
on_signal() {
  [ -n "$sig" ] && return
  sig=$1
  # The whole process group: the task's own children too (a shell waiting for
  # a foreground command would otherwise defer the signal until it ends).
  kill -"$1" 0 2>/dev/null || { [ -n "$child" ] && kill -"$1" "$child" 2>/dev/null; }
}
for s in TERM INT HUP USR1 USR2 XCPU; do trap "on_signal $s" "$s"; done
bash task.sh &
child=$!
wait "$child"; code=$?
# wait returns early when a trapped signal arrives: wait again for the real end.
while kill -0 "$child" 2>/dev/null; do wait "$child"; code=$?; done
if [ -z "$sig" ] && [ "$code" -gt 128 ]; then sig=$(kill -l $((code - 128)) 2>/dev/null); fi
if [ -n "$sig" ]; then sigjson="\"$sig\""; else sigjson=null; fi
printf '{"time":"%s","started":"%s","job":"%s","attempt":%s,"code":%s,"signal":%s}\n' \
  "$(now)" "$started" "$(esc "$job")" "$attempt" "$code" "$sigjson" > .exited.json.tmp &&
  mv -f .exited.json.tmp .exited.json
cat .exited.json >> .attempts.jsonl
exit "$code"
"#;

/// Writes the wrapper to `<root>/.legwork/wrapper.sh` (when it differs) and
/// returns its path.
pub fn install_wrapper(root: &Path) -> Result<PathBuf, SchedulerError> {
    let path = root.join(".legwork").join("wrapper.sh");
    if std::fs::read_to_string(&path).ok().as_deref() == Some(WRAPPER) {
        return Ok(path);
    }
    crate::fsutil::write_atomic(&path, WRAPPER.as_bytes())
        .map_err(|e| SchedulerError::io(&path, e))?;
    Ok(path)
}

/// Comma list of array indices with runs collapsed (`0-3,7,9-10`), which every
/// supported scheduler reads.
pub fn index_spec(indices: &[usize]) -> String {
    let mut out = Vec::new();
    let mut i = 0;
    while i < indices.len() {
        let start = indices[i];
        let mut end = start;
        while i + 1 < indices.len() && indices[i + 1] == end + 1 {
            i += 1;
            end = indices[i];
        }
        out.push(if start == end {
            start.to_string()
        } else {
            format!("{start}-{end}")
        });
        i += 1;
    }
    out.join(",")
}

fn shell_quote(value: &tera::Value, _: &HashMap<String, tera::Value>) -> tera::Result<tera::Value> {
    let s = match value {
        tera::Value::String(s) => s.clone(),
        other => other.to_string(),
    };
    Ok(tera::Value::String(format!(
        "'{}'",
        s.replace('\'', r"'\''")
    )))
}

/// Renders the batch script of `sub` for scheduler `kind` with `template` (the
/// campaign's own, if it set one) and writes it to `sub.script`.
pub fn render(
    kind: SchedulerKind,
    template: Option<&Path>,
    sub: &Submission,
    campaign: &str,
    options: &serde_json::Map<String, serde_json::Value>,
    wrapper: &Path,
) -> Result<(), SchedulerError> {
    let (name, text) = match template {
        Some(p) => (
            p.display().to_string(),
            std::fs::read_to_string(p).map_err(|e| SchedulerError::io(p, e))?,
        ),
        None => (
            format!("built-in {} batch template", kind.name()),
            builtin_template(kind).to_string(),
        ),
    };
    let mut tera = tera::Tera::default();
    tera.register_filter("shell_quote", shell_quote);
    let terr = |e: tera::Error| {
        let mut detail = e.to_string();
        let mut src = std::error::Error::source(&e);
        while let Some(s) = src {
            detail.push_str(&format!(": {s}"));
            src = s.source();
        }
        SchedulerError::Template {
            template: name.clone(),
            detail,
        }
    };
    tera.add_raw_template("batch", &text).map_err(terr)?;
    let indices: Vec<usize> = sub.elements.iter().map(|e| e.array_index).collect();
    let r = &sub.resources;
    let ctx = serde_json::json!({
        "campaign": { "name": campaign, "root": sub.root },
        "batch": { "id": sub.batch_id },
        "job": { "name": sub.name, "log_dir": sub.log_dir },
        "array": {
            "indices": indices,
            "spec": index_spec(&indices),
            "first": indices.first().copied().unwrap_or(0),
            "last": indices.last().copied().unwrap_or(0),
            "count": indices.len(),
            "throttle": sub.throttle,
        },
        "resources": {
            "cpus": r.cpus, "gpus": r.gpus, "memory_mb": r.memory_mb,
            "walltime_s": r.walltime_s, "walltime": hms(r.walltime_s),
            "walltime_minutes": r.walltime_s.div_ceil(60).max(1),
        },
        "scheduler": { "kind": kind.name(), "options": options },
        "elements": sub.elements.iter().map(|e| serde_json::json!({
            "index": e.array_index, "dir": e.dir, "attempt": e.attempt, "id": e.task_id,
        })).collect::<Vec<_>>(),
        "wrapper": wrapper,
    });
    let ctx = tera::Context::from_value(ctx).map_err(terr)?;
    let out = tera.render("batch", &ctx).map_err(terr)?;
    crate::fsutil::write_atomic(&sub.script, out.as_bytes())
        .map_err(|e| SchedulerError::io(&sub.script, e))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn index_specs_collapse_runs() {
        assert_eq!(index_spec(&[0, 1, 2, 3, 7, 9, 10]), "0-3,7,9-10");
        assert_eq!(index_spec(&[5]), "5");
        assert_eq!(index_spec(&[]), "");
    }
}
