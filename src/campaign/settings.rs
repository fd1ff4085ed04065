//! The sections whose types live elsewhere (`scheduler:`, `reader:`,
//! `analysis:`), read typed through [`de`](super::de), then range-checked.

use super::fields::{did_you_mean, Ctx};
use super::model::Stage;
use super::model::StagePer;
use super::paths::confined_relative;
use super::yaml::{Node, Value};
use crate::collect::ReaderConfig;
use crate::estimate::AnalysisOptions;
use crate::scheduler::{kind_names, SchedulerConfig, SchedulerKind};
use serde::de::DeserializeOwned;
use std::path::Path;

/// Longest poll interval, in seconds (an hour: slower polling only delays the
/// campaign).
const MAX_POLL_S: f64 = 3600.0;

/// A section read as `T`; absent or empty gives the default.
pub(super) fn section<T: DeserializeOwned + Default>(
    ctx: &mut Ctx,
    node: Option<&Node>,
    what: &str,
) -> T {
    match node {
        Some(n) if n.value != Value::Null => ctx.typed(n, what).unwrap_or_default(),
        _ => T::default(),
    }
}

/// A key's value in a mapping node.
pub(super) fn child<'n>(node: &'n Node, key: &str) -> Option<&'n Node> {
    match &node.value {
        Value::Map(entries) => entries
            .iter()
            .find(|(k, _)| k.as_str() == Some(key))
            .map(|(_, v)| v),
        _ => None,
    }
}

/// The `scheduler:` section: the kind checked against the scheduler module's own
/// list, the rest typed, then every setting range-checked.
pub(super) fn scheduler(
    ctx: &mut Ctx,
    node: Option<&Node>,
    templates_dir: &Path,
) -> SchedulerConfig {
    let Some(node) = node.filter(|n| n.value != Value::Null) else {
        return SchedulerConfig::default();
    };
    let mut node = node.clone();
    if let Value::Map(entries) = &mut node.value {
        if let Some(i) = entries.iter().position(|(k, _)| k.as_str() == Some("kind")) {
            if !known_kind(ctx, &entries[i].1) {
                entries.remove(i);
            }
        }
    }
    let Some(cfg) = ctx.typed::<SchedulerConfig>(&node, "scheduler") else {
        return SchedulerConfig::default();
    };
    check_scheduler(ctx, &node, &cfg, templates_dir);
    cfg
}

fn known_kind(ctx: &mut Ctx, v: &Node) -> bool {
    let names = kind_names();
    if matches!(v.as_str(), Some(s) if names.contains(&s)) {
        return true;
    }
    let shown = v.key_text();
    let hint = did_you_mean(&shown, &names)
        .map(|s| format!("did you mean '{s}'?"))
        .unwrap_or_else(|| format!("use one of: {}", names.join(", ")));
    ctx.error(
        v.pos,
        format!("unknown scheduler kind '{shown}'"),
        Some(hint),
    );
    false
}

fn check_scheduler(ctx: &mut Ctx, node: &Node, cfg: &SchedulerConfig, templates_dir: &Path) {
    if let Some(n) = child(node, "max_attempts") {
        ctx.in_range(n, "scheduler.max_attempts", cfg.max_attempts, 1, 100);
    }
    if let Some(n) = child(node, "poll_seconds") {
        // The local executor only looks at its own children; a batch scheduler's
        // controller is shared, so poll it at most once a second (common
        // practice, no source).
        let lo = if cfg.kind == SchedulerKind::LOCAL {
            0.1
        } else {
            1.0
        };
        ctx.in_range(
            n,
            "scheduler.poll_seconds",
            cfg.poll_seconds,
            lo,
            MAX_POLL_S,
        );
    }
    if let Some(n) = child(node, "walltime_factor") {
        ctx.in_range(
            n,
            "scheduler.walltime_factor",
            cfg.walltime_factor,
            1.0,
            10.0,
        );
    }
    if let (Some(n), Some(p)) = (child(node, "max_parallel"), cfg.max_parallel) {
        ctx.in_range(n, "scheduler.max_parallel", p, 1, 4096);
    }
    if let (Some(n), Some(g)) = (
        child(node, "marker_grace_seconds"),
        cfg.marker_grace_seconds,
    ) {
        ctx.in_range(n, "scheduler.marker_grace_seconds", g, 0, 86_400);
    }
    if let Some(n) = child(node, "command_timeout_seconds") {
        ctx.in_range(
            n,
            "scheduler.command_timeout_seconds",
            cfg.command_timeout_seconds,
            1,
            3600,
        );
    }
    if let Some(n) = child(node, "outage_wait_seconds") {
        ctx.in_range(
            n,
            "scheduler.outage_wait_seconds",
            cfg.outage_wait_seconds,
            0,
            7 * 86_400,
        );
    }
    if let (Some(n), Some(t)) = (child(node, "batch_template"), &cfg.batch_template) {
        batch_template(ctx, n, t, templates_dir);
    }
}

/// A batch template is a file inside the template folder, like a stage template.
fn batch_template(ctx: &mut Ctx, n: &Node, t: &str, templates_dir: &Path) {
    if let Err(e) = confined_relative(t) {
        ctx.error(
            n.pos,
            format!("scheduler.batch_template: {e}"),
            Some("give a file inside the template folder, relative to it".to_string()),
        );
    } else if templates_dir.is_dir() && !templates_dir.join(t).is_file() {
        ctx.error(
            n.pos,
            format!(
                "batch template {} does not exist",
                templates_dir.join(t).display()
            ),
            Some(format!(
                "create it, or fix the name (the template folder is {})",
                templates_dir.display()
            )),
        );
    }
}

/// The `reader:` section (the campaign's, or a leg's own).
pub(super) fn reader(ctx: &mut Ctx, node: &Node, what: &str) -> Option<ReaderConfig> {
    if node.value == Value::Null {
        return None;
    }
    ctx.typed(node, what)
}

/// The `analysis:` section, its stage checked against the stages.
pub(super) fn analysis(ctx: &mut Ctx, node: Option<&Node>, stages: &[Stage]) -> AnalysisOptions {
    let analysis: AnalysisOptions = section(ctx, node, "analysis");
    let (Some(stage), Some(n)) = (&analysis.stage, node) else {
        return analysis;
    };
    let pos = child(n, "stage").map_or(n.pos, |s| s.pos);
    match stages.iter().find(|s| &s.name == stage) {
        None => {
            let cands: Vec<&str> = stages.iter().map(|s| s.name.as_str()).collect();
            let hint = did_you_mean(stage, &cands)
                .map(|c| format!("did you mean '{c}'?"))
                .unwrap_or_else(|| format!("stages are: {}", cands.join(", ")));
            ctx.error(
                pos,
                format!("analysis.stage '{stage}' is not one of the stages"),
                Some(hint),
            );
        }
        Some(s) if s.per != StagePer::Window => ctx.error(
            pos,
            format!("analysis.stage '{stage}' runs per leg; only a per-window stage has window output to analyse"),
            Some("name a stage with per: window".to_string()),
        ),
        _ => {}
    }
    analysis
}
