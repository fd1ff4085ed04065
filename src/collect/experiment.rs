//! The measured-affinities CSV (`experiment:` in the campaign file), read into the
//! numeric core's [`Measured`] values.
//!
//! Format: `#` comment lines anywhere; header `ligand,kind,value,unit` (any
//! column order); kind ∈ {dg, ki, kd, ic50}; unit kcal/mol | kJ/mol for dg and
//! pM | nM | uM | µM | mM | M for the others. A dissociation or inhibition
//! constant K becomes ΔG = RT ln(K / 1 M). An IC50 is taken as if it were Ki,
//! which is an approximation (it depends on the assay's substrate
//! concentration; Cheng & Prusoff 1973, from memory), and is marked as such.

use crate::network::{dg_from_constant_kj, molar_factor, Measured, MeasuredKind};
use crate::units::EnergyUnit;
use std::path::Path;

/// The sentence the report prints when any value came from an IC50.
pub const IC50_NOTE: &str = "IC50 values were converted as if they were inhibition constants (ΔG = RT ln(IC50 / 1 M)); an IC50 depends on the assay conditions, so these ΔG are approximate.";

/// A problem with the measured-affinities file.
#[derive(Debug, thiserror::Error)]
pub enum ExperimentError {
    /// The file could not be read.
    #[error("{path}: cannot read the measured-affinities file: {source}")]
    Io {
        /// The file.
        path: String,
        /// Why.
        source: std::io::Error,
    },
    /// Something at a given line is wrong.
    #[error("{path}:{line}: {message}")]
    At {
        /// The file.
        path: String,
        /// Line (from 1).
        line: u64,
        /// What is wrong and how to fix it.
        message: String,
    },
}

/// Reads and converts the file at `path`; ΔG in `unit` at `temperature_k`.
pub fn read_measured(
    path: &Path,
    temperature_k: f64,
    unit: EnergyUnit,
) -> Result<Vec<Measured>, ExperimentError> {
    let text = std::fs::read_to_string(path).map_err(|source| ExperimentError::Io {
        path: path.display().to_string(),
        source,
    })?;
    parse_measured(&text, &path.display().to_string(), temperature_k, unit)
}

/// Parses the CSV text; `origin` names it in error messages.
pub fn parse_measured(
    text: &str,
    origin: &str,
    temperature_k: f64,
    unit: EnergyUnit,
) -> Result<Vec<Measured>, ExperimentError> {
    let at = |line: u64, message: String| ExperimentError::At {
        path: origin.to_string(),
        line,
        message,
    };
    // Comment and blank lines are removed before the CSV reader sees the text
    // (its own line counter would skip them); `origin_line` maps back.
    let mut kept = String::with_capacity(text.len());
    let mut origin_line: Vec<u64> = Vec::new();
    for (i, l) in text.lines().enumerate() {
        let t = l.trim();
        if t.is_empty() || t.starts_with('#') {
            continue;
        }
        kept.push_str(l);
        kept.push('\n');
        origin_line.push(i as u64 + 1);
    }
    let line_at = |csv_line: u64| {
        origin_line
            .get((csv_line.max(1) - 1) as usize)
            .copied()
            .unwrap_or(csv_line)
    };
    let mut reader = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .flexible(true)
        .from_reader(kept.as_bytes());
    let headers = reader
        .headers()
        .map_err(|e| {
            let line = e.position().map_or(1, |p| line_at(p.line()));
            at(line, format!("cannot read the header: {e}"))
        })?
        .clone();
    let header_line = headers.position().map_or(1, |p| line_at(p.line()));
    let col = |name: &str| headers.iter().position(|h| h.eq_ignore_ascii_case(name));
    let (Some(c_lig), Some(c_kind), Some(c_val), Some(c_unit)) =
        (col("ligand"), col("kind"), col("value"), col("unit"))
    else {
        return Err(at(
            header_line,
            format!(
                "the header must name the columns ligand,kind,value,unit (found: {})",
                headers.iter().collect::<Vec<_>>().join(",")
            ),
        ));
    };
    let mut out: Vec<Measured> = Vec::new();
    for record in reader.records() {
        let record = record.map_err(|e| {
            let line = e.position().map_or(0, |p| line_at(p.line()));
            at(line, format!("not a valid CSV row: {e}"))
        })?;
        let line = record.position().map_or(0, |p| line_at(p.line()));
        let field = |c: usize, name: &str| {
            record
                .get(c)
                .filter(|s| !s.is_empty())
                .ok_or_else(|| at(line, format!("the {name} column is empty or missing")))
        };
        let ligand = field(c_lig, "ligand")?.to_string();
        let kind_text = field(c_kind, "kind")?;
        let value_text = field(c_val, "value")?;
        let unit_text = field(c_unit, "unit")?.to_string();
        let kind = match kind_text.to_ascii_lowercase().as_str() {
            "dg" => MeasuredKind::Dg,
            "ki" => MeasuredKind::Ki,
            "kd" => MeasuredKind::Kd,
            "ic50" => MeasuredKind::Ic50,
            other => {
                return Err(at(
                    line,
                    format!("kind '{other}' is not one of dg, ki, kd, ic50"),
                ))
            }
        };
        let value: f64 = value_text
            .parse()
            .ok()
            .filter(|v: &f64| v.is_finite())
            .ok_or_else(|| at(line, format!("value '{value_text}' is not a number")))?;
        let dg_kj = match kind {
            MeasuredKind::Dg => {
                let u = match unit_text.as_str() {
                    "kcal/mol" => EnergyUnit::KcalPerMol,
                    "kJ/mol" | "kj/mol" => EnergyUnit::KjPerMol,
                    other => {
                        return Err(at(
                            line,
                            format!("unit '{other}' for a dg must be kcal/mol or kJ/mol"),
                        ))
                    }
                };
                u.convert(value, EnergyUnit::KjPerMol, temperature_k)
            }
            _ => {
                let f = molar_factor(&unit_text).ok_or_else(|| {
                    at(
                        line,
                        format!(
                            "unit '{unit_text}' for a {kind_text} must be one of pM, nM, uM, µM, mM, M"
                        ),
                    )
                })?;
                if value <= 0.0 {
                    return Err(at(
                        line,
                        format!("a {kind_text} must be positive (got {value})"),
                    ));
                }
                dg_from_constant_kj(value * f, temperature_k)
            }
        };
        if let Some(prev) = out.iter().find(|m| m.ligand == ligand) {
            return Err(at(
                line,
                format!(
                    "ligand '{ligand}' is listed again (first at line {}); keep one value per ligand",
                    prev.line
                ),
            ));
        }
        out.push(Measured {
            ligand,
            dg: EnergyUnit::KjPerMol.convert(dg_kj, unit, temperature_k),
            kind,
            value,
            unit: unit_text,
            line,
        });
    }
    Ok(out)
}
