//! The fast row parser shared by both readers: one pass over the bytes, floats
//! parsed in place, no allocation per line.

use super::error::ReadError;
use memchr::memchr;
use std::path::Path;

/// How fields are separated.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Delim {
    /// One byte (spaces around a field are allowed).
    Byte(u8),
    /// Any run of spaces or tabs.
    Whitespace,
}

/// Where a field's value goes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Slot {
    /// Not needed: skipped without parsing.
    Skip,
    /// Energy at state j.
    Energy(usize),
    /// dU/dλ of component c.
    Dudl(usize),
}

/// What the rows look like.
pub(crate) struct RowSpec<'a> {
    pub delim: Delim,
    pub comments: &'a [Vec<u8>],
    /// One slot per field; a line must have exactly this many fields.
    pub slots: Vec<Slot>,
    /// Header of each field, for messages.
    pub headers: Vec<String>,
    pub n_states: usize,
    pub n_dudl: usize,
    /// Multiplies every energy and dU/dλ value: to kT.
    pub scale: f64,
}

/// Parsed rows.
pub(crate) struct Rows {
    pub reduced: Vec<f64>,
    pub dudl: Vec<f64>,
    pub frames: usize,
    pub warnings: Vec<String>,
}

#[inline]
fn is_space(b: u8) -> bool {
    b == b' ' || b == b'\t'
}

/// Whether the line is blank or a comment.
pub(crate) fn is_skippable(line: &[u8], comments: &[Vec<u8>]) -> bool {
    let mut i = 0;
    while i < line.len() && (is_space(line[i]) || line[i] == b'\r') {
        i += 1;
    }
    if i == line.len() {
        return true;
    }
    comments
        .iter()
        .any(|c| !c.is_empty() && line[i..].starts_with(c))
}

/// Splits a header line into trimmed names.
pub(crate) fn split_header(line: &str, delim: Delim) -> Vec<String> {
    match delim {
        Delim::Byte(d) => line
            .split(d as char)
            .map(|s| s.trim().to_string())
            .collect(),
        Delim::Whitespace => line.split_whitespace().map(str::to_string).collect(),
    }
}

/// Parses every data line of `text` from byte `start` (which is line
/// `first_line`, 1-based). A last line without a line end is dropped with a warning:
/// it is what a window cut short by its wall-time leaves behind.
pub(crate) fn parse_rows(
    path: &Path,
    text: &[u8],
    start: usize,
    first_line: usize,
    spec: &RowSpec,
) -> Result<Rows, ReadError> {
    let k = spec.n_states;
    let c = spec.n_dudl;
    // Exact capacity from a fast count of line ends: no regrowth, no over-allocation.
    let lines = memchr::memchr_iter(b'\n', &text[start..]).count() + 1;
    let mut reduced = Vec::with_capacity(lines * k);
    let mut dudl = Vec::with_capacity(lines * c);
    let mut warnings = Vec::new();
    let mut row = vec![0.0f64; k];
    let mut drow = vec![0.0f64; c];
    let codes = field_codes(spec);
    let mut both = vec![0.0f64; k + c];
    let mut pos = start;
    let mut line_no = first_line;
    let mut frames = 0usize;
    let nf = spec.slots.len();
    while pos < text.len() {
        let (end, complete) = match memchr(b'\n', &text[pos..]) {
            Some(i) => (pos + i, true),
            None => (text.len(), false),
        };
        let mut line = &text[pos..end];
        if let Some((&b'\r', rest)) = line.split_last() {
            line = rest;
        }
        if !is_skippable(line, spec.comments) {
            if !complete {
                warnings.push(format!(
                    "{}:{}: the last line has no line end (the run was cut short?); dropped it",
                    path.display(),
                    line_no
                ));
                break;
            }
            let quick = match spec.delim {
                Delim::Byte(d) => quick_line(line, d, &codes, spec.scale, &mut both),
                Delim::Whitespace => false,
            };
            if quick {
                reduced.extend_from_slice(&both[..k]);
                dudl.extend_from_slice(&both[k..]);
            } else {
                parse_line(path, line, line_no, spec, nf, &mut row, &mut drow)?;
                reduced.extend_from_slice(&row);
                dudl.extend_from_slice(&drow);
            }
            frames += 1;
        }
        pos = end + 1;
        line_no += 1;
    }
    reduced.shrink_to_fit();
    dudl.shrink_to_fit();
    Ok(Rows {
        reduced,
        dudl,
        frames,
        warnings,
    })
}

/// Exact powers of ten up to 10^22, the largest exactly representable in f64.
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Parses a number at the start of `s`: (value, bytes used). Plain decimals with
/// at most 19 digits, a mantissa up to 2^53 and a decimal exponent within ±22 take
/// the exact fast path (Clinger 1990: both operands exact, one correctly rounded
/// operation); everything else goes to `fast-float2`.
#[inline(always)]
fn parse_number(s: &[u8]) -> Option<(f64, usize)> {
    parse_number_as::<false>(s)
}

/// [`parse_number`]; with `FINITE`, non-finite values (which only the slow path
/// can produce) come back as `None`, so no branch waits on the division.
#[inline(always)]
fn parse_number_as<const FINITE: bool>(s: &[u8]) -> Option<(f64, usize)> {
    let n = s.len();
    let mut i = 0;
    let neg = match s.first() {
        Some(b'-') => {
            i = 1;
            true
        }
        Some(b'+') => {
            i = 1;
            false
        }
        _ => false,
    };
    let mut mant: u64 = 0;
    let first = i;
    // Digit counts come from positions after each loop: the loops do only the
    // arithmetic.
    while let Some(&c) = s.get(i).filter(|c| c.is_ascii_digit()) {
        mant = mant.wrapping_mul(10).wrapping_add((c - b'0') as u64);
        i += 1;
    }
    let mut digits = (i - first) as u32;
    let mut exp10: i64 = 0;
    if i < n && s[i] == b'.' {
        i += 1;
        let frac = i;
        while let Some(&c) = s.get(i).filter(|c| c.is_ascii_digit()) {
            mant = mant.wrapping_mul(10).wrapping_add((c - b'0') as u64);
            i += 1;
        }
        digits += (i - frac) as u32;
        exp10 = -((i - frac) as i64);
    }
    if digits == 0 || digits > 19 {
        return slow::<FINITE>(s);
    }
    if i < n && (s[i] == b'e' || s[i] == b'E') {
        let mut j = i + 1;
        let eneg = match s.get(j) {
            Some(b'-') => {
                j += 1;
                true
            }
            Some(b'+') => {
                j += 1;
                false
            }
            _ => false,
        };
        let first = j;
        let mut e: i64 = 0;
        while j < n && s[j].is_ascii_digit() && j - first < 6 {
            e = e * 10 + (s[j] - b'0') as i64;
            j += 1;
        }
        if j == first || (j < n && s[j].is_ascii_digit()) {
            return slow::<FINITE>(s);
        }
        exp10 += if eneg { -e } else { e };
        i = j;
    }
    if mant > (1u64 << 53) || !(-22..=22).contains(&exp10) {
        return slow::<FINITE>(s);
    }
    let m = mant as f64;
    let v = if exp10 < 0 {
        m / POW10[(-exp10) as usize]
    } else {
        m * POW10[exp10 as usize]
    };
    Some((if neg { -v } else { v }, i))
}

#[cold]
fn slow<const FINITE: bool>(s: &[u8]) -> Option<(f64, usize)> {
    fast_float2::parse_partial::<f64, _>(s)
        .ok()
        .filter(|(v, _)| !FINITE || v.is_finite())
}

/// Where each field of the quick path goes: an index into one combined row
/// (energies, then dU/dλ components), or [`SKIP`].
fn field_codes(spec: &RowSpec) -> Vec<u32> {
    spec.slots
        .iter()
        .map(|s| match *s {
            Slot::Skip => SKIP,
            Slot::Energy(j) => j as u32,
            Slot::Dudl(c) => (spec.n_states + c) as u32,
        })
        .collect()
}

const SKIP: u32 = u32::MAX;

/// The common case of a single-byte delimiter and no stray spaces, with as few
/// branches as possible: each value goes to `out[codes[field]]` (energies, then
/// dU/dλ). Returns false on anything unusual (spaces, a bad or non-finite value,
/// a wrong field count): the careful parser then reads the line again and
/// reports exactly what is wrong.
#[inline(always)]
fn quick_line(line: &[u8], d: u8, codes: &[u32], scale: f64, out: &mut [f64]) -> bool {
    let n = line.len();
    let mut p = 0usize;
    let last = codes.len() - 1;
    for (f, &code) in codes.iter().enumerate() {
        if code == SKIP {
            while p < n && line[p] != d {
                p += 1;
            }
        } else {
            match parse_number_as::<true>(&line[p..]) {
                Some((v, used)) => {
                    out[code as usize] = v * scale;
                    p += used;
                }
                None => return false,
            }
        }
        if f < last {
            if p < n && line[p] == d {
                p += 1;
            } else {
                return false;
            }
        }
    }
    p == n
}

#[inline]
fn parse_line(
    path: &Path,
    line: &[u8],
    line_no: usize,
    spec: &RowSpec,
    nf: usize,
    row: &mut [f64],
    drow: &mut [f64],
) -> Result<(), ReadError> {
    let mut p = 0usize;
    let n = line.len();
    let shape = |col: usize, problem: String| ReadError::Shape {
        path: path.to_path_buf(),
        line: line_no,
        column: col + 1,
        problem,
    };
    for f in 0..nf {
        while p < n && is_space(line[p]) {
            p += 1;
        }
        if p >= n {
            return Err(shape(
                p,
                format!(
                    "the line ends after {f} of {nf} fields (missing '{}'); every data line needs one value per column of the header",
                    spec.headers[f]
                ),
            ));
        }
        match spec.slots[f] {
            Slot::Skip => match spec.delim {
                Delim::Byte(d) => {
                    while p < n && line[p] != d {
                        p += 1;
                    }
                }
                Delim::Whitespace => {
                    while p < n && !is_space(line[p]) {
                        p += 1;
                    }
                }
            },
            slot => {
                let start = p;
                let (v, used) = parse_number(&line[p..]).ok_or_else(|| {
                    value_error(path, line, line_no, start, spec, f, "is not a number")
                })?;
                p += used;
                if !v.is_finite() {
                    return Err(value_error(
                        path,
                        line,
                        line_no,
                        start,
                        spec,
                        f,
                        "is not finite; the engine wrote NaN or infinity: check that window's simulation",
                    ));
                }
                match slot {
                    Slot::Energy(j) => row[j] = v * spec.scale,
                    Slot::Dudl(c) => drow[c] = v * spec.scale,
                    Slot::Skip => unreachable!(),
                }
                let ok_end = match spec.delim {
                    Delim::Byte(d) => {
                        while p < n && line[p] == b' ' {
                            p += 1;
                        }
                        p == n || line[p] == d
                    }
                    Delim::Whitespace => p == n || is_space(line[p]),
                };
                if !ok_end {
                    return Err(value_error(
                        path,
                        line,
                        line_no,
                        start,
                        spec,
                        f,
                        "is not a number",
                    ));
                }
            }
        }
        if f + 1 < nf {
            if let Delim::Byte(d) = spec.delim {
                if p < n && line[p] == d {
                    p += 1;
                }
            }
        }
    }
    while p < n && is_space(line[p]) {
        p += 1;
    }
    if p < n {
        return Err(shape(
            p,
            format!("more fields than the {nf} columns of the header; remove the extra values or name them in the header"),
        ));
    }
    Ok(())
}

fn value_error(
    path: &Path,
    line: &[u8],
    line_no: usize,
    start: usize,
    spec: &RowSpec,
    field: usize,
    what: &str,
) -> ReadError {
    let mut end = start;
    while end < line.len()
        && !is_space(line[end])
        && !matches!(spec.delim, Delim::Byte(d) if line[end] == d)
    {
        end += 1;
    }
    let text = String::from_utf8_lossy(&line[start..end.max(start)]);
    ReadError::Value {
        path: path.to_path_buf(),
        line: line_no,
        column: start + 1,
        header: spec.headers[field].clone(),
        problem: format!("'{text}' {what}"),
    }
}

#[cfg(test)]
mod tests {
    use super::parse_number;

    #[test]
    fn fast_path_agrees_with_the_standard_parser() {
        for t in [
            "0",
            "-0.5",
            "1.2345678e-05",
            "12345678",
            "-9.8765432e+12",
            "3.14159265358979",
            "1e22",
            "1e23",
            "123456789012345678901",
            "0.000000000000000000000001",
            "+7.5",
            "2.5E3",
            "4.9406564584124654e-324",
            "1.7976931348623157e308",
            "9007199254740993",
        ] {
            let (v, n) = parse_number(t.as_bytes()).unwrap();
            assert_eq!(n, t.len(), "{t}");
            assert_eq!(v, t.parse::<f64>().unwrap(), "{t}");
        }
        assert!(parse_number(b"x1").is_none());
        assert_eq!(parse_number(b"1.5\t2").unwrap(), (1.5, 3));
        assert!(parse_number(b"nan").unwrap().0.is_nan());
    }
}
