//! A leg's `resources:` (range-checked) and `restraint:` (the core's
//! [`BoreschRestraint`], read typed, then checked where the analytic correction
//! is defined).

use super::fields::Ctx;
use super::model::{BoreschRestraint, Resources};
use super::quantity::{parse_memory, parse_walltime};
use super::settings::child;
use super::yaml::{Node, Value};
use serde::Deserialize;

/// Most CPU cores one task may ask for.
pub const MAX_CPUS: u32 = 100_000;
/// Most GPUs one task may ask for.
pub const MAX_GPUS: u32 = 1024;
/// Most memory one task may ask for, in MiB (64 TiB).
pub const MAX_MEMORY_MB: u64 = 64 * 1024 * 1024;
/// Longest walltime of one task, in seconds (365 days).
pub const MAX_WALLTIME_S: u64 = 365 * 86_400;

/// The `resources:` mapping as written.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct ResourcesFile {
    #[serde(default)]
    cpus: Option<u32>,
    #[serde(default)]
    gpus: Option<u32>,
    #[serde(default)]
    memory: Option<Quantity>,
    #[serde(default)]
    walltime: Option<Quantity>,
}

/// A size or duration as written: `4G`, `4h`, `01:30:00` (or a bare integer, which
/// the parsers then reject for lacking a unit).
struct Quantity(String);

impl<'de> Deserialize<'de> for Quantity {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl serde::de::Visitor<'_> for V {
            type Value = Quantity;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("a quantity with its unit, such as 4G or 4h")
            }
            fn visit_str<E>(self, s: &str) -> Result<Quantity, E> {
                Ok(Quantity(s.to_string()))
            }
            fn visit_i64<E>(self, i: i64) -> Result<Quantity, E> {
                Ok(Quantity(i.to_string()))
            }
            fn visit_u64<E>(self, i: u64) -> Result<Quantity, E> {
                Ok(Quantity(i.to_string()))
            }
        }
        d.deserialize_any(V)
    }
}

/// A leg's resources; absent keys take the defaults (1 CPU, no GPU, the
/// scheduler's memory default, 1 h).
pub(super) fn resources(ctx: &mut Ctx, node: Option<&Node>, what: &str) -> Resources {
    let mut r = Resources {
        cpus: 1,
        gpus: 0,
        memory_mb: 0,
        walltime_s: 3600,
    };
    let Some(node) = node.filter(|n| n.value != Value::Null) else {
        return r;
    };
    let w = format!("resources of {what}");
    let Some(file) = ctx.typed::<ResourcesFile>(node, &w) else {
        return r;
    };
    let at = |key: &str| child(node, key).unwrap_or(node);
    if let Some(c) = file.cpus {
        r.cpus = ctx
            .in_range(at("cpus"), &format!("cpus of {what}"), c, 1, MAX_CPUS)
            .unwrap_or(1);
    }
    if let Some(g) = file.gpus {
        r.gpus = ctx
            .in_range(at("gpus"), &format!("gpus of {what}"), g, 0, MAX_GPUS)
            .unwrap_or(0);
    }
    if let Some(Quantity(t)) = file.memory {
        let n = at("memory");
        match parse_memory(&t) {
            Ok(m) if m <= MAX_MEMORY_MB => r.memory_mb = m,
            Ok(_) => ctx.error(
                n.pos,
                format!("memory '{t}' of {what} is more than any node has"),
                Some("allowed: at most 64T".to_string()),
            ),
            Err(e) => ctx.error(
                n.pos,
                e,
                Some(
                    "K, M, G, T (and KiB…TiB) are powers of 1024; KB, MB, GB, TB powers of 1000"
                        .to_string(),
                ),
            ),
        }
    }
    if let Some(Quantity(t)) = file.walltime {
        let n = at("walltime");
        match parse_walltime(&t) {
            Ok(s) if s <= MAX_WALLTIME_S => r.walltime_s = s,
            Ok(_) => ctx.error(
                n.pos,
                format!("walltime '{t}' of {what} is longer than a year"),
                Some("allowed: 1s to 365d; split long runs into restartable stages".to_string()),
            ),
            Err(e) => ctx.error(
                n.pos,
                e,
                Some("units: d, h, m, s (largest first), or HH:MM:SS / D-HH:MM:SS".to_string()),
            ),
        }
    }
    r
}

/// A leg's `restraint:`: `kind: boresch` and the fields of the core's
/// [`BoreschRestraint`], each where the analytic correction is defined.
pub(super) fn restraint(ctx: &mut Ctx, node: &Node, what: &str) -> Option<BoreschRestraint> {
    let w = format!("restraint of {what}");
    let Value::Map(entries) = &node.value else {
        return ctx.typed::<BoreschRestraint>(node, &w);
    };
    let kind_ok = match child(node, "kind") {
        None => {
            ctx.error(
                node.pos,
                format!("{w} has no 'kind'"),
                Some("add it, e.g. kind: boresch".to_string()),
            );
            false
        }
        Some(k) => match ctx.string(k, "restraint kind").as_deref() {
            Some("boresch") => true,
            Some(other) => {
                ctx.error(
                    k.pos,
                    format!("unknown restraint kind '{other}'"),
                    Some("the only kind is boresch".to_string()),
                );
                false
            }
            None => false,
        },
    };
    let mut fields = node.clone();
    fields.value = Value::Map(
        entries
            .iter()
            .filter(|(k, _)| k.as_str() != Some("kind"))
            .cloned()
            .collect(),
    );
    let r = ctx.typed::<BoreschRestraint>(&fields, &w)?;
    let ok = restraint_in_range(ctx, node, &r);
    (kind_ok && ok).then_some(r)
}

/// The restraint's parameters checked with the core's own rule
/// (`BoreschRestraint::validate`), the one `collect` applies, so a restraint
/// `check` accepts is one the correction can be computed for.
fn restraint_in_range(ctx: &mut Ctx, node: &Node, r: &BoreschRestraint) -> bool {
    let Err(e) = r.validate() else {
        return true;
    };
    let key = e.parameter().map(|p| p.field());
    let pos = key.and_then(|k| child(node, k)).map_or(node.pos, |n| n.pos);
    let hint = match key {
        Some(k) if k.starts_with("k_") => "force constants must be positive: a zero one leaves that degree of freedom free, and the correction is not defined",
        Some(k) if k.starts_with("theta") => "reference angles lie strictly between 0 and 180 degrees (sin θ = 0 at the ends)",
        _ => "the reference distance must be positive",
    };
    ctx.error(pos, format!("restraint: {e}"), Some(hint.to_string()));
    false
}
