//! The `# key: value` metadata lines at the top of a window file, and the hints a
//! caller that knows the plan can give instead.

use super::config::OnConflict;
use super::error::ReadError;
use super::parse::is_skippable;
use crate::units::EnergyUnit;
use memchr::memchr;
use std::path::Path;

/// What a caller knows about a window beyond its file (from the plan): it fills in
/// what the file does not say and wins over what it does.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct WindowHint {
    /// 0-based index of the sampled state.
    pub state: Option<usize>,
    /// Primary λ of every state.
    pub lambdas: Option<Vec<f64>>,
    /// Per component (name, λ at every state), for multi-component legs.
    pub component_lambdas: Option<Vec<(String, Vec<f64>)>>,
    /// Temperature of the samples, K (an override: wins over the file and the
    /// reader without a word, as `legwork estimate --temperature` asks).
    pub temperature_k: Option<f64>,
    /// The campaign's temperature, K: a file or reader that says otherwise is a
    /// conflict (see `reader.on_conflict`).
    pub campaign_temperature_k: Option<f64>,
    /// What the hint describes, for messages (e.g. `leg complex, window 3`).
    pub what: Option<String>,
}

/// Metadata read from the comment lines.
#[derive(Debug, Default)]
pub(crate) struct Meta {
    pub first_comment: Option<String>,
    pub temperature_k: Option<f64>,
    pub energy_unit: Option<EnergyUnit>,
    pub state: Option<usize>,
    pub lambdas: Option<Vec<f64>>,
    pub component_lambdas: Vec<(String, Vec<f64>)>,
    /// 1-based line of each key above, for messages.
    pub lines: std::collections::HashMap<String, usize>,
}

/// The comment block, the header line, and where data begins.
pub(crate) struct Preamble {
    pub meta: Meta,
    /// The first non-comment line (the header, or the first data line), its text and
    /// 1-based number; None for a file without one.
    pub first_line: Option<(String, usize)>,
    /// Byte offset and 1-based line number just after the first non-comment line.
    pub after_first: (usize, usize),
    /// Byte offset and line number of the first non-comment line.
    pub at_first: (usize, usize),
}

fn numbers(path: &Path, line_no: usize, key: &str, value: &str) -> Result<Vec<f64>, ReadError> {
    value
        .split_whitespace()
        .map(|t| {
            t.parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| ReadError::Header {
                    path: path.to_path_buf(),
                    line: line_no,
                    problem: format!(
                        "'{key}:' holds '{t}', which is not a finite number; write one λ per state separated by spaces"
                    ),
                })
        })
        .collect()
}

/// Reads the comment block at the top of `text`.
pub(crate) fn read_preamble(
    path: &Path,
    text: &[u8],
    comments: &[Vec<u8>],
) -> Result<Preamble, ReadError> {
    let mut meta = Meta::default();
    let mut pos = 0usize;
    let mut line_no = 1usize;
    while pos < text.len() {
        let end = memchr(b'\n', &text[pos..]).map_or(text.len(), |i| pos + i);
        let raw = &text[pos..end];
        let line = std::str::from_utf8(raw).map_err(|_| ReadError::Header {
            path: path.to_path_buf(),
            line: line_no,
            problem: "not UTF-8 text; window files must be UTF-8".into(),
        })?;
        let line = line.trim_end_matches('\r');
        if is_skippable(raw, comments) {
            let trimmed = line.trim_start();
            if let Some(prefix) = comments.iter().find(|c| trimmed.as_bytes().starts_with(c)) {
                let body = trimmed[prefix.len()..].trim();
                if meta.first_comment.is_none() && !body.is_empty() {
                    meta.first_comment = Some(body.to_string());
                }
                if let Some((key, value)) = body.split_once(':') {
                    apply(&mut meta, path, line_no, key.trim(), value.trim())?;
                }
            }
            pos = end + 1;
            line_no += 1;
            continue;
        }
        return Ok(Preamble {
            meta,
            first_line: Some((line.to_string(), line_no)),
            after_first: ((end + 1).min(text.len()), line_no + 1),
            at_first: (pos, line_no),
        });
    }
    Ok(Preamble {
        meta,
        first_line: None,
        after_first: (text.len(), line_no),
        at_first: (text.len(), line_no),
    })
}

fn apply(
    meta: &mut Meta,
    path: &Path,
    line_no: usize,
    key: &str,
    value: &str,
) -> Result<(), ReadError> {
    let bad = |problem: String| ReadError::Header {
        path: path.to_path_buf(),
        line: line_no,
        problem,
    };
    match key {
        "temperature_K" => {
            let t = value
                .parse::<f64>()
                .ok()
                .filter(|t| t.is_finite() && *t > 0.0)
                .ok_or_else(|| {
                    bad(format!(
                        "temperature_K '{value}' is not a positive number of kelvin"
                    ))
                })?;
            meta.temperature_k = Some(t);
        }
        "energy_unit" => {
            meta.energy_unit = Some(value.parse().map_err(|e| bad(format!("{e}")))?);
        }
        "state" => {
            meta.state = Some(value.parse::<usize>().map_err(|_| {
                bad(format!(
                    "state '{value}' is not a 0-based state index (0, 1, 2, ...)"
                ))
            })?);
        }
        "lambdas" => meta.lambdas = Some(numbers(path, line_no, key, value)?),
        k if k.starts_with("lambdas.") => {
            let name = k["lambdas.".len()..].to_string();
            let values = numbers(path, line_no, key, value)?;
            meta.component_lambdas.push((name, values));
        }
        _ => return Ok(()),
    }
    meta.lines.insert(key.to_string(), line_no);
    Ok(())
}

/// How far a file's λ may be from the plan's and still agree: files print λ
/// rounded, often to three decimals (common practice, no source).
const LAMBDA_TOLERANCE: f64 = 1e-3;

fn hint_what(hint: &WindowHint) -> String {
    hint.what
        .as_deref()
        .map(|w| format!(" ({w})"))
        .unwrap_or_default()
}

fn first_difference(file: &[f64], plan: &[f64]) -> Option<usize> {
    file.iter()
        .zip(plan)
        .position(|(a, b)| (a - b).abs() > LAMBDA_TOLERANCE)
}

/// The plan knows the sampled state and every state's λ; a file need not repeat
/// them, but one that does must agree. Errors name both values.
pub(crate) fn check_against_plan(
    path: &Path,
    meta: &Meta,
    hint: &WindowHint,
) -> Result<(), ReadError> {
    let at = |key: &str| meta.lines.get(key).copied().unwrap_or(1);
    let bad = |key: &str, problem: String| ReadError::Header {
        path: path.to_path_buf(),
        line: at(key),
        problem,
    };
    let what = hint_what(hint);
    if let (Some(file), Some(plan)) = (meta.state, hint.state) {
        if file != plan {
            return Err(bad(
                "state",
                format!(
                    "the file says it sampled state {file} but the campaign's plan says state {plan}{what}; \
                     check that the engine is given the window's index (`window.index` in the template), or remove the state line"
                ),
            ));
        }
    }
    let several = hint.component_lambdas.is_some();
    if let (Some(file), Some(plan), false) = (&meta.lambdas, &hint.lambdas, several) {
        if file.len() != plan.len() {
            return Err(bad(
                "lambdas",
                format!(
                    "the file lists λ for {} states but the campaign's leg has {} states{what}; \
                     the engine was run with another λ schedule than the campaign's `lambdas:`",
                    file.len(),
                    plan.len()
                ),
            ));
        }
        if let Some(j) = first_difference(file, plan) {
            return Err(bad(
                "lambdas",
                format!(
                    "the file says λ = {} at state {j} but the campaign's plan says {}{what}; \
                     the engine was run with another λ schedule than the campaign's `lambdas:`",
                    file[j], plan[j]
                ),
            ));
        }
    }
    let plan_components: Option<&Vec<(String, Vec<f64>)>> = hint.component_lambdas.as_ref();
    for (name, file) in &meta.component_lambdas {
        let key = format!("lambdas.{name}");
        let plan = match plan_components {
            Some(c) => match c.iter().find(|(n, _)| n == name) {
                Some((_, l)) => l,
                None => {
                    let names: Vec<&str> = c.iter().map(|(n, _)| n.as_str()).collect();
                    return Err(bad(
                        &key,
                        format!(
                            "the file lists λ of component '{name}' but the campaign's leg has components {}{what}; \
                             rename the component in the campaign's `lambdas.components` or in the engine's output",
                            names.join(", ")
                        ),
                    ));
                }
            },
            None if hint.lambdas.is_some() => {
                return Err(bad(
                    &key,
                    format!(
                        "the file lists λ of component '{name}' but the campaign's leg has a single λ{what}; \
                         give the leg `lambdas: {{components: ...}}` or drop the component lines"
                    ),
                ))
            }
            None => continue,
        };
        if file.len() != plan.len() {
            return Err(bad(
                &key,
                format!(
                    "the file lists λ of component '{name}' for {} states but the campaign's leg has {}{what}",
                    file.len(),
                    plan.len()
                ),
            ));
        }
        if let Some(j) = first_difference(file, plan) {
            return Err(bad(
                &key,
                format!(
                    "the file says λ.{name} = {} at state {j} but the campaign's plan says {}{what}",
                    file[j], plan[j]
                ),
            ));
        }
    }
    Ok(())
}

/// The temperature of a window: an override wins; otherwise the file's own
/// line and the configuration (the reader's `temperature_K`, else the
/// campaign's) must agree unless `on_conflict` says which wins. Returns the
/// temperature and, when a conflict was settled, a note to print once.
pub(crate) fn resolve_temperature(
    path: &Path,
    meta: &Meta,
    reader: Option<f64>,
    hint: &WindowHint,
    on_conflict: OnConflict,
) -> Result<(f64, Option<String>), ReadError> {
    if let Some(t) = hint.temperature_k {
        return Ok((t, None));
    }
    let same = |a: f64, b: f64| (a - b).abs() <= 1e-9 * a.abs().max(b.abs());
    if let (Some(r), Some(c)) = (reader, hint.campaign_temperature_k) {
        if !same(r, c) {
            return Err(ReadError::Config(format!(
                "the reader's temperature_K is {r} K but the campaign's temperature_K is {c} K; \
                 a campaign is analysed at one temperature: set the campaign's `temperature_K` to the samples' and remove the reader's"
            )));
        }
    }
    let (configured, by) = match (reader, hint.campaign_temperature_k) {
        (Some(r), _) => (Some(r), "the reader's temperature_K"),
        (None, Some(c)) => (Some(c), "the campaign's temperature_K"),
        (None, None) => (None, ""),
    };
    match (meta.temperature_k, configured) {
        (Some(f), Some(c)) if !same(f, c) => match on_conflict {
            OnConflict::Stop => Err(ReadError::Header {
                path: path.to_path_buf(),
                line: meta.lines.get("temperature_K").copied().unwrap_or(1),
                problem: format!(
                    "the file says temperature_K {f} K but {by} is {c} K; make them agree, \
                     or set `reader.on_conflict: use-file` (or `use-reader`) to say which wins"
                ),
            }),
            OnConflict::UseReader => Ok((
                c,
                Some(format!(
                    "files say temperature_K {f} K; used {c} K from {by} (reader.on_conflict: use-reader)"
                )),
            )),
            OnConflict::UseFile => Ok((
                f,
                Some(format!(
                    "used the files' temperature_K {f} K over {by} {c} K (reader.on_conflict: use-file)"
                )),
            )),
        },
        (Some(f), _) => Ok((f, None)),
        (None, Some(c)) => Ok((c, None)),
        (None, None) => Err(ReadError::Config(format!(
            "{}: no temperature: the file has no 'temperature_K:' line; set reader.{{columns|blocks}}.temperature_K or read it through a campaign",
            path.display()
        ))),
    }
}

/// The energy unit of a window: the reader's `energy_unit` and the file's own
/// line (if any) must agree unless `on_conflict` says which wins.
pub(crate) fn resolve_unit(
    path: &Path,
    meta: &Meta,
    reader: EnergyUnit,
    on_conflict: OnConflict,
) -> Result<(EnergyUnit, Option<String>), ReadError> {
    match meta.energy_unit {
        Some(f) if f != reader => match on_conflict {
            OnConflict::Stop => Err(ReadError::Header {
                path: path.to_path_buf(),
                line: meta.lines.get("energy_unit").copied().unwrap_or(1),
                problem: format!(
                    "the file says energy_unit {f} but the reader's energy_unit is {reader}; make them agree, \
                     or set `reader.on_conflict: use-file` (or `use-reader`) to say which wins"
                ),
            }),
            OnConflict::UseReader => Ok((
                reader,
                Some(format!(
                    "files say energy_unit {f}; read them as {reader} (reader.on_conflict: use-reader)"
                )),
            )),
            OnConflict::UseFile => Ok((
                f,
                Some(format!(
                    "read the files as their own energy_unit {f}, not the reader's {reader} (reader.on_conflict: use-file)"
                )),
            )),
        },
        _ => Ok((reader, None)),
    }
}

/// The sampled state and every state's λ of a configured reader's window.
pub(crate) struct States {
    pub state: usize,
    pub lambdas: Vec<f64>,
    pub components: Vec<String>,
    pub component_lambdas: Vec<Vec<f64>>,
    pub warnings: Vec<String>,
}

/// The state and λ lists of a window with `k` energy columns and dU/dλ of the
/// components `names` (in order; empty: none): from the plan, else from the
/// file's own lines. `what` names the setting that chose the energies.
pub(crate) fn resolve_states(
    path: &Path,
    meta: &Meta,
    hint: &WindowHint,
    k: usize,
    names: &[String],
    what: &str,
) -> Result<States, ReadError> {
    let header_err = |problem: String| ReadError::Header {
        path: path.to_path_buf(),
        line: 1,
        problem,
    };
    let state = hint.state.or(meta.state).ok_or_else(|| {
        header_err("which state did this window sample? add a 'state: N' comment line (0-based), or read it through a campaign, which knows".into())
    })?;
    if state >= k {
        return Err(header_err(format!(
            "state {state} is out of range: {what} selects {k} states (0..{})",
            k.saturating_sub(1)
        )));
    }
    let mut warnings = Vec::new();
    let lambdas = match hint.lambdas.clone().or_else(|| meta.lambdas.clone()) {
        Some(l) if l.len() == k => l,
        Some(l) => {
            return Err(header_err(format!(
                "the λ list has {} values but {what} selects {k} states",
                l.len()
            )))
        }
        None => {
            warnings.push(format!(
                "no λ list in the files; assumed evenly spaced λ from 0 to 1 over the {k} states"
            ));
            (0..k)
                .map(|i| {
                    if k > 1 {
                        i as f64 / (k - 1) as f64
                    } else {
                        0.0
                    }
                })
                .collect()
        }
    };
    let mut components = Vec::new();
    let mut component_lambdas = Vec::new();
    for name in names {
        components.push(name.clone());
        let l = if names.len() == 1 {
            lambdas.clone()
        } else {
            hint.component_lambdas
                .as_ref()
                .unwrap_or(&meta.component_lambdas)
                .iter()
                .find(|(n, _)| n == name)
                .map(|(_, l)| l.clone())
                .ok_or_else(|| {
                    header_err(format!(
                        "no λ list for component '{name}'; add a 'lambdas.{name}: ...' comment line, or read it through a campaign, which knows"
                    ))
                })?
        };
        if l.len() != k {
            return Err(header_err(format!(
                "the λ list of component '{name}' has {} values, not {k}",
                l.len()
            )));
        }
        component_lambdas.push(l);
    }
    if components.is_empty() {
        components.push("lambda".into());
        component_lambdas.push(lambdas.clone());
    }
    Ok(States {
        state,
        lambdas,
        components,
        component_lambdas,
        warnings,
    })
}

/// Where a window's temperature came from, in words (for `try-reader`).
pub(crate) fn temperature_source(meta: &Meta, reader: Option<f64>, hint: &WindowHint) -> String {
    if hint.temperature_k.is_some() {
        return "given on the command line (overrides the file)".into();
    }
    match (meta.temperature_k, reader, hint.campaign_temperature_k) {
        (Some(_), Some(_), _) => "the file's temperature_K line (agrees with the reader's)".into(),
        (Some(_), None, Some(_)) => {
            "the file's temperature_K line (agrees with the campaign's)".into()
        }
        (Some(_), None, None) => "the file's temperature_K line".into(),
        (None, Some(_), _) => "the reader's temperature_K (the file does not say)".into(),
        (None, None, Some(_)) => "the campaign's temperature_K (the file does not say)".into(),
        (None, None, None) => "unknown".into(),
    }
}

/// Where a window's energy unit came from, in words (for `try-reader`).
pub(crate) fn unit_source(meta: &Meta, reader: Option<EnergyUnit>) -> String {
    match (meta.energy_unit, reader) {
        (Some(_), Some(_)) => {
            "the reader's energy_unit (the file's energy_unit line agrees)".into()
        }
        (Some(_), None) => "the file's energy_unit line".into(),
        (None, Some(_)) => "the reader's energy_unit (the file does not say)".into(),
        (None, None) => "unknown".into(),
    }
}
