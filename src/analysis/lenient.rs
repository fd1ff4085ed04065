//! JSON has no NaN: serde_json writes a non-finite f64 as `null`. These readers
//! turn such a `null` back into NaN so that a summary.json with an undefined
//! estimate (e.g. an EXP that overflowed) can still be re-rendered.

use serde::{Deserialize, Deserializer};

fn nan(v: Option<f64>) -> f64 {
    v.unwrap_or(f64::NAN)
}

/// A number, or `null` read as NaN.
pub fn f64<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
    Option::<f64>::deserialize(d).map(nan)
}

/// A list of numbers with `null` read as NaN.
pub fn vec<'de, D: Deserializer<'de>>(d: D) -> Result<Vec<f64>, D::Error> {
    Vec::<Option<f64>>::deserialize(d).map(|v| v.into_iter().map(nan).collect())
}

/// A matrix of numbers with `null` read as NaN.
pub fn matrix<'de, D: Deserializer<'de>>(d: D) -> Result<Vec<Vec<f64>>, D::Error> {
    Vec::<Vec<Option<f64>>>::deserialize(d).map(|m| {
        m.into_iter()
            .map(|r| r.into_iter().map(nan).collect())
            .collect()
    })
}
