//! The `stages:` list: each stage's fields, its `after` references, and the
//! order that respects them.

use super::fields::{did_you_mean, Ctx, Fields};
use super::model::{Stage, StagePer};
use super::paths::confined_relative;
use super::safe_id;
use super::yaml::{Node, Pos, Value};
use std::path::{Path, PathBuf};

const STAGE_KEYS: &[&str] = &[
    "name", "per", "after", "template", "output", "frames", "vars",
];

/// A stage, where its name is, and each `after` entry with its position.
type StageAt = (Stage, Pos, Vec<(String, Pos)>);

/// A stage name and its `after` entries.
type Named = (String, Vec<(String, Pos)>);

/// Where the stage templates are, and whether the folder exists.
pub(super) struct Templates<'a> {
    pub dir: &'a Path,
    pub ok: bool,
}

/// Every stage, in dependency order (file order where free); on an error in the
/// `after` graph, in file order.
pub(super) fn stages(ctx: &mut Ctx, node: &Node, templates: &Templates) -> Vec<Stage> {
    let Some(items) = ctx.list(node, "stages") else {
        return Vec::new();
    };
    let mut stages: Vec<StageAt> = Vec::new();
    let mut broken: Vec<Named> = Vec::new();
    for item in items {
        let Some(f) = ctx.fields(item, "a stage", STAGE_KEYS) else {
            continue;
        };
        match stage(ctx, &f, templates) {
            Ok(s) => {
                if let Some((_, p0, _)) = stages.iter().find(|(x, _, _)| x.name == s.0.name) {
                    let (name, line) = (&s.0.name, p0.line);
                    ctx.error(
                        f.key_pos("name"),
                        format!("duplicate stage name '{name}' (first on line {line})"),
                        Some("every stage needs its own name".to_string()),
                    );
                    continue;
                }
                stages.push(s);
            }
            // Reported already (template or `per`); still check its `after`.
            Err(Some(named)) => broken.push(named),
            Err(None) => {}
        }
    }
    let ok = check_after(ctx, &stages, &broken);
    if !ok {
        return stages.into_iter().map(|(s, _, _)| s).collect();
    }
    ordered(ctx, stages)
}

/// One stage, or (when it has a name but another error) its name and `after`.
fn stage(ctx: &mut Ctx, f: &Fields, templates: &Templates) -> Result<StageAt, Option<Named>> {
    let name = f
        .require(ctx, "name", "this stage", "name: production")
        .and_then(|n| {
            let s = ctx.string(n, "stage name")?;
            safe_id(ctx, &s, n.pos, "stage name").then_some(s)
        });
    let what = format!("stage '{}'", name.as_deref().unwrap_or("?"));
    let per = match f.get("per") {
        None => Some(StagePer::Window),
        Some(n) => per(ctx, n, &what),
    };
    let after = f
        .get("after")
        .map_or_else(Vec::new, |n| after(ctx, n, &what));
    let template = f
        .require(ctx, "template", &what, "template: production.sh.tera")
        .and_then(|n| template(ctx, n, &what, templates));
    let output = f.get("output").and_then(|n| output(ctx, n, &what));
    let frames = f.get("frames").and_then(|n| frames(ctx, n));
    let vars = ctx.vars(f.get("vars"), &format!("vars of {what}"));
    let (Some(name), Some(per), Some((template, template_path))) = (name.clone(), per, template)
    else {
        return Err(name.map(|n| (n, after)));
    };
    let stage = Stage {
        name,
        per,
        after: after.iter().map(|(s, _)| s.clone()).collect(),
        template,
        template_path,
        output,
        frames,
        vars,
    };
    Ok((stage, f.key_pos("name"), after))
}

fn per(ctx: &mut Ctx, n: &Node, what: &str) -> Option<StagePer> {
    match ctx.string(n, "per").as_deref() {
        Some("leg") => Some(StagePer::Leg),
        Some("window") => Some(StagePer::Window),
        Some(other) => {
            let hint = did_you_mean(other, &["leg", "window"])
                .map(|s| format!("did you mean '{s}'?"))
                .unwrap_or_else(|| "use leg or window".into());
            ctx.error(
                n.pos,
                format!("per of {what} must be leg or window, not '{other}'"),
                Some(hint),
            );
            None
        }
        None => None,
    }
}

fn after(ctx: &mut Ctx, n: &Node, what: &str) -> Vec<(String, Pos)> {
    match &n.value {
        Value::Str(s) => vec![(s.clone(), n.pos)],
        Value::Seq(list) => list
            .iter()
            .filter_map(|a| ctx.string(a, "a stage name in after").map(|s| (s, a.pos)))
            .collect(),
        _ => {
            ctx.error(
                n.pos,
                format!(
                    "after of {what} must be a list of stage names, not {}",
                    n.kind()
                ),
                Some("e.g. after: [prepare]".to_string()),
            );
            Vec::new()
        }
    }
}

fn template(
    ctx: &mut Ctx,
    n: &Node,
    what: &str,
    templates: &Templates,
) -> Option<(String, PathBuf)> {
    let s = ctx.string(n, "template")?;
    if let Err(e) = confined_relative(&s) {
        ctx.error(
            n.pos,
            format!("template of {what}: {e}"),
            Some("give a file inside the template folder, relative to it".to_string()),
        );
        return None;
    }
    let p = templates.dir.join(&s);
    if templates.ok && !p.is_file() {
        ctx.error(
            n.pos,
            format!("template {} of {what} does not exist", p.display()),
            Some(format!(
                "create it, or fix the name (the template folder is {})",
                templates.dir.display()
            )),
        );
        return None;
    }
    Some((s, p))
}

fn output(ctx: &mut Ctx, n: &Node, what: &str) -> Option<String> {
    let s = ctx.string(n, "output")?;
    match confined_relative(&s) {
        Ok(()) => Some(s),
        Err(e) => {
            ctx.error(
                n.pos,
                format!("output of {what}: {e}"),
                Some("name a file inside the task directory, e.g. output: window.tsv".to_string()),
            );
            None
        }
    }
}

fn frames(ctx: &mut Ctx, n: &Node) -> Option<u64> {
    match ctx.uint(n, "frames") {
        Some(0) => {
            ctx.error(
                n.pos,
                "frames must be at least 1",
                Some("leave frames out to accept any number".to_string()),
            );
            None
        }
        v => v,
    }
}

/// Every `after` entry names another stage; false when one does not.
fn check_after(ctx: &mut Ctx, stages: &[StageAt], broken: &[Named]) -> bool {
    let mut names: Vec<&str> = stages.iter().map(|(s, _, _)| s.name.as_str()).collect();
    names.extend(broken.iter().map(|(n, _)| n.as_str()));
    let mut ok = broken.is_empty();
    let edges = stages
        .iter()
        .map(|(s, _, after)| (s.name.as_str(), after))
        .chain(broken.iter().map(|(n, after)| (n.as_str(), after)));
    for (stage_name, after) in edges {
        for (a, p) in after {
            if !names.contains(&a.as_str()) {
                let hint = did_you_mean(a, &names)
                    .map(|c| format!("did you mean '{c}'?"))
                    .unwrap_or_else(|| format!("stages are: {}", names.join(", ")));
                ctx.error(
                    *p,
                    format!("stage '{stage_name}' runs after unknown stage '{a}'"),
                    Some(hint),
                );
                ok = false;
            } else if a == stage_name {
                ctx.error(
                    *p,
                    format!("stage '{stage_name}' runs after itself"),
                    Some("remove it from its own after list".to_string()),
                );
                ok = false;
            }
        }
    }
    ok
}

/// Kahn's algorithm, file order among the ready ones; a cycle is an error.
fn ordered(ctx: &mut Ctx, stages: Vec<StageAt>) -> Vec<Stage> {
    let names: Vec<String> = stages.iter().map(|(s, _, _)| s.name.clone()).collect();
    let mut done: Vec<bool> = vec![false; stages.len()];
    let mut order = Vec::new();
    while let Some(i) = (0..stages.len()).find(|&i| {
        !done[i]
            && stages[i]
                .0
                .after
                .iter()
                .all(|a| names.iter().position(|n| n == a).is_some_and(|j| done[j]))
    }) {
        done[i] = true;
        order.push(i);
    }
    if order.len() < stages.len() {
        let stuck: Vec<&str> = (0..stages.len())
            .filter(|&i| !done[i])
            .map(|i| names[i].as_str())
            .collect();
        let first = done.iter().position(|d| !d).unwrap_or(0);
        let pos = stages[first].2.first().map_or(stages[first].1, |(_, p)| *p);
        ctx.error(
            pos,
            format!("stages form a cycle through 'after': {}", stuck.join(" → ")),
            Some("a stage cannot wait, directly or not, for itself: break the loop".to_string()),
        );
        return stages.into_iter().map(|(s, _, _)| s).collect();
    }
    let mut by_index: Vec<Option<Stage>> = stages.into_iter().map(|(s, _, _)| Some(s)).collect();
    order
        .into_iter()
        .filter_map(|i| by_index[i].take())
        .collect()
}
