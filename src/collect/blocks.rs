//! The block reader: engines that print each frame as several lines of
//! `label value`, `label = value` or `label: value`, one quantity per line.
//!
//! A frame starts at a line whose label (or whole text) matches `start` and runs
//! to the next such line. Within a frame, each configured label must appear
//! exactly once; labels the configuration does not name are ignored.

use super::columns::{check_relative, order_components};
use super::config::{BlocksConfig, ColumnRef, Energies, LabelRef, OnConflict};
use super::error::ReadError;
use super::meta::{
    check_against_plan, read_preamble, resolve_states, resolve_temperature, resolve_unit,
    WindowHint,
};
use super::parse::is_skippable;
use super::WindowSamples;
use crate::units::EnergyUnit;
use std::collections::HashMap;
use std::path::Path;

/// Splits a block line into (label, value): `label = value`, `label: value`,
/// or `label value` (the value is the last word). A line of one word has no value.
pub(crate) fn split_label(line: &str) -> (&str, Option<&str>) {
    let line = line.trim();
    if let Some((l, v)) = line.split_once('=') {
        return (l.trim(), v.split_whitespace().next());
    }
    if let Some((l, v)) = line.split_once(": ") {
        return (l.trim(), v.split_whitespace().next());
    }
    match line.rsplit_once([' ', '\t']) {
        Some((l, v)) => (l.trim(), Some(v.trim())),
        None => (line, None),
    }
}

#[derive(Clone, Copy, PartialEq)]
enum Slot {
    Energy(usize),
    Dudl(usize),
}

enum Start {
    Exact(String),
    Pattern(regex::Regex),
}

impl Start {
    fn matches(&self, line: &str, label: &str) -> bool {
        match self {
            Start::Exact(s) => label == s || line == s,
            Start::Pattern(re) => re.is_match(line),
        }
    }
}

fn slot_name(slot: Slot, labels: &HashMap<String, Slot>) -> String {
    labels
        .iter()
        .find(|(_, s)| **s == slot)
        .map(|(l, _)| l.clone())
        .unwrap_or_default()
}

/// Parses a block-shaped window.
pub(crate) fn parse_blocks(
    path: &Path,
    text: &[u8],
    cfg: &BlocksConfig,
    hint: &WindowHint,
    on_conflict: OnConflict,
    ex: Option<&mut super::Explanation>,
) -> Result<WindowSamples, ReadError> {
    let config = |m: String| ReadError::Config(m);
    let comments: Vec<Vec<u8>> = cfg.comment.iter().map(|c| c.as_bytes().to_vec()).collect();
    let start = match &cfg.start {
        LabelRef::Exact(s) => Start::Exact(s.trim().to_string()),
        LabelRef::Pattern { matching } => {
            Start::Pattern(regex::Regex::new(matching).map_err(|e| {
                config(format!(
                    "reader.blocks.start matching '{matching}' is not a regular expression: {e}"
                ))
            })?)
        }
    };
    let pre = read_preamble(path, text, &comments)?;
    let meta = &pre.meta;
    check_against_plan(path, meta, hint)?;
    let (temperature_k, t_note) =
        resolve_temperature(path, meta, cfg.temperature_k, hint, on_conflict)?;
    let (unit, u_note) = resolve_unit(path, meta, cfg.energy_unit, on_conflict)?;
    let scale = unit.factor_to(EnergyUnit::Kt, temperature_k);

    let named = order_components(
        cfg.dudl.as_ref().map(|d| d.named()).unwrap_or_default(),
        hint,
        path,
    )?;
    let mut labels: HashMap<String, Slot> = HashMap::new();
    for (c, (name, r)) in named.iter().enumerate() {
        let ColumnRef::Name(l) = r else {
            return Err(config(format!(
                "reader.blocks.dudl of '{name}' is a column index; the block reader finds quantities by label: give the label text"
            )));
        };
        labels.insert(l.clone(), Slot::Dudl(c));
    }
    let pattern = match &cfg.energies {
        Energies::List(l) if l.is_empty() => {
            return Err(config(
                "reader.blocks.energies is empty; list the label of every state's energy in state order, or give `{ matching: PATTERN }`".into(),
            ))
        }
        Energies::List(l) => {
            for (j, r) in l.iter().enumerate() {
                let ColumnRef::Name(name) = r else {
                    return Err(config(format!(
                        "reader.blocks.energies entry {j} is a column index; the block reader finds quantities by label: give the label text"
                    )));
                };
                if labels.insert(name.clone(), Slot::Energy(j)).is_some() {
                    return Err(config(format!(
                        "label '{name}' is given twice in reader.blocks (energies and dudl, or twice in energies)"
                    )));
                }
            }
            None
        }
        Energies::Matching(p) => Some(regex::Regex::new(p).map_err(|e| {
            config(format!(
                "reader.blocks.energies matching '{p}' is not a regular expression: {e}"
            ))
        })?),
        Energies::Range { .. } => {
            return Err(config(
                "reader.blocks.energies cannot be `from:`: blocks have no column order; list the labels or give `{ matching: PATTERN }`".into(),
            ))
        }
    };
    let mut k = match &cfg.energies {
        Energies::List(l) => l.len(),
        _ => 0,
    };
    let n_dudl = named.len();

    let mut reduced: Vec<f64> = Vec::new();
    let mut dudl: Vec<f64> = Vec::new();
    let mut warnings: Vec<String> = t_note.into_iter().chain(u_note).collect();
    // The frame being read: its first line, and which values it has.
    let mut current: Option<usize> = None;
    let mut row: Vec<Option<f64>> = Vec::new();
    let mut drow: Vec<Option<f64>> = vec![None; n_dudl];
    let mut frames = 0usize;
    let mut first_frame_done = false;

    let mut pos = pre.at_first.0;
    let mut line_no = pre.at_first.1;
    let mut ended_cleanly = true;
    loop {
        let at_end = pos >= text.len();
        let (raw, complete) = if at_end {
            (&text[text.len()..], true)
        } else {
            match memchr::memchr(b'\n', &text[pos..]) {
                Some(i) => (&text[pos..pos + i], true),
                None => (&text[pos..], false),
            }
        };
        let line = if at_end {
            None
        } else {
            let s = std::str::from_utf8(raw).map_err(|_| ReadError::Header {
                path: path.to_path_buf(),
                line: line_no,
                problem: "not UTF-8 text; window files must be UTF-8".into(),
            })?;
            Some(s.trim_end_matches('\r'))
        };
        if let Some(l) = line {
            if !complete && !is_skippable(raw, &comments) {
                warnings.push(format!(
                    "{}:{}: the last line has no line end (the run was cut short?); dropped it",
                    path.display(),
                    line_no
                ));
                ended_cleanly = false;
            } else if !is_skippable(raw, &comments) {
                let trimmed = l.trim();
                let (label, value) = split_label(trimmed);
                if start.matches(trimmed, label) {
                    if let Some(begun) = current {
                        finish_frame(
                            path,
                            begun,
                            &mut row,
                            &mut drow,
                            &labels,
                            &mut reduced,
                            &mut dudl,
                        )?;
                        frames += 1;
                        first_frame_done = true;
                    }
                    current = Some(line_no);
                    row = vec![None; k];
                    drow = vec![None; n_dudl];
                } else if current.is_some() {
                    let slot = match labels.get(label) {
                        Some(s) => Some(*s),
                        None => match &pattern {
                            Some(re) if re.is_match(label) => {
                                if first_frame_done {
                                    return Err(ReadError::Header {
                                        path: path.to_path_buf(),
                                        line: line_no,
                                        problem: format!(
                                            "energy label '{label}' (matching /{re}/) was not in the first frame; every frame must carry the same energies"
                                        ),
                                    });
                                }
                                let j = k;
                                k += 1;
                                labels.insert(label.to_string(), Slot::Energy(j));
                                row.push(None);
                                Some(Slot::Energy(j))
                            }
                            _ => None,
                        },
                    };
                    if let Some(slot) = slot {
                        let col = l.len() - l.trim_start().len() + 1;
                        let v = value
                            .and_then(|v| v.parse::<f64>().ok())
                            .ok_or_else(|| ReadError::Value {
                                path: path.to_path_buf(),
                                line: line_no,
                                column: col,
                                header: label.to_string(),
                                problem: format!(
                                    "'{}' is not a number; a quantity line is `label value`, `label = value` or `label: value`",
                                    value.unwrap_or("")
                                ),
                            })?;
                        if !v.is_finite() {
                            return Err(ReadError::Value {
                                path: path.to_path_buf(),
                                line: line_no,
                                column: col,
                                header: label.to_string(),
                                problem: format!("'{v}' is not finite; the engine wrote NaN or infinity: check that window's simulation"),
                            });
                        }
                        let cell = match slot {
                            Slot::Energy(j) => &mut row[j],
                            Slot::Dudl(c) => &mut drow[c],
                        };
                        if cell.is_some() {
                            return Err(ReadError::Header {
                                path: path.to_path_buf(),
                                line: line_no,
                                problem: format!(
                                    "label '{label}' appears twice in the frame that starts at line {}; each frame gives each quantity once (is reader.blocks.start right?)",
                                    current.unwrap_or(0)
                                ),
                            });
                        }
                        *cell = Some(v * scale);
                    }
                }
            }
        }
        if at_end || !complete {
            break;
        }
        pos += raw.len() + 1;
        line_no += 1;
    }
    // The last frame: complete, or cut short by the end of the run.
    if let Some(begun) = current {
        let gaps = missing(&row, &drow, &labels);
        if gaps.is_empty() && ended_cleanly {
            finish_frame(
                path,
                begun,
                &mut row,
                &mut drow,
                &labels,
                &mut reduced,
                &mut dudl,
            )?;
            frames += 1;
        } else if frames == 0 && ended_cleanly {
            // The only frame lacks a quantity: a wrong label, not a cut-short run.
            finish_frame(
                path,
                begun,
                &mut row,
                &mut drow,
                &labels,
                &mut reduced,
                &mut dudl,
            )?;
        } else {
            warnings.push(format!(
                "{}:{begun}: the last frame is incomplete (the run was cut short?); dropped it",
                path.display()
            ));
        }
    }
    if frames == 0 && current.is_none() && pre.first_line.is_none() {
        return Err(ReadError::Empty {
            path: path.to_path_buf(),
            problem: "no frames yet (nothing after the comments)".into(),
        });
    }
    if frames == 0 && current.is_none() {
        return Err(ReadError::Header {
            path: path.to_path_buf(),
            line: pre.at_first.1,
            problem: format!(
                "no line starts a frame: none matches reader.blocks.start {}; check the label the engine prints at the start of each frame",
                cfg.start
            ),
        });
    }
    if k == 0 {
        return Err(ReadError::Header {
            path: path.to_path_buf(),
            line: pre.at_first.1,
            problem: "no energy label found in the first frame; fix reader.blocks.energies".into(),
        });
    }
    if let Some(p) = hint.lambdas.as_ref().map(Vec::len) {
        if p != k {
            return Err(ReadError::Header {
                path: path.to_path_buf(),
                line: pre.at_first.1,
                problem: format!(
                    "reader.blocks.energies finds {k} energies per frame but the campaign's leg has {p} states; give one energy per state"
                ),
            });
        }
    }
    let names: Vec<String> = named.iter().map(|(n, _)| n.clone()).collect();
    let st = resolve_states(path, meta, hint, k, &names, "reader.blocks.energies")?;
    if cfg.energies_relative {
        let label = slot_name(Slot::Energy(st.state), &labels);
        check_relative(path, &reduced, k, st.state, &label)?;
    }
    warnings.extend(st.warnings);
    if let Some(ex) = ex {
        ex.unit = format!(
            "{unit}, {}",
            super::meta::unit_source(meta, Some(cfg.energy_unit))
        );
        ex.temperature = super::meta::temperature_source(meta, cfg.temperature_k, hint);
        let mut cols: Vec<(String, String)> = labels
            .iter()
            .map(|(l, s)| {
                (
                    format!("'{l}'"),
                    match s {
                        Slot::Energy(j) => format!("energy at state {j}"),
                        Slot::Dudl(c) => format!("dU/dλ of component {}", st.components[*c]),
                    },
                )
            })
            .collect();
        cols.sort_by_key(|(_, m)| {
            let dudl = m.starts_with("dU/dλ");
            let n: usize = m
                .rsplit(' ')
                .next()
                .and_then(|v| v.parse().ok())
                .unwrap_or(0);
            (!dudl, n, m.clone())
        });
        cols.insert(0, (format!("{}", cfg.start), "starts a frame".into()));
        cols.push(("any other label".into(), "ignored".into()));
        ex.columns = cols;
    }
    Ok(WindowSamples {
        source: path.to_path_buf(),
        state: st.state,
        temperature_k,
        lambdas: st.lambdas,
        components: st.components,
        component_lambdas: st.component_lambdas,
        frames,
        n_states: k,
        reduced,
        dudl,
        warnings,
    })
}

/// The labels of the quantities a frame lacks.
fn missing(
    row: &[Option<f64>],
    drow: &[Option<f64>],
    labels: &HashMap<String, Slot>,
) -> Vec<String> {
    row.iter()
        .enumerate()
        .filter(|(_, v)| v.is_none())
        .map(|(j, _)| slot_name(Slot::Energy(j), labels))
        .chain(
            drow.iter()
                .enumerate()
                .filter(|(_, v)| v.is_none())
                .map(|(c, _)| slot_name(Slot::Dudl(c), labels)),
        )
        .collect()
}

fn finish_frame(
    path: &Path,
    begun: usize,
    row: &mut [Option<f64>],
    drow: &mut [Option<f64>],
    labels: &HashMap<String, Slot>,
    reduced: &mut Vec<f64>,
    dudl: &mut Vec<f64>,
) -> Result<(), ReadError> {
    let gaps = missing(row, drow, labels);
    if !gaps.is_empty() {
        return Err(ReadError::Header {
            path: path.to_path_buf(),
            line: begun,
            problem: format!(
                "the frame that starts here has no {}; every frame must give every configured quantity (check the labels in reader.blocks)",
                gaps.iter().map(|g| format!("'{g}'")).collect::<Vec<_>>().join(", ")
            ),
        });
    }
    reduced.extend(row.iter().map(|v| v.unwrap_or(f64::NAN)));
    dudl.extend(drow.iter().map(|v| v.unwrap_or(f64::NAN)));
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::split_label;

    #[test]
    fn labels_and_values_split_in_every_form() {
        assert_eq!(split_label("time = 1.5"), ("time", Some("1.5")));
        assert_eq!(
            split_label("  energy at state 3   -12.5 "),
            ("energy at state 3", Some("-12.5"))
        );
        assert_eq!(
            split_label("slope charge: 0.25 kJ/mol"),
            ("slope charge", Some("0.25"))
        );
        assert_eq!(split_label("----"), ("----", None));
        assert_eq!(split_label("frame 12"), ("frame", Some("12")));
    }
}
