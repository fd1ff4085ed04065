//! Ligand and edge lists kept in their own CSV or YAML files.

use super::fields::Ctx;
use super::model::Vars;
use super::yaml::Pos;
use std::path::Path;

/// One row of a table: where it is, and its cells by column name.
pub struct Row {
    /// line in the file
    pub line: usize,
    /// column name → cell text (empty cells left out)
    pub cells: Vec<(String, String)>,
}

/// Reads a CSV file with a header line; `#` lines are comments. Problems go to
/// `ctx`, whose file is the CSV.
pub fn read_csv(ctx: &mut Ctx, path: &Path, required: &[&str]) -> Option<Vec<Row>> {
    let mut rdr = match csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .trim(csv::Trim::All)
        .flexible(false)
        .from_path(path)
    {
        Ok(r) => r,
        Err(e) => {
            ctx.error(Pos::default(), format!("cannot read: {e}"), None);
            return None;
        }
    };
    let headers: Vec<String> = match rdr.headers() {
        Ok(h) => h.iter().map(str::to_string).collect(),
        Err(e) => {
            ctx.error(
                Pos { line: 1, col: 1 },
                format!("cannot read the header: {e}"),
                None,
            );
            return None;
        }
    };
    let mut ok = true;
    for r in required {
        if !headers.iter().any(|h| h == r) {
            ctx.error(
                Pos { line: 1, col: 1 },
                format!(
                    "the header has no column '{r}' (it has: {})",
                    headers.join(", ")
                ),
                Some(format!(
                    "the first line must name the columns, including {}",
                    required.join(", ")
                )),
            );
            ok = false;
        }
    }
    if !ok {
        return None;
    }
    let mut rows = Vec::new();
    for rec in rdr.records() {
        match rec {
            Ok(rec) => {
                let line = rec.position().map_or(0, |p| p.line() as usize);
                let cells = headers
                    .iter()
                    .zip(rec.iter())
                    .filter(|(_, c)| !c.is_empty())
                    .map(|(h, c)| (h.clone(), c.to_string()))
                    .collect();
                rows.push(Row { line, cells });
            }
            Err(e) => {
                let line = e.position().map_or(0, |p| p.line() as usize);
                ctx.error(
                    Pos { line, col: 1 },
                    format!("malformed row: {e}"),
                    Some("every row needs as many cells as the header has columns".to_string()),
                );
            }
        }
    }
    Some(rows)
}

/// A cell as a template variable: integers and numbers become numbers, except
/// where that would change how they read (a leading zero or `+`: `007` stays text).
pub fn cell_value(text: &str) -> serde_json::Value {
    let digits = text.strip_prefix('-').unwrap_or(text);
    let keeps_text = text.starts_with('+')
        || (digits.len() > 1 && digits.starts_with('0') && !digits.starts_with("0."));
    if keeps_text {
        return serde_json::Value::String(text.to_string());
    }
    if let Ok(i) = text.parse::<i64>() {
        return i.into();
    }
    if let Ok(f) = text.parse::<f64>() {
        if f.is_finite() {
            if let Some(n) = serde_json::Number::from_f64(f) {
                return serde_json::Value::Number(n);
            }
        }
    }
    serde_json::Value::String(text.to_string())
}

/// The cells of a row other than `skip`, as variables.
pub fn row_vars(row: &Row, skip: &[&str]) -> Vars {
    row.cells
        .iter()
        .filter(|(h, _)| !skip.contains(&h.as_str()))
        .map(|(h, c)| (h.clone(), cell_value(c)))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::cell_value;
    use serde_json::json;

    #[test]
    fn cells() {
        assert_eq!(cell_value("3"), json!(3));
        assert_eq!(cell_value("-2.5"), json!(-2.5));
        assert_eq!(cell_value("0.5"), json!(0.5));
        assert_eq!(cell_value("007"), json!("007"));
        assert_eq!(cell_value("+1"), json!("+1"));
        assert_eq!(cell_value("CCO"), json!("CCO"));
        assert_eq!(cell_value("nan"), json!("nan"));
    }
}
