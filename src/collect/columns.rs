//! The configurable column reader for other engines' delimited text.

use super::config::{ColumnRef, ColumnsConfig, DudlColumns};
use super::error::ReadError;
use super::meta::{read_preamble, WindowHint};
use super::parse::{parse_rows, split_header, Delim, RowSpec, Slot};
use super::WindowSamples;
use crate::units::EnergyUnit;
use std::path::Path;

fn resolve(
    r: &ColumnRef,
    headers: &[String],
    has_header: bool,
    path: &Path,
    line: usize,
) -> Result<usize, ReadError> {
    match r {
        ColumnRef::Index(i) if *i < headers.len() => Ok(*i),
        ColumnRef::Index(i) => Err(ReadError::Header {
            path: path.to_path_buf(),
            line,
            problem: format!("column index {i} is past the last column ({} columns, 0-based); fix reader.columns", headers.len()),
        }),
        ColumnRef::Name(n) if has_header => headers.iter().position(|h| h == n).ok_or_else(|| ReadError::Header {
            path: path.to_path_buf(),
            line,
            problem: format!("no column named '{n}' in the header ({}); fix reader.columns", headers.join(", ")),
        }),
        ColumnRef::Name(n) => Err(ReadError::Config(format!(
            "column '{n}' is given by name but `header: false`; give 0-based indices or set `header: true`"
        ))),
    }
}

/// Parses delimited text with configured columns.
pub(crate) fn parse_columns(
    path: &Path,
    text: &[u8],
    cfg: &ColumnsConfig,
    hint: &WindowHint,
) -> Result<WindowSamples, ReadError> {
    if cfg.energies.is_empty() {
        return Err(ReadError::Config(
            "reader.columns.energies is empty; list the energy column of every state, in state order".into(),
        ));
    }
    let comments: Vec<Vec<u8>> = cfg.comment.iter().map(|c| c.as_bytes().to_vec()).collect();
    let delim = match cfg.delimiter {
        None => Delim::Whitespace,
        Some(c) if c.is_ascii() => Delim::Byte(c as u8),
        Some(c) => {
            return Err(ReadError::Config(format!(
                "delimiter '{c}' is not a single ASCII character"
            )))
        }
    };
    let pre = read_preamble(path, text, &comments)?;
    let meta = &pre.meta;
    let header_err = |line: usize, problem: String| ReadError::Header {
        path: path.to_path_buf(),
        line,
        problem,
    };
    let (first, first_no) = pre
        .first_line
        .clone()
        .ok_or_else(|| header_err(pre.at_first.1, "no data lines".into()))?;
    let fields = split_header(&first, delim);
    let (headers, data_start) = if cfg.header {
        (fields, pre.after_first)
    } else {
        (
            (1..=fields.len())
                .map(|i| format!("column {i}"))
                .collect::<Vec<_>>(),
            pre.at_first,
        )
    };
    let k = cfg.energies.len();
    let temperature_k = hint
        .temperature_k
        .or(cfg.temperature_k)
        .or(meta.temperature_k)
        .ok_or_else(|| {
            ReadError::Config(format!(
                "{}: no temperature: set reader.columns.temperature_K",
                path.display()
            ))
        })?;
    let state = hint.state.or(meta.state).ok_or_else(|| {
        header_err(1, "which state did this window sample? add a '# state: N' comment line or read it through a campaign, which knows".into())
    })?;
    if state >= k {
        return Err(header_err(
            1,
            format!("state {state} is out of range: reader.columns.energies lists {k} states"),
        ));
    }
    let mut warnings = Vec::new();
    let lambdas = match hint.lambdas.clone().or_else(|| meta.lambdas.clone()) {
        Some(l) if l.len() == k => l,
        Some(l) => {
            return Err(header_err(
                1,
                format!(
                    "the λ list has {} values but reader.columns.energies lists {k} states",
                    l.len()
                ),
            ))
        }
        None => {
            warnings.push(format!(
                "{}: no λ list; assumed evenly spaced λ from 0 to 1 over the {k} states",
                path.display()
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
    let mut slots = vec![Slot::Skip; headers.len()];
    for (j, r) in cfg.energies.iter().enumerate() {
        slots[resolve(r, &headers, cfg.header, path, first_no)?] = Slot::Energy(j);
    }
    let named = match &cfg.dudl {
        None => Vec::new(),
        Some(DudlColumns::One(r)) => vec![("lambda".to_string(), r.clone())],
        Some(DudlColumns::PerComponent(m)) => {
            m.iter().map(|(n, r)| (n.clone(), r.clone())).collect()
        }
    };
    let mut components = Vec::new();
    let mut component_lambdas = Vec::new();
    for (c, (name, r)) in named.iter().enumerate() {
        slots[resolve(r, &headers, cfg.header, path, first_no)?] = Slot::Dudl(c);
        components.push(name.clone());
        let l = if named.len() == 1 {
            lambdas.clone()
        } else {
            hint.component_lambdas
                .as_ref()
                .unwrap_or(&meta.component_lambdas)
                .iter()
                .find(|(n, _)| n == name)
                .map(|(_, l)| l.clone())
                .ok_or_else(|| header_err(1, format!("no λ list for component '{name}'; add a '# lambdas.{name}: ...' comment line")))?
        };
        if l.len() != k {
            return Err(header_err(
                1,
                format!(
                    "the λ list of component '{name}' has {} values, not {k}",
                    l.len()
                ),
            ));
        }
        component_lambdas.push(l);
    }
    if components.is_empty() {
        components.push("lambda".into());
        component_lambdas.push(lambdas.clone());
    }
    let n_dudl = named.len();
    let spec = RowSpec {
        delim,
        comments: &comments,
        slots,
        headers,
        n_states: k,
        n_dudl,
        scale: cfg.energy_unit.factor_to(EnergyUnit::Kt, temperature_k),
    };
    let rows = parse_rows(path, text, data_start.0, data_start.1, &spec)?;
    warnings.extend(rows.warnings);
    Ok(WindowSamples {
        source: path.to_path_buf(),
        state,
        temperature_k,
        lambdas,
        components,
        component_lambdas,
        frames: rows.frames,
        n_states: k,
        reduced: rows.reduced,
        dudl: rows.dudl,
        warnings,
    })
}
