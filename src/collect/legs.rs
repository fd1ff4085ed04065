//! The reader as a campaign uses it: which reader a leg's windows are read
//! with, what the plan tells the reader about each window, and the static checks
//! `legwork check` runs on every leg's reader settings.

use super::config::{ColumnRef, DudlColumns, Energies, OnConflict, ReaderConfig, ReaderFormat};
use super::{validate_output_with, ReadError, WindowHint};
use crate::campaign::Campaign;
use crate::plan::{Plan, TaskIndex};
use std::path::{Path, PathBuf};

/// A leg's own `reader:`, when the campaign gives it one.
///
/// The reader of leg `leg`: its own `reader:`, else the campaign's (every
/// caller — collect, the done check, `check`, `try-reader` — goes through this).
pub fn leg_reader<'a>(campaign: &'a Campaign, leg: &str) -> &'a ReaderConfig {
    match campaign.leg(leg) {
        Some(l) => campaign.reader_for(l),
        None => &campaign.reader,
    }
}

/// What the plan knows about one window task: the state it samples, every
/// state's λ (per component when the leg has several), and the campaign's
/// temperature.
pub fn window_hint(campaign: &Campaign, plan: &Plan, task: TaskIndex) -> WindowHint {
    let t = &plan.tasks[task];
    let Some(leg) = plan.leg(&t.leg) else {
        return WindowHint::default();
    };
    let component_lambdas = (leg.components.len() > 1).then(|| {
        leg.components
            .iter()
            .enumerate()
            .map(|(c, n)| (n.clone(), leg.states.iter().map(|s| s[c]).collect()))
            .collect()
    });
    WindowHint {
        state: t.window,
        lambdas: Some(leg.lambdas.clone()),
        component_lambdas,
        temperature_k: None,
        campaign_temperature_k: Some(campaign.temperature_k),
        what: Some(match t.window {
            Some(w) => format!("leg {}, window {w}", t.leg),
            None => format!("leg {}", t.leg),
        }),
    }
}

/// The output file of a task (its stage's `output:`), if it has one.
pub fn task_output(
    campaign: &Campaign,
    plan: &Plan,
    task: TaskIndex,
    dir: &Path,
) -> Option<PathBuf> {
    let t = &plan.tasks[task];
    let stage = campaign.stage(&t.stage)?;
    stage.output.as_ref().map(|o| dir.join(o))
}

/// The "done means done" check of a task whose engine exited 0, with the leg's
/// reader and what the plan knows: `Ok(None)` when its stage declares no output,
/// else the frame count. A per-leg stage's output is only checked to exist.
pub fn check_task_output(
    campaign: &Campaign,
    plan: &Plan,
    task: TaskIndex,
    dir: &Path,
) -> Result<Option<u64>, ReadError> {
    let Some(path) = task_output(campaign, plan, task, dir) else {
        return Ok(None);
    };
    let t = &plan.tasks[task];
    if t.window.is_none() {
        std::fs::metadata(&path).map_err(|source| ReadError::Io { path, source })?;
        return Ok(None);
    }
    let reader = leg_reader(campaign, &t.leg);
    let hint = window_hint(campaign, plan, task);
    validate_output_with(&path, reader, &hint, t.frames).map(Some)
}

/// One problem with a leg's static reader settings.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ReaderProblem {
    /// The leg.
    pub leg: String,
    /// What is wrong.
    pub message: String,
    /// How to fix it.
    pub hint: String,
}

impl std::fmt::Display for ReaderProblem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "error: reader of leg {}: {}\n  hint: {}",
            self.leg, self.message, self.hint
        )
    }
}

/// Checks every leg's reader settings against the leg, before anything runs:
/// the format has its section, the dU/dλ columns name the leg's λ components,
/// the energy columns number the leg's states, columns by name need a header,
/// and the reader's temperature agrees with the campaign's.
pub fn check_readers(campaign: &Campaign) -> Vec<ReaderProblem> {
    let mut out = Vec::new();
    for leg in &campaign.legs {
        let r = leg_reader(campaign, &leg.name);
        let mut problem = |message: String, hint: &str| {
            out.push(ReaderProblem {
                leg: leg.name.clone(),
                message,
                hint: hint.to_string(),
            })
        };
        let k = leg.windows();
        let components = &leg.lambdas.components;
        // (section name, energies, dudl, temperature, is blocks, header)
        let (section, energies, dudl, temperature, blocks, header) = match r.format {
            ReaderFormat::WindowTable => {
                if r.columns.is_some() || r.blocks.is_some() {
                    problem(
                        format!(
                            "`reader:` has a `{}` section but its format is window-table (the default)",
                            if r.columns.is_some() { "columns" } else { "blocks" }
                        ),
                        "add `format: columns` (or `format: blocks`) to the reader, or remove the section",
                    );
                }
                continue;
            }
            ReaderFormat::Columns => match &r.columns {
                Some(c) => (
                    "columns",
                    &c.energies,
                    &c.dudl,
                    c.temperature_k,
                    false,
                    c.header,
                ),
                None => {
                    problem(
                        "`format: columns` has no `columns:` section".into(),
                        "add `columns: { energies: ..., energy_unit: ... }` (README: *The columns reader*)",
                    );
                    continue;
                }
            },
            ReaderFormat::Blocks => match &r.blocks {
                Some(b) => ("blocks", &b.energies, &b.dudl, b.temperature_k, true, true),
                None => {
                    problem(
                        "`format: blocks` has no `blocks:` section".into(),
                        "add `blocks: { start: ..., energies: ..., energy_unit: ... }` (README: *The blocks reader*)",
                    );
                    continue;
                }
            },
        };
        if *energies == Energies::List(Vec::new()) {
            problem(
                format!("reader.{section}.energies selects no energy columns"),
                "list one energy per state in state order, or give `{ matching: PATTERN }`",
            );
        } else if let Some(n) = energies.fixed_count() {
            if n != k {
                problem(
                    format!(
                        "reader.{section}.energies selects {n} energies but leg {} has {k} states",
                        leg.name
                    ),
                    "select one energy per state; to share one reader between legs of different window counts use `{ matching: PATTERN }` or `{ from: COLUMN }` without `count`",
                );
            }
        }
        if let Energies::List(l) = energies {
            for (a, x) in l.iter().enumerate() {
                if let Some(b) = l[..a].iter().position(|y| y == x) {
                    problem(
                        format!(
                            "reader.{section}.energies gives {x} for both state {b} and state {a}"
                        ),
                        "give each state its own energy column",
                    );
                }
            }
        }
        let mut refs: Vec<&ColumnRef> = Vec::new();
        match energies {
            Energies::List(l) => refs.extend(l),
            Energies::Range { from, .. } => refs.push(from),
            Energies::Matching(_) => {}
        }
        if let Some(d) = dudl {
            let named = d.named();
            refs.extend(match d {
                DudlColumns::One(r) => vec![r],
                DudlColumns::PerComponent(m) => m.values().collect(),
            });
            let given: Vec<&str> = named.iter().map(|(n, _)| n.as_str()).collect();
            let single = components.len() == 1;
            if single && named.len() != 1 {
                problem(
                    format!(
                        "reader.{section}.dudl names components {} but leg {} has a single λ",
                        given.join(", "),
                        leg.name
                    ),
                    "give one dU/dλ column (`dudl: COLUMN`), or give the leg `lambdas: {components: ...}`",
                );
            } else if !single {
                let mut missing: Vec<&str> = components
                    .iter()
                    .map(String::as_str)
                    .filter(|c| !given.contains(c))
                    .collect();
                let extra: Vec<&str> = given
                    .iter()
                    .copied()
                    .filter(|g| !components.iter().any(|c| c == g))
                    .collect();
                if matches!(d, DudlColumns::One(_)) {
                    missing = components.iter().map(String::as_str).collect();
                }
                if !missing.is_empty() || !extra.is_empty() {
                    problem(
                        format!(
                            "leg {} has λ components {} but reader.{section}.dudl gives {}",
                            leg.name,
                            components.join(", "),
                            if matches!(d, DudlColumns::One(_)) {
                                "one column for all of them".to_string()
                            } else {
                                given.join(", ")
                            }
                        ),
                        &format!(
                            "give one dU/dλ column per component, named as in the leg's `lambdas.components`: `dudl: {{ {} }}`",
                            components
                                .iter()
                                .map(|c| format!("{c}: COLUMN"))
                                .collect::<Vec<_>>()
                                .join(", ")
                        ),
                    );
                }
            }
        }
        if blocks {
            if matches!(energies, Energies::Range { .. }) {
                problem(
                    "reader.blocks.energies cannot be `from:` (blocks have no column order)".into(),
                    "list the energy labels in state order, or give `{ matching: PATTERN }`",
                );
            }
            if refs.iter().any(|r| matches!(r, ColumnRef::Index(_))) {
                problem(
                    "reader.blocks names a quantity by column index".into(),
                    "the block reader finds quantities by label: give each label's text",
                );
            }
        } else if !header {
            if let Some(ColumnRef::Name(n)) = refs.iter().find(|r| matches!(r, ColumnRef::Name(_)))
            {
                problem(
                    format!("reader.columns names column '{n}' but `header: false` (the file has no column names)"),
                    "give 0-based column indices, or set `header: true` if the first non-comment line names the columns",
                );
            }
            if matches!(energies, Energies::Matching(_)) {
                problem(
                    "reader.columns.energies `matching:` needs column names but `header: false`"
                        .into(),
                    "use `{ from: INDEX }` (0-based), or set `header: true`",
                );
            }
        }
        if let Some(t) = temperature {
            if (t - campaign.temperature_k).abs() > 1e-9 * t.abs() {
                problem(
                    format!(
                        "reader.{section}.temperature_K is {t} K but the campaign's temperature_K is {} K",
                        campaign.temperature_k
                    ),
                    "a campaign is analysed at one temperature: set the campaign's `temperature_K` to the samples' temperature and remove the reader's",
                );
            }
        }
        if let Some(c) = r.columns.as_ref().and_then(|c| c.delimiter) {
            if !c.is_ascii() {
                problem(
                    format!("reader.columns.delimiter '{c}' is not a single ASCII character"),
                    "use e.g. ',' or '\\t', or leave it out for any run of spaces or tabs",
                );
            }
        }
    }
    out
}

/// What a reader will do, in words, for `check` and `try-reader`: every setting,
/// defaults said as defaults.
pub fn describe(r: &ReaderConfig) -> Vec<String> {
    let mut out = Vec::new();
    let quote = |v: &[String]| {
        v.iter()
            .map(|c| format!("'{c}'"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let dudl_words = |d: &Option<DudlColumns>| match d {
        None => "none (TI cannot run; EXP, BAR and MBAR can)".to_string(),
        Some(d) => d
            .named()
            .iter()
            .map(|(n, r)| format!("{n} ← {r}"))
            .collect::<Vec<_>>()
            .join(", "),
    };
    let conflict = match r.on_conflict {
        OnConflict::Stop => {
            "stop (default): a file whose energy_unit or temperature_K line disagrees is an error"
        }
        OnConflict::UseReader => {
            "use-reader: the configuration's unit and temperature win over the files'"
        }
        OnConflict::UseFile => "use-file: the files' own unit and temperature lines win",
    };
    match r.format {
        ReaderFormat::WindowTable => {
            out.push("format: window-table (legwork's own; README: *The window table*)".into());
            out.push(
                "state and λ: from the campaign's plan (a file that states them must agree)".into(),
            );
            out.push(format!("on_conflict: {conflict}"));
        }
        ReaderFormat::Columns => {
            let Some(c) = &r.columns else {
                out.push("format: columns, but no `columns:` section".into());
                return out;
            };
            out.push("format: columns (one frame per line)".into());
            out.push(if c.header {
                "header: true (the default): the first non-comment line names the columns and is not a frame".into()
            } else {
                "header: false: every non-comment line is a frame (columns are numbered from 0)".into()
            });
            out.push(format!(
                "comment lines start with {}; delimiter: {}",
                quote(&c.comment),
                match c.delimiter {
                    None => "any run of spaces or tabs (the default)".to_string(),
                    Some('\t') => "tab".to_string(),
                    Some(d) => format!("'{d}'"),
                }
            ));
            out.push(format!(
                "energies: {}; {} to the sampled state; in {}",
                c.energies.describe(),
                if c.energies_relative {
                    "relative"
                } else {
                    "absolute, not relative"
                },
                c.energy_unit
            ));
            out.push(format!("dU/dλ: {}", dudl_words(&c.dudl)));
            out.push(format!(
                "temperature: {}",
                match c.temperature_k {
                    Some(t) => format!("{t} K (reader)"),
                    None => "the files' temperature_K line, else the campaign's".into(),
                }
            ));
            out.push(format!("on_conflict: {conflict}"));
        }
        ReaderFormat::Blocks => {
            let Some(b) = &r.blocks else {
                out.push("format: blocks, but no `blocks:` section".into());
                return out;
            };
            out.push(format!(
                "format: blocks (several `label value` lines per frame); a frame starts at a line {} {}",
                match b.start {
                    super::config::LabelRef::Exact(_) => "labelled",
                    super::config::LabelRef::Pattern { .. } => "matching",
                },
                b.start
            ));
            out.push(format!("comment lines start with {}", quote(&b.comment)));
            out.push(format!(
                "energies: {}; {} to the sampled state; in {}",
                b.energies.describe().replace("column", "label"),
                if b.energies_relative {
                    "relative"
                } else {
                    "absolute, not relative"
                },
                b.energy_unit
            ));
            out.push(format!("dU/dλ: {}", dudl_words(&b.dudl)));
            out.push(format!(
                "temperature: {}",
                match b.temperature_k {
                    Some(t) => format!("{t} K (reader)"),
                    None => "the files' temperature_K line, else the campaign's".into(),
                }
            ));
            out.push(format!("on_conflict: {conflict}"));
        }
    }
    out
}
