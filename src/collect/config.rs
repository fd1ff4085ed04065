//! How window output is read: the `reader:` section of a campaign file (or of a
//! leg, which overrides the campaign's).

use crate::units::EnergyUnit;
use serde::{Deserialize, Serialize};

/// The `reader:` section. The default reads legwork window tables.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReaderConfig {
    /// `window-table` (the native format, no other keys needed), `columns` or
    /// `blocks`.
    #[serde(default)]
    pub format: ReaderFormat,
    /// For `columns`: how the columns are found and what they mean.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub columns: Option<ColumnsConfig>,
    /// For `blocks`: the labels that start a frame and carry each quantity.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub blocks: Option<BlocksConfig>,
    /// What to do when a file declares an energy unit or temperature that the
    /// configuration (reader or campaign) contradicts.
    #[serde(default, skip_serializing_if = "OnConflict::is_stop")]
    pub on_conflict: OnConflict,
}

impl Default for ReaderConfig {
    fn default() -> Self {
        ReaderConfig {
            format: ReaderFormat::WindowTable,
            columns: None,
            blocks: None,
            on_conflict: OnConflict::Stop,
        }
    }
}

/// Which reader.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ReaderFormat {
    /// legwork's window table (README: *The window table*).
    #[default]
    WindowTable,
    /// Any delimited text with configurable columns, one frame per line.
    Columns,
    /// Frames printed as several `label value` lines each.
    Blocks,
}

impl ReaderFormat {
    /// The name used in campaign files.
    pub fn as_str(self) -> &'static str {
        match self {
            ReaderFormat::WindowTable => "window-table",
            ReaderFormat::Columns => "columns",
            ReaderFormat::Blocks => "blocks",
        }
    }
}

/// Which side wins when a file's own energy unit or temperature line disagrees
/// with the configuration.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum OnConflict {
    /// Stop with an error naming both values.
    #[default]
    Stop,
    /// Use the configuration's value (the reader's, else the campaign's).
    UseReader,
    /// Use the file's value.
    UseFile,
}

impl OnConflict {
    fn is_stop(&self) -> bool {
        *self == OnConflict::Stop
    }
}

/// A column by header name or by 0-based index.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum ColumnRef {
    /// 0-based column index.
    Index(usize),
    /// Header name (for `blocks`: the label).
    Name(String),
}

impl std::fmt::Display for ColumnRef {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ColumnRef::Index(i) => write!(f, "column {i}"),
            ColumnRef::Name(n) => write!(f, "'{n}'"),
        }
    }
}

/// Which columns (or labels) hold the energy at every state, in state order.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(try_from = "EnergiesRepr", into = "EnergiesRepr")]
pub enum Energies {
    /// One entry per state, in state order.
    List(Vec<ColumnRef>),
    /// Every column (label) whose name matches this regular expression, in the
    /// order they appear.
    Matching(String),
    /// One column per state, starting at this column; `count` columns, or as
    /// many as the leg has states.
    Range {
        /// The first energy column (index or header name).
        from: ColumnRef,
        /// How many; absent: the leg's state count (in a campaign), else every
        /// column to the end of the line.
        count: Option<usize>,
    },
}

impl Default for Energies {
    fn default() -> Self {
        Energies::List(Vec::new())
    }
}

impl Energies {
    /// The number of states it selects when that is fixed by the configuration.
    pub fn fixed_count(&self) -> Option<usize> {
        match self {
            Energies::List(l) => Some(l.len()),
            Energies::Range { count, .. } => *count,
            Energies::Matching(_) => None,
        }
    }

    /// A short description for summaries.
    pub fn describe(&self) -> String {
        match self {
            Energies::List(l) if l.is_empty() => "none".into(),
            Energies::List(l) => {
                let all: Vec<String> = l.iter().map(|c| c.to_string()).collect();
                if all.len() > 4 {
                    format!(
                        "{} listed: {}, {}, …, {}",
                        all.len(),
                        all[0],
                        all[1],
                        all[all.len() - 1]
                    )
                } else {
                    format!("{} listed: {}", all.len(), all.join(", "))
                }
            }
            Energies::Matching(p) => format!("every column matching /{p}/, in file order"),
            Energies::Range { from, count } => match count {
                Some(n) => format!("{n} columns from {from}"),
                None => format!("one column per state from {from}"),
            },
        }
    }
}

/// The YAML forms of [`Energies`]: a list, or a mapping with `matching` or
/// `from` (and `count`).
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(untagged)]
enum EnergiesRepr {
    List(Vec<ColumnRef>),
    Select(EnergySelect),
}

#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct EnergySelect {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    matching: Option<String>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    from: Option<ColumnRef>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    count: Option<usize>,
}

impl TryFrom<EnergiesRepr> for Energies {
    type Error = String;
    fn try_from(r: EnergiesRepr) -> Result<Self, String> {
        match r {
            EnergiesRepr::List(l) => Ok(Energies::List(l)),
            EnergiesRepr::Select(s) => match (s.matching, s.from, s.count) {
                (Some(p), None, None) => {
                    regex::Regex::new(&p).map_err(|e| {
                        format!("energies.matching '{p}' is not a regular expression: {e}")
                    })?;
                    Ok(Energies::Matching(p))
                }
                (None, Some(from), count) => Ok(Energies::Range { from, count }),
                (Some(_), _, _) => Err(
                    "energies: give either `matching: PATTERN` or `from: COLUMN` (with an optional `count`), not both".into(),
                ),
                (None, None, _) => Err(
                    "energies: give a list of columns, `{ matching: PATTERN }` or `{ from: COLUMN, count: N }`".into(),
                ),
            },
        }
    }
}

impl From<Energies> for EnergiesRepr {
    fn from(e: Energies) -> Self {
        match e {
            Energies::List(l) => EnergiesRepr::List(l),
            Energies::Matching(p) => EnergiesRepr::Select(EnergySelect {
                matching: Some(p),
                ..Default::default()
            }),
            Energies::Range { from, count } => EnergiesRepr::Select(EnergySelect {
                from: Some(from),
                count,
                ..Default::default()
            }),
        }
    }
}

/// Options of the configurable column reader.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ColumnsConfig {
    /// Lines starting with any of these are comments.
    #[serde(default = "default_comments")]
    pub comment: Vec<String>,
    /// Field delimiter; absent: any run of spaces or tabs.
    #[serde(default)]
    pub delimiter: Option<char>,
    /// Whether the first non-comment line names the columns.
    #[serde(default = "yes")]
    pub header: bool,
    /// The time column, if any.
    #[serde(default)]
    pub time: Option<ColumnRef>,
    /// dU/dλ column(s): one, or one per λ component (component name → column).
    #[serde(default)]
    pub dudl: Option<DudlColumns>,
    /// Energy at every state of the leg, in state order.
    #[serde(default)]
    pub energies: Energies,
    /// Whether the energies are absolute or relative to the sampled state.
    #[serde(default)]
    pub energies_relative: bool,
    /// Unit of every energy column.
    pub energy_unit: EnergyUnit,
    /// Temperature of the samples, when the file does not say.
    #[serde(default, rename = "temperature_K")]
    pub temperature_k: Option<f64>,
}

/// A frame-start label: an exact label, or a regular expression.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum LabelRef {
    /// The line's label (or the whole line) equals this.
    Exact(String),
    /// The line's label (or the whole line) matches this regular expression.
    Pattern {
        /// The regular expression.
        matching: String,
    },
}

impl std::fmt::Display for LabelRef {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            LabelRef::Exact(s) => write!(f, "'{s}'"),
            LabelRef::Pattern { matching } => write!(f, "/{matching}/"),
        }
    }
}

/// Options of the block reader: each frame is several `label value` (or
/// `label = value`, `label: value`) lines.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BlocksConfig {
    /// Lines starting with any of these are comments.
    #[serde(default = "default_comments")]
    pub comment: Vec<String>,
    /// The label (or pattern) of the line that starts a frame.
    pub start: LabelRef,
    /// The time label, if any.
    #[serde(default)]
    pub time: Option<String>,
    /// dU/dλ label(s): one, or one per λ component (component name → label).
    #[serde(default)]
    pub dudl: Option<DudlColumns>,
    /// Energy at every state: a list of labels in state order, or
    /// `{ matching: PATTERN }` (every matching label, in the order of the first
    /// frame).
    #[serde(default)]
    pub energies: Energies,
    /// Whether the energies are absolute or relative to the sampled state.
    #[serde(default)]
    pub energies_relative: bool,
    /// Unit of every energy.
    pub energy_unit: EnergyUnit,
    /// Temperature of the samples, when the file does not say.
    #[serde(default, rename = "temperature_K")]
    pub temperature_k: Option<f64>,
}

/// dU/dλ columns: one column, or one per component.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum DudlColumns {
    /// A single dU/dλ column.
    One(ColumnRef),
    /// Component name → column.
    PerComponent(std::collections::BTreeMap<String, ColumnRef>),
}

impl DudlColumns {
    /// (component, column) pairs; a single column is the component `lambda`.
    pub fn named(&self) -> Vec<(String, ColumnRef)> {
        match self {
            DudlColumns::One(r) => vec![("lambda".to_string(), r.clone())],
            DudlColumns::PerComponent(m) => m.iter().map(|(n, r)| (n.clone(), r.clone())).collect(),
        }
    }
}

fn default_comments() -> Vec<String> {
    vec!["#".into()]
}
fn yes() -> bool {
    true
}

/// Reads a reader configuration from a YAML file: either the reader mapping
/// itself (`format: columns`, `columns: {...}`) or any mapping with a `reader:`
/// key (so a campaign file works too).
pub fn load_reader_file(path: &std::path::Path) -> Result<ReaderConfig, String> {
    use crate::campaign::yaml::{self, Value};
    let text = std::fs::read_to_string(path)
        .map_err(|e| format!("{}: cannot read the reader file: {e}", path.display()))?;
    let root = yaml::parse(&text).map_err(|e| {
        format!(
            "{}:{}:{}: not YAML: {}",
            path.display(),
            e.pos.line,
            e.pos.col,
            e.message
        )
    })?;
    let section = match &root.value {
        Value::Map(pairs) => pairs
            .iter()
            .find(|(k, _)| k.as_str() == Some("reader"))
            .map(|(_, v)| v)
            .unwrap_or(&root),
        _ => &root,
    };
    crate::campaign::de::from_node(section, "reader").map_err(|e| {
        let pos = e.pos.unwrap_or(section.pos);
        format!(
            "{}:{}:{}: not a reader configuration: {}; see README *Reading engine output*",
            path.display(),
            pos.line,
            pos.col,
            e.message()
        )
    })
}
