//! How window output is read: the `reader:` section of a campaign file.

use crate::units::EnergyUnit;
use serde::{Deserialize, Serialize};

/// The `reader:` section. The default reads legwork window tables.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReaderConfig {
    /// `window-table` (the native format, no other keys needed) or `columns`.
    #[serde(default)]
    pub format: ReaderFormat,
    /// For `columns`: how the columns are found and what they mean.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub columns: Option<ColumnsConfig>,
}

impl Default for ReaderConfig {
    fn default() -> Self {
        ReaderConfig {
            format: ReaderFormat::WindowTable,
            columns: None,
        }
    }
}

/// Which reader.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ReaderFormat {
    /// legwork's window table (DESIGN.md).
    #[default]
    WindowTable,
    /// Any delimited text with configurable columns.
    Columns,
}

/// A column by header name or by 0-based index.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum ColumnRef {
    /// 0-based column index.
    Index(usize),
    /// Header name.
    Name(String),
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
    pub energies: Vec<ColumnRef>,
    /// Whether the energies are absolute or relative to the sampled state.
    #[serde(default)]
    pub energies_relative: bool,
    /// Unit of every energy column.
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

fn default_comments() -> Vec<String> {
    vec!["#".into()]
}
fn yes() -> bool {
    true
}
