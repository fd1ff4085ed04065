//! The configurable column reader for other engines' delimited text.

use super::config::{ColumnRef, ColumnsConfig, Energies, OnConflict};
use super::error::ReadError;
use super::meta::{
    check_against_plan, read_preamble, resolve_states, resolve_temperature, resolve_unit,
    WindowHint,
};
use super::meta::{temperature_source, unit_source};
use super::parse::{parse_rows, split_header, Delim, RowSpec, Slot};
use super::{Explanation, WindowSamples};
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
            problem: format!("no column named '{n}' in the header line ({}); fix reader.columns, or, if that line is not the header, add its comment prefix to `comment:`", headers.join(", ")),
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
    on_conflict: OnConflict,
    ex: Option<&mut Explanation>,
) -> Result<WindowSamples, ReadError> {
    if cfg.energies == Energies::List(Vec::new()) {
        return Err(ReadError::Config(
            "reader.columns.energies is empty; list the energy column of every state in state order, or give `{ matching: PATTERN }` or `{ from: COLUMN }`".into(),
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
    let (first, first_no) = pre.first_line.clone().ok_or_else(|| ReadError::Empty {
        path: path.to_path_buf(),
        problem: "no data lines (the window has not written a frame yet)".into(),
    })?;
    let fields = split_header(&first, delim);
    let (headers, data_start) = if cfg.header {
        (fields, pre.after_first)
    } else {
        (
            (0..fields.len())
                .map(|i| format!("column {i}"))
                .collect::<Vec<_>>(),
            pre.at_first,
        )
    };
    check_against_plan(path, meta, hint)?;
    let plan_states = hint.lambdas.as_ref().map(Vec::len);
    let energy_cols = select_energies(
        &cfg.energies,
        &headers,
        cfg.header,
        plan_states,
        path,
        first_no,
    )?;
    let k = energy_cols.len();
    if let Some(p) = plan_states {
        if p != k {
            return Err(header_err(
                first_no,
                format!(
                    "reader.columns.energies selects {k} columns ({}) but the campaign's leg has {p} states; \
                     select one energy column per state",
                    describe_cols(&energy_cols, &headers)
                ),
            ));
        }
    }
    let (temperature_k, t_note) =
        resolve_temperature(path, meta, cfg.temperature_k, hint, on_conflict)?;
    let (unit, u_note) = resolve_unit(path, meta, cfg.energy_unit, on_conflict)?;
    let named = order_components(
        cfg.dudl.as_ref().map(|d| d.named()).unwrap_or_default(),
        hint,
        path,
    )?;
    let names: Vec<String> = named.iter().map(|(n, _)| n.clone()).collect();
    let st = resolve_states(path, meta, hint, k, &names, "reader.columns.energies")?;
    let state = st.state;
    let mut warnings: Vec<String> = t_note
        .into_iter()
        .chain(u_note)
        .chain(st.warnings)
        .collect();
    let mut slots = vec![Slot::Skip; headers.len()];
    for (j, &i) in energy_cols.iter().enumerate() {
        slots[i] = Slot::Energy(j);
    }
    for (c, (name, r)) in named.iter().enumerate() {
        let i = resolve(r, &headers, cfg.header, path, first_no)?;
        if let Slot::Energy(j) = slots[i] {
            return Err(ReadError::Config(format!(
                "column {} ('{}') is both the energy of state {j} and the dU/dλ of '{name}'; fix reader.columns",
                i, headers[i]
            )));
        }
        slots[i] = Slot::Dudl(c);
    }
    let n_dudl = named.len();
    let spec = RowSpec {
        delim,
        comments: &comments,
        slots,
        headers,
        n_states: k,
        n_dudl,
        scale: unit.factor_to(EnergyUnit::Kt, temperature_k),
    };
    if let Some(ex) = ex {
        ex.unit = format!("{unit}, {}", unit_source(meta, Some(cfg.energy_unit)));
        ex.temperature = temperature_source(meta, cfg.temperature_k, hint);
        ex.columns = explain_slots(&spec.slots, &spec.headers, &st.components, true);
    }
    let rows = parse_rows(path, text, data_start.0, data_start.1, &spec)?;
    if cfg.energies_relative {
        check_relative(
            path,
            &rows.reduced,
            k,
            state,
            &spec.headers[energy_cols[state]],
        )?;
    }
    warnings.extend(rows.warnings);
    Ok(WindowSamples {
        source: path.to_path_buf(),
        state,
        temperature_k,
        lambdas: st.lambdas,
        components: st.components,
        component_lambdas: st.component_lambdas,
        frames: rows.frames,
        n_states: k,
        reduced: rows.reduced,
        dudl: rows.dudl,
        warnings,
    })
}

/// The energy columns, in state order, as 0-based field indices.
fn select_energies(
    energies: &Energies,
    headers: &[String],
    has_header: bool,
    plan_states: Option<usize>,
    path: &Path,
    line: usize,
) -> Result<Vec<usize>, ReadError> {
    let header_err = |problem: String| ReadError::Header {
        path: path.to_path_buf(),
        line,
        problem,
    };
    let cols = match energies {
        Energies::List(l) => l
            .iter()
            .map(|r| resolve(r, headers, has_header, path, line))
            .collect::<Result<Vec<_>, _>>()?,
        Energies::Matching(p) => {
            if !has_header {
                return Err(ReadError::Config(format!(
                    "energies `matching: {p}` needs column names, but `header: false`; give `{{ from: INDEX }}` or set `header: true`"
                )));
            }
            let re = regex::Regex::new(p).map_err(|e| {
                ReadError::Config(format!(
                    "energies.matching '{p}' is not a regular expression: {e}"
                ))
            })?;
            let found: Vec<usize> = (0..headers.len())
                .filter(|&i| re.is_match(&headers[i]))
                .collect();
            if found.is_empty() {
                return Err(header_err(format!(
                    "no column name matches energies `matching: {p}` (the header line's names are {}); fix the pattern, \
                     or, if that line is not the header, add its comment prefix to `comment:` (or set `header: false`)",
                    headers.join(", ")
                )));
            }
            found
        }
        Energies::Range { from, count } => {
            let first = resolve(from, headers, has_header, path, line)?;
            let n = count.or(plan_states).unwrap_or(headers.len() - first);
            if first + n > headers.len() {
                return Err(header_err(format!(
                    "energies from {from} need {n} columns ({first}..{}, 0-based) but the lines have {} columns; \
                     check `from` and the leg's number of states",
                    first + n - 1,
                    headers.len()
                )));
            }
            (first..first + n).collect()
        }
    };
    for (a, &i) in cols.iter().enumerate() {
        if let Some(b) = cols[..a].iter().position(|&j| j == i) {
            return Err(ReadError::Config(format!(
                "column {i} ('{}') is selected as the energy of both state {b} and state {a}; fix reader.columns.energies",
                headers[i]
            )));
        }
    }
    Ok(cols)
}

fn describe_cols(cols: &[usize], headers: &[String]) -> String {
    let name = |i: usize| format!("{i}:{}", headers[i]);
    match cols {
        [] => "none".into(),
        [a] => name(*a),
        [a, .., z] => format!("{} … {}", name(*a), name(*z)),
    }
}

/// Orders (component, column) pairs as the campaign's leg lists its components,
/// and checks that they are the same components.
pub(crate) fn order_components<T: Clone>(
    named: Vec<(String, T)>,
    hint: &WindowHint,
    path: &Path,
) -> Result<Vec<(String, T)>, ReadError> {
    if named.is_empty() {
        return Ok(named);
    }
    let plan: Vec<String> = match (&hint.component_lambdas, &hint.lambdas) {
        (Some(c), _) => c.iter().map(|(n, _)| n.clone()).collect(),
        (None, Some(_)) => vec!["lambda".into()],
        (None, None) => return Ok(named),
    };
    let given: Vec<&str> = named.iter().map(|(n, _)| n.as_str()).collect();
    if plan.len() == 1 && named.len() == 1 {
        return Ok(named);
    }
    let mut out = Vec::new();
    for p in &plan {
        match named.iter().find(|(n, _)| n == p) {
            Some(x) => out.push(x.clone()),
            None => {
                return Err(ReadError::Config(format!(
                    "{}: the leg has λ components {} but the reader's dudl names {}; give one dU/dλ column per component, named as in the campaign's `lambdas.components`",
                    path.display(),
                    plan.join(", "),
                    given.join(", ")
                )))
            }
        }
    }
    if out.len() != named.len() {
        return Err(ReadError::Config(format!(
            "{}: the reader's dudl names {} but the leg has λ components {}; remove the others",
            path.display(),
            given.join(", "),
            plan.join(", ")
        )));
    }
    Ok(out)
}

/// Energies relative to the sampled state are zero at that state: anything else
/// means the columns are not in state order, or the state index is wrong.
pub(crate) fn check_relative(
    path: &Path,
    reduced: &[f64],
    k: usize,
    state: usize,
    header: &str,
) -> Result<(), ReadError> {
    // Printed zeros, in any unit, are within 1e-3 kT of zero (common practice, no
    // source: engines print energies to at least three decimals).
    if let Some((frame, row)) = reduced
        .chunks_exact(k)
        .enumerate()
        .find(|(_, row)| row[state].abs() > 1e-3)
    {
        return Err(ReadError::Config(format!(
            "{}: frame {frame}: `energies_relative: true`, but the energy of the sampled state {state} (column '{header}') is {:.6} kT, not 0; \
             the energy columns are not in state order, the state index is wrong, or the energies are absolute (set `energies_relative: false`)",
            path.display(),
            row[state]
        )));
    }
    Ok(())
}

/// (column, meaning) for every field: energies, dU/dλ and ignored columns.
pub(crate) fn explain_slots(
    slots: &[Slot],
    headers: &[String],
    components: &[String],
    indexed: bool,
) -> Vec<(String, String)> {
    slots
        .iter()
        .zip(headers)
        .enumerate()
        .map(|(i, (s, h))| {
            let name = if indexed && !h.starts_with("column ") {
                format!("{h} (column {i})")
            } else {
                h.clone()
            };
            let meaning = match s {
                Slot::Energy(j) => format!("energy at state {j}"),
                Slot::Dudl(c) => format!("dU/dλ of component {}", components[*c]),
                Slot::Skip => "ignored".to_string(),
            };
            (name, meaning)
        })
        .collect()
}
