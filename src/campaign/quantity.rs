//! Walltimes and memory sizes as users write them.

/// Parses a walltime: `90s`, `30m`, `4h`, `2d`, combinations such as `1h30m`,
/// `HH:MM:SS`, `MM:SS` or `D-HH:MM:SS`. Returns seconds.
pub fn parse_walltime(text: &str) -> Result<u64, String> {
    let t = text.trim();
    let bad = || {
        format!("walltime '{text}' is not understood: write e.g. 90s, 30m, 4h, 1h30m, 2d, 01:30:00 or 1-12:00:00")
    };
    if t.is_empty() {
        return Err(bad());
    }
    if t.bytes().all(|b| b.is_ascii_digit()) {
        return Err(format!(
            "walltime '{text}' has no unit: write {text}s, {text}m or {text}h"
        ));
    }
    let total = if t.contains(':') {
        clock(t, text)?
    } else {
        units(t).ok_or_else(bad)?
    };
    match total {
        None => Err(format!("walltime '{text}' is too long to count in seconds")),
        Some(0) => Err(format!("walltime '{text}' is zero")),
        Some(s) => Ok(s),
    }
}

/// `HH:MM:SS`, `MM:SS` or `D-HH:MM:SS`; `Ok(None)` when it overflows.
fn clock(t: &str, text: &str) -> Result<Option<u64>, String> {
    let bad = || format!("walltime '{text}' is not understood: write e.g. 01:30:00 or 1-12:00:00");
    let digits = |p: &str| {
        if p.is_empty() || !p.bytes().all(|b| b.is_ascii_digit()) {
            Err(bad())
        } else {
            p.parse::<u64>().map_err(|_| bad())
        }
    };
    let (days, rest) = match t.split_once('-') {
        Some((d, r)) => (digits(d)?, r),
        None => (0, t),
    };
    let nums: Vec<u64> = rest.split(':').map(digits).collect::<Result<_, _>>()?;
    let (h, m, s) = match nums[..] {
        [h, m, s] => (h, m, s),
        [m, s] => (0, m, s),
        _ => return Err(bad()),
    };
    if m >= 60 || s >= 60 {
        return Err(format!(
            "walltime '{text}': minutes and seconds must be below 60"
        ));
    }
    Ok(days
        .checked_mul(86_400)
        .and_then(|d| d.checked_add(h.checked_mul(3600)?))
        .and_then(|t| t.checked_add(m * 60 + s)))
}

/// `2d`, `1h30m`, … (units largest first); `None` when not understood,
/// `Some(None)` when it overflows.
fn units(t: &str) -> Option<Option<u64>> {
    let mut total = Some(0u64);
    let mut num = String::new();
    let mut last_rank = usize::MAX;
    for c in t.chars() {
        if c.is_ascii_digit() {
            num.push(c);
            continue;
        }
        let (mult, rank) = match c {
            'd' => (86_400, 3),
            'h' => (3600, 2),
            'm' => (60, 1),
            's' => (1, 0),
            _ => return None,
        };
        if num.is_empty() || rank >= last_rank {
            return None;
        }
        last_rank = rank;
        let n = num.parse::<u64>().ok();
        total = total.and_then(|t| n?.checked_mul(mult)?.checked_add(t));
        num.clear();
    }
    num.is_empty().then_some(total)
}

/// Formats seconds as `HH:MM:SS` (hours may exceed 24).
pub fn format_walltime(seconds: u64) -> String {
    format!(
        "{:02}:{:02}:{:02}",
        seconds / 3600,
        (seconds / 60) % 60,
        seconds % 60
    )
}

/// Parses a memory size into MiB, rounding up: `K`, `M`, `G`, `T` and `KiB` …
/// `TiB` are powers of 1024; `KB`, `MB`, `GB`, `TB` are powers of 1000.
pub fn parse_memory(text: &str) -> Result<u64, String> {
    let t = text.trim();
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let unit = unit.trim();
    let bad = || format!("memory '{text}' is not understood: write e.g. 512M, 4G, 4GiB or 1500MB");
    let value: f64 = num.parse().map_err(|_| bad())?;
    if unit.is_empty() {
        return Err(format!(
            "memory '{text}' has no unit: write {num}M (MiB) or {num}G (GiB)"
        ));
    }
    let bytes_per = match unit {
        "K" | "k" | "KiB" => 1024f64,
        "M" | "MiB" => 1024f64.powi(2),
        "G" | "GiB" => 1024f64.powi(3),
        "T" | "TiB" => 1024f64.powi(4),
        "KB" | "kB" => 1e3,
        "MB" => 1e6,
        "GB" => 1e9,
        "TB" => 1e12,
        _ => return Err(bad()),
    };
    let mib = value * bytes_per / 1024f64.powi(2);
    if mib <= 0.0 {
        return Err(format!("memory '{text}' is zero"));
    }
    Ok(mib.ceil() as u64)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn walltimes() {
        assert_eq!(parse_walltime("90s"), Ok(90));
        assert_eq!(parse_walltime("30m"), Ok(1800));
        assert_eq!(parse_walltime("4h"), Ok(14_400));
        assert_eq!(parse_walltime("1h30m"), Ok(5400));
        assert_eq!(parse_walltime("2d"), Ok(172_800));
        assert_eq!(parse_walltime("01:30:00"), Ok(5400));
        assert_eq!(parse_walltime("10:00"), Ok(600));
        assert_eq!(parse_walltime("1-12:00:00"), Ok(129_600));
        assert!(parse_walltime("30").is_err());
        assert!(parse_walltime("30x").is_err());
        assert!(parse_walltime("30m1h").is_err());
        assert!(parse_walltime("00:61:00").is_err());
        assert!(parse_walltime("0s").is_err());
        assert_eq!(parse_walltime("99999999d"), Ok(99_999_999 * 86_400));
        assert!(parse_walltime("999999999999999999999d").is_err());
        assert!(parse_walltime("99999999999999999-00:00:00").is_err());
        assert_eq!(format_walltime(5400), "01:30:00");
        assert_eq!(format_walltime(129_600), "36:00:00");
    }

    #[test]
    fn memory() {
        assert_eq!(parse_memory("256M"), Ok(256));
        assert_eq!(parse_memory("4G"), Ok(4096));
        assert_eq!(parse_memory("4GiB"), Ok(4096));
        // 1500 MB = 1.5e9 bytes = 1430.51 MiB, rounded up
        assert_eq!(parse_memory("1500MB"), Ok(1431));
        assert_eq!(parse_memory("512K"), Ok(1));
        assert!(parse_memory("4").is_err());
        assert!(parse_memory("4Q").is_err());
        assert!(parse_memory("lots").is_err());
    }
}
