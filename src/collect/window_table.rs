//! legwork's native window table (README: *The window table*), read without
//! configuration.

use super::config::OnConflict;
use super::error::ReadError;
use super::meta::{check_against_plan, read_preamble, resolve_temperature, WindowHint};
use super::parse::{parse_rows, split_header, Delim, RowSpec, Slot};
use super::WindowSamples;
use crate::units::EnergyUnit;
use std::path::Path;

const MAGIC: &str = "legwork window table";

/// Parses a window table already in memory.
pub(crate) fn parse_window_table(
    path: &Path,
    text: &[u8],
    hint: &WindowHint,
    on_conflict: OnConflict,
    ex: Option<&mut super::Explanation>,
) -> Result<WindowSamples, ReadError> {
    let comments = [b"#".to_vec()];
    let pre = read_preamble(path, text, &comments)?;
    let header_err = |line: usize, problem: String| ReadError::Header {
        path: path.to_path_buf(),
        line,
        problem,
    };
    if pre.first_line.is_none() && pre.meta.first_comment.is_none() {
        return Err(ReadError::Empty {
            path: path.to_path_buf(),
            problem: "the file is empty: the window wrote nothing yet".into(),
        });
    }
    match pre.meta.first_comment.as_deref() {
        Some(first) if first.starts_with(MAGIC) => {
            let version = first[MAGIC.len()..].trim();
            if version != "1" {
                return Err(header_err(
                    1,
                    format!("window table version '{version}' is not one this legwork reads (1); upgrade legwork"),
                ));
            }
        }
        _ => {
            return Err(header_err(
                1,
                format!("not a legwork window table: the first line should be '# {MAGIC} 1'; for another engine's output configure a reader (README: *Reading engine output*)"),
            ))
        }
    }
    let meta = &pre.meta;
    let (header, header_line) = pre.first_line.clone().ok_or_else(|| ReadError::Empty {
        path: path.to_path_buf(),
        problem: "no header line (time, dudl, u0, ...) and no data: the window wrote nothing yet"
            .into(),
    })?;
    if meta.temperature_k.is_none() && hint.temperature_k.is_none() {
        return Err(header_err(
            1,
            "no '# temperature_K: ...' line; add it (kelvin)".into(),
        ));
    }
    check_against_plan(path, meta, hint)?;
    let (temperature_k, t_note) = resolve_temperature(path, meta, None, hint, on_conflict)?;
    let unit = meta.energy_unit.ok_or_else(|| {
        header_err(
            1,
            "no '# energy_unit: ...' line; add one of kJ/mol, kcal/mol, kT".into(),
        )
    })?;
    let state = hint.state.or(meta.state).ok_or_else(|| {
        header_err(
            1,
            "no '# state: N' line (0-based index of the sampled state); add it".into(),
        )
    })?;
    let component_lambdas: Vec<(String, Vec<f64>)> = match &hint.component_lambdas {
        Some(c) => c.clone(),
        None => meta.component_lambdas.clone(),
    };
    let lambdas = match hint.lambdas.clone().or_else(|| meta.lambdas.clone()) {
        Some(l) => l,
        None if !component_lambdas.is_empty() => {
            let k = component_lambdas[0].1.len();
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
        None => {
            return Err(header_err(
                1,
                "no '# lambdas: ...' line (λ of every state, in index order); add it".into(),
            ))
        }
    };
    let k = lambdas.len();
    if k == 0 {
        return Err(header_err(
            1,
            "'# lambdas:' is empty; list the λ of every state".into(),
        ));
    }
    for (name, l) in &component_lambdas {
        if l.len() != k {
            return Err(header_err(
                1,
                format!("'# lambdas.{name}:' lists {} states but '# lambdas:' lists {k}; every λ list needs one value per state", l.len()),
            ));
        }
    }
    if state >= k {
        return Err(header_err(
            1,
            format!(
                "state {state} is out of range: the leg has {k} states (0..{})",
                k - 1
            ),
        ));
    }
    let (components, comp_l): (Vec<String>, Vec<Vec<f64>>) = if component_lambdas.is_empty() {
        (vec!["lambda".into()], vec![lambdas.clone()])
    } else {
        component_lambdas.into_iter().unzip()
    };
    let headers = split_header(&header, Delim::Byte(b'\t'));
    let mut slots = vec![Slot::Skip; headers.len()];
    for j in 0..k {
        let name = format!("u{j}");
        let i = headers.iter().position(|h| *h == name).ok_or_else(|| {
            header_err(
                header_line,
                format!(
                    "no column '{name}': a leg with {k} states needs energy columns u0..u{}",
                    k - 1
                ),
            )
        })?;
        slots[i] = Slot::Energy(j);
    }
    let single = components.len() == 1 && components[0] == "lambda";
    for (c, name) in components.iter().enumerate() {
        let col = if single {
            "dudl".to_string()
        } else {
            format!("dudl.{name}")
        };
        let i = headers.iter().position(|h| *h == col).ok_or_else(|| {
            header_err(
                header_line,
                format!(
                    "no column '{col}' (dU/dλ{}); add it to the header",
                    if single {
                        String::new()
                    } else {
                        format!(" of component {name}")
                    }
                ),
            )
        })?;
        slots[i] = Slot::Dudl(c);
    }
    let spec = RowSpec {
        delim: Delim::Byte(b'\t'),
        comments: &comments,
        slots,
        headers,
        n_states: k,
        n_dudl: components.len(),
        scale: unit.factor_to(EnergyUnit::Kt, temperature_k),
    };
    if let Some(ex) = ex {
        ex.unit = format!("{unit}, the file's energy_unit line");
        ex.temperature = super::meta::temperature_source(meta, None, hint);
        ex.columns = super::columns::explain_slots(&spec.slots, &spec.headers, &components, false);
    }
    let rows = parse_rows(path, text, pre.after_first.0, pre.after_first.1, &spec)?;
    Ok(WindowSamples {
        source: path.to_path_buf(),
        state,
        temperature_k,
        lambdas,
        components,
        component_lambdas: comp_l,
        frames: rows.frames,
        n_states: k,
        reduced: rows.reduced,
        dudl: rows.dudl,
        warnings: t_note.into_iter().chain(rows.warnings).collect(),
    })
}
