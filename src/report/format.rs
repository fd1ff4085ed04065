//! How numbers are spelled on the page and in the plots.
//!
//! Overlap values have a form of their own: two significant figures, always
//! with the leading zero (`0.34`, `0.052`, `1.0`), and scientific notation
//! below 0.01 (`3.1e-3`, `4.0e-7`). In the overlap heatmap a cell below
//! [`OVERLAP_FLOOR`] shows [`OVERLAP_DOT`] instead of a number (its colour still
//! shows the value); the plot's legend says so, and the exact values are in
//! `results/summary.json`.

/// Below this, an overlap heatmap cell shows [`OVERLAP_DOT`] instead of a number.
pub const OVERLAP_FLOOR: f64 = 0.01;
/// The mark of an overlap heatmap cell below [`OVERLAP_FLOOR`].
pub const OVERLAP_DOT: &str = "·";

/// An overlap value in text: two significant figures with the leading zero,
/// scientific notation below 0.01, `0` for zero (or a rounding error below
/// it), `–` when undefined.
pub fn overlap_text(v: f64) -> String {
    if !v.is_finite() {
        return "–".into();
    }
    if v <= 0.0 {
        return "0".into();
    }
    // Round to two significant figures first: the rounding can move the value
    // up a decade (0.0996 → 0.10).
    let decade = |x: f64| x.log10().floor() as i32;
    let scale = 10f64.powi(1 - decade(v));
    let r = (v * scale).round() / scale;
    let e = decade(r);
    if e >= -2 {
        format!("{r:.prec$}", prec = (1 - e).max(0) as usize)
    } else {
        format!("{r:.1e}")
    }
}

/// The label of one overlap heatmap cell: [`overlap_text`], or [`OVERLAP_DOT`]
/// below [`OVERLAP_FLOOR`], or nothing when the value is undefined.
pub fn overlap_label(v: f64) -> String {
    if !v.is_finite() {
        String::new()
    } else if v < OVERLAP_FLOOR {
        OVERLAP_DOT.into()
    } else {
        overlap_text(v)
    }
}

/// An energy with two decimals; `–` when undefined; never `-0.00`.
pub(crate) fn f2(v: f64) -> String {
    if v.is_finite() {
        let s = format!("{v:.2}");
        if s == "-0.00" {
            "0.00".into()
        } else {
            s
        }
    } else {
        "–".into()
    }
}

/// [`f2`] of an optional value.
pub(crate) fn o2(v: Option<f64>) -> String {
    v.map(f2).unwrap_or_else(|| "–".into())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn overlap_values_keep_two_significant_figures_and_the_leading_zero() {
        assert_eq!(overlap_text(0.3412), "0.34");
        assert_eq!(overlap_text(0.05234), "0.052");
        assert_eq!(overlap_text(0.0996), "0.10");
        assert_eq!(overlap_text(0.99999), "1.0");
        assert_eq!(overlap_text(1.0), "1.0");
        assert_eq!(overlap_text(0.00312), "3.1e-3");
        assert_eq!(overlap_text(4.04e-7), "4.0e-7");
        assert_eq!(overlap_text(0.0), "0");
        assert_eq!(overlap_text(-1e-17), "0");
        assert_eq!(overlap_text(f64::NAN), "–");
        assert_eq!(overlap_label(0.3412), "0.34");
        assert_eq!(overlap_label(0.00312), OVERLAP_DOT);
        assert_eq!(overlap_label(f64::NAN), "");
    }
}
