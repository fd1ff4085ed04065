//! From the campaign file's text to a validated [`Campaign`], collecting every
//! problem with its position.

use super::diagnostic::Diagnostic;
use super::fields::{did_you_mean, Ctx, Fields};
use super::ids::{unsafe_reason, ID_HINT};
use super::lambdas::{check_values, LambdaSchedule, Spacing};
use super::model::*;
use super::quantity::{parse_memory, parse_walltime};
use super::tables::{read_csv, row_vars};
use super::yaml::{self, Node, Pos, Value};
use crate::plan::Resources;
use crate::units::EnergyUnit;
use sha2::{Digest, Sha256};
use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::{Component, Path, PathBuf};

const TOP_KEYS: &[&str] = &[
    "campaign",
    "seed",
    "temperature_K",
    "unit",
    "kind",
    "root",
    "templates",
    "scheduler",
    "vars",
    "ligands",
    "edges",
    "reference_ligand",
    "legs",
    "stages",
    "reader",
    "analysis",
    "experiment",
];
const LEG_KEYS: &[&str] = &[
    "sign",
    "lambdas",
    "replicas",
    "resources",
    "vars",
    "correction",
    "restraint",
];
const STAGE_KEYS: &[&str] = &[
    "name", "per", "after", "template", "output", "frames", "vars",
];
const RESOURCE_KEYS: &[&str] = &["cpus", "gpus", "memory", "walltime"];
const RESTRAINT_KEYS: &[&str] = &[
    "kind",
    "r0",
    "theta_a",
    "theta_b",
    "k_r",
    "k_theta_a",
    "k_theta_b",
    "k_phi_a",
    "k_phi_b",
    "k_phi_c",
];
const SCHEDULER_KINDS: &[&str] = &["local", "slurm", "pbs", "sge", "lsf"];

/// Lexically resolves `.` and `..` in an absolute path.
pub fn normalize(path: &Path) -> PathBuf {
    let mut out = PathBuf::new();
    for c in path.components() {
        match c {
            Component::ParentDir => {
                out.pop();
            }
            Component::CurDir => {}
            other => out.push(other.as_os_str()),
        }
    }
    out
}

/// `path` made absolute against `base`, `.`/`..` resolved.
pub fn resolve(base: &Path, path: &Path) -> PathBuf {
    if path.is_absolute() {
        normalize(path)
    } else {
        normalize(&base.join(path))
    }
}

/// Whether a relative path stays inside the folder it is relative to: only plain
/// components, each a safe name.
pub fn confined_relative(path: &str) -> Result<(), String> {
    let p = Path::new(path);
    if p.is_absolute() {
        return Err(format!("'{path}' is absolute"));
    }
    for c in p.components() {
        match c {
            Component::Normal(s) => {
                let s = s.to_string_lossy();
                if let Some(why) = unsafe_reason(&s) {
                    return Err(format!(
                        "'{path}' has a part '{s}' that is not a safe name: {why}"
                    ));
                }
            }
            _ => return Err(format!("'{path}' leaves its folder (uses '..' or '.')")),
        }
    }
    if path.is_empty() {
        return Err("the path is empty".into());
    }
    Ok(())
}

/// Everything `parse` needs from outside.
pub struct Input<'a> {
    /// the campaign file, absolute
    pub file: &'a Path,
    /// its text
    pub text: &'a str,
    /// `--root`, absolute
    pub root_override: Option<&'a Path>,
}

struct Parsed {
    campaign: Campaign,
    diags: Vec<Diagnostic>,
}

/// Parses and validates; `Err` holds every diagnostic when any is an error.
pub fn parse(input: &Input) -> Result<(Campaign, Vec<Diagnostic>), Vec<Diagnostic>> {
    let mut ctx = Ctx::new(input.file);
    let root = match yaml::parse(input.text) {
        Ok(n) => n,
        Err(e) => {
            ctx.error(
                e.pos,
                format!("this is not valid YAML: {}", e.message),
                Some("check indentation, colons after keys and closing brackets".to_string()),
            );
            return Err(ctx.diags);
        }
    };
    let Parsed { campaign, diags } = build(&mut ctx, &root, input);
    let mut all = ctx.diags;
    all.extend(diags);
    if all.iter().any(Diagnostic::is_error) {
        all.sort_by(|a, b| {
            (a.file != input.file, &a.file, a.line, a.col).cmp(&(
                b.file != input.file,
                &b.file,
                b.line,
                b.col,
            ))
        });
        Err(all)
    } else {
        Ok((campaign, all))
    }
}

fn build(ctx: &mut Ctx, root: &Node, input: &Input) -> Parsed {
    let dir = input.file.parent().unwrap_or(Path::new("/")).to_path_buf();
    let mut extra: Vec<Diagnostic> = Vec::new();
    let mut hasher = Sha256::new();
    hasher.update(env!("CARGO_PKG_VERSION").as_bytes());
    hasher.update(input.text.as_bytes());

    let top = match ctx.fields(root, "the campaign file", TOP_KEYS) {
        Some(f) => f,
        None => {
            return Parsed {
                campaign: empty_campaign(input.file, &dir),
                diags: extra,
            }
        }
    };

    let name = match top.require(ctx, "campaign", "the campaign file", "campaign: my-series") {
        Some(n) => ctx.string(n, "campaign (the name)").and_then(|s| {
            if let Some(why) = unsafe_reason(&s) {
                ctx.error(
                    n.pos,
                    format!("campaign name '{s}' is not a safe id: {why}"),
                    Some(ID_HINT.to_string()),
                );
                None
            } else {
                Some(s)
            }
        }),
        None => None,
    }
    .unwrap_or_else(|| "campaign".into());

    let seed = top
        .get("seed")
        .and_then(|n| ctx.uint(n, "seed"))
        .unwrap_or(0);
    let temperature_k = match top.get("temperature_K") {
        Some(n) => match ctx.number(n, "temperature_K") {
            Some(t) if t > 0.0 => t,
            Some(t) => {
                ctx.error(
                    n.pos,
                    format!("temperature_K must be above 0 K, not {t}"),
                    Some("e.g. temperature_K: 298.15".to_string()),
                );
                298.15
            }
            None => 298.15,
        },
        None => 298.15,
    };
    let unit = match top.get("unit") {
        Some(n) => match ctx.string(n, "unit").as_deref() {
            Some("kcal/mol") => EnergyUnit::KcalPerMol,
            Some("kJ/mol") | Some("kj/mol") => EnergyUnit::KjPerMol,
            Some(other) => {
                ctx.error(
                    n.pos,
                    format!("unknown unit '{other}'"),
                    Some("use kcal/mol or kJ/mol".to_string()),
                );
                EnergyUnit::KcalPerMol
            }
            None => EnergyUnit::KcalPerMol,
        },
        None => EnergyUnit::KcalPerMol,
    };

    let root_dir = match (input.root_override, top.get("root")) {
        (Some(r), _) => normalize(r),
        (None, Some(n)) => ctx
            .string(n, "root")
            .map(|s| resolve(&dir, Path::new(&s)))
            .unwrap_or_else(|| dir.join(&name)),
        (None, None) => dir.join(&name),
    };
    if input.file.starts_with(&root_dir) {
        ctx.error(
            top.key_pos("root"),
            format!("root {} holds the campaign file itself", root_dir.display()),
            Some("give the tree a folder of its own, e.g. root: runs".to_string()),
        );
    }

    let templates_dir = match top.get("templates") {
        Some(n) => ctx
            .string(n, "templates")
            .map(|s| resolve(&dir, Path::new(&s)))
            .unwrap_or_else(|| dir.join("templates")),
        None => dir.join("templates"),
    };
    let templates_ok = templates_dir.is_dir();
    if !templates_ok {
        ctx.error(
            top.key_pos("templates"),
            format!("template folder {} does not exist", templates_dir.display()),
            Some("set templates: to the folder holding your stage templates, relative to the campaign file".to_string()),
        );
    }

    let scheduler = parse_scheduler(ctx, top.get("scheduler"));
    let vars = ctx.vars(top.get("vars"), "vars");

    // Ligands.
    let ligands = match top.require(ctx, "ligands", "the campaign file", "ligands: ligands.csv") {
        Some(n) => parse_ligands(ctx, n, &dir, &mut extra, &mut hasher),
        None => Vec::new(),
    };
    let ligand_ids: HashSet<&str> = ligands.iter().map(|l| l.id.as_str()).collect();

    // Edges and kind.
    let edges_node = top.get("edges");
    let mut edges = match edges_node {
        Some(n) => parse_edges(ctx, n, &dir, &ligand_ids, &mut extra, &mut hasher),
        None => Vec::new(),
    };
    let kind = match top.get("kind") {
        Some(n) => match ctx.string(n, "kind").as_deref() {
            Some("relative") => Some(CampaignKind::Relative),
            Some("absolute") => Some(CampaignKind::Absolute),
            Some("solvation") => Some(CampaignKind::Solvation),
            Some(other) => {
                let hint = did_you_mean(other, &["relative", "absolute", "solvation"])
                    .map(|s| format!("did you mean '{s}'?"))
                    .unwrap_or_else(|| "use relative, absolute or solvation".into());
                ctx.error(
                    n.pos,
                    format!("unknown campaign kind '{other}'"),
                    Some(hint),
                );
                None
            }
            None => None,
        },
        None => None,
    };
    let kind = match (kind, edges_node.is_some()) {
        (Some(CampaignKind::Relative), false) => {
            ctx.error(
                top.key_pos("kind"),
                "a relative campaign needs edges",
                Some("add edges: [[a, b], …], or use kind: absolute".to_string()),
            );
            CampaignKind::Relative
        }
        (Some(k @ (CampaignKind::Absolute | CampaignKind::Solvation)), true) => {
            ctx.error(
                top.key_pos("edges"),
                format!(
                    "an {} campaign has no edges (its tasks are per ligand)",
                    k.as_str()
                ),
                Some("remove edges:, or use kind: relative".to_string()),
            );
            edges.clear();
            k
        }
        (Some(k), _) => k,
        (None, true) => CampaignKind::Relative,
        (None, false) => CampaignKind::Absolute,
    };
    if kind == CampaignKind::Relative && !edges.is_empty() {
        network_warnings(ctx, &ligands, &edges, top.key_pos("edges"));
    }

    let reference_ligand = top.get("reference_ligand").and_then(|n| {
        let s = ctx.string(n, "reference_ligand")?;
        if !ligand_ids.contains(s.as_str()) {
            let cands: Vec<&str> = ligand_ids.iter().copied().collect();
            let hint = did_you_mean(&s, &cands).map(|c| format!("did you mean '{c}'?"));
            ctx.error(
                n.pos,
                format!("reference_ligand '{s}' is not one of the ligands"),
                hint,
            );
            None
        } else {
            Some(s)
        }
    });

    // Legs.
    let legs = match top.require(
        ctx,
        "legs",
        "the campaign file",
        "legs: { complex: {…}, solvent: {…} }",
    ) {
        Some(n) => parse_legs(ctx, n),
        None => Vec::new(),
    };

    // Stages.
    let stages = match top.require(
        ctx,
        "stages",
        "the campaign file",
        "stages: [{ name: production, per: window, template: production.sh.tera }]",
    ) {
        Some(n) => parse_stages(ctx, n, &templates_dir, templates_ok),
        None => Vec::new(),
    };

    let reader = parse_shared::<crate::collect::ReaderConfig>(ctx, top.get("reader"), "reader");
    let analysis =
        parse_shared::<crate::estimate::AnalysisOptions>(ctx, top.get("analysis"), "analysis");
    if let (Some(stage), Some(n)) = (&analysis.stage, top.get("analysis")) {
        match stages.iter().find(|s| &s.name == stage) {
            None => {
                let cands: Vec<&str> = stages.iter().map(|s| s.name.as_str()).collect();
                let hint = did_you_mean(stage, &cands).map(|c| format!("did you mean '{c}'?"));
                ctx.error(n.pos, format!("analysis.stage '{stage}' is not one of the stages"), hint);
            }
            Some(s) if s.per != StagePer::Window => ctx.error(
                n.pos,
                format!("analysis.stage '{stage}' runs per leg; only a per-window stage has window output to analyse"),
                None,
            ),
            _ => {}
        }
    }
    if !stages.is_empty() && !stages.iter().any(|s| s.per == StagePer::Window) {
        ctx.warn(
            top.key_pos("stages"),
            "no stage runs per window: there will be nothing to analyse",
            None,
        );
    }

    let experiment = top.get("experiment").and_then(|n| {
        let s = ctx.string(n, "experiment")?;
        let p = resolve(&dir, Path::new(&s));
        if !p.is_file() {
            ctx.error(
                n.pos,
                format!("experiment file {} does not exist", p.display()),
                Some("give the path of the measured-affinities CSV relative to the campaign file, or remove experiment:".to_string()),
            );
        }
        Some(p)
    });

    // Templates: parse each with tera now, so that a typo is found before any write.
    let mut campaign = Campaign {
        name,
        file: input.file.to_path_buf(),
        dir: dir.clone(),
        root: root_dir,
        templates_dir,
        experiment,
        seed,
        temperature_k,
        unit,
        kind,
        scheduler,
        vars,
        ligands,
        edges,
        reference_ligand,
        legs,
        stages,
        reader,
        analysis,
        fingerprint: String::new(),
    };
    if templates_ok {
        match super::templates::template_files(&campaign.templates_dir) {
            Ok(files) => {
                for (name, path) in &files {
                    hasher.update(name.as_bytes());
                    if let Ok(bytes) = std::fs::read(path) {
                        hasher.update((bytes.len() as u64).to_le_bytes());
                        hasher.update(&bytes);
                    }
                }
            }
            Err(e) => ctx.error(Pos::default(), e, None),
        }
        if let Err(diags) = super::templates::load_tera(&campaign) {
            extra.extend(diags);
        }
    }
    hasher.update(campaign.root.to_string_lossy().as_bytes());
    campaign.fingerprint = format!("{:x}", hasher.finalize());
    Parsed {
        campaign,
        diags: extra,
    }
}

fn empty_campaign(file: &Path, dir: &Path) -> Campaign {
    Campaign {
        name: String::new(),
        file: file.to_path_buf(),
        dir: dir.to_path_buf(),
        root: dir.to_path_buf(),
        templates_dir: dir.to_path_buf(),
        experiment: None,
        seed: 0,
        temperature_k: 298.15,
        unit: EnergyUnit::KcalPerMol,
        kind: CampaignKind::Relative,
        scheduler: Default::default(),
        vars: Default::default(),
        ligands: vec![],
        edges: vec![],
        reference_ligand: None,
        legs: vec![],
        stages: vec![],
        reader: Default::default(),
        analysis: Default::default(),
        fingerprint: String::new(),
    }
}

fn safe_id(ctx: &mut Ctx, id: &str, pos: Pos, what: &str) -> bool {
    match unsafe_reason(id) {
        Some(why) => {
            ctx.error(
                pos,
                format!("{what} '{id}' is not a safe id: {why}"),
                Some(ID_HINT.to_string()),
            );
            false
        }
        None => true,
    }
}

fn parse_scheduler(ctx: &mut Ctx, node: Option<&Node>) -> crate::scheduler::SchedulerConfig {
    let Some(node) = node else {
        return Default::default();
    };
    let mut node = node.clone();
    if let Value::Map(entries) = &mut node.value {
        if let Some(i) = entries.iter().position(|(k, _)| k.as_str() == Some("kind")) {
            let v = &entries[i].1;
            let ok = matches!(v.as_str(), Some(s) if SCHEDULER_KINDS.contains(&s));
            if !ok {
                let shown = v.key_text();
                let hint = did_you_mean(&shown, SCHEDULER_KINDS)
                    .map(|s| format!("did you mean '{s}'?"))
                    .unwrap_or_else(|| format!("use one of: {}", SCHEDULER_KINDS.join(", ")));
                ctx.error(
                    v.pos,
                    format!("unknown scheduler kind '{shown}'"),
                    Some(hint),
                );
                entries.remove(i);
            }
        }
    }
    parse_shared(ctx, Some(&node), "scheduler")
}

/// Deserialises a section whose type lives in another module, pointing at the
/// offending key where serde names one.
fn parse_shared<T: serde::de::DeserializeOwned + Default>(
    ctx: &mut Ctx,
    node: Option<&Node>,
    what: &str,
) -> T {
    let Some(node) = node else {
        return T::default();
    };
    if node.value == Value::Null {
        return T::default();
    }
    match serde_json::from_value::<T>(node.to_json()) {
        Ok(v) => v,
        Err(e) => {
            let msg = e.to_string();
            let msg = msg.split(" at line ").next().unwrap_or(&msg).to_string();
            let quoted = between_backticks(&msg);
            let (pos, hint) = match (
                &quoted,
                msg.starts_with("unknown field") || msg.starts_with("unknown variant"),
            ) {
                (Some(word), true) => {
                    let expected: Vec<String> = msg
                        .split("expected")
                        .nth(1)
                        .map(|r| {
                            r.split('`')
                                .skip(1)
                                .step_by(2)
                                .map(str::to_string)
                                .collect()
                        })
                        .unwrap_or_default();
                    let refs: Vec<&str> = expected.iter().map(String::as_str).collect();
                    let hint = did_you_mean(word, &refs)
                        .map(|s| format!("did you mean '{s}'?"))
                        .or_else(|| {
                            (!refs.is_empty()).then(|| format!("use one of: {}", refs.join(", ")))
                        });
                    (find_text(node, word).unwrap_or(node.pos), hint)
                }
                _ => (locate_bad_key::<T>(node).unwrap_or(node.pos), None),
            };
            let hint = hint.or_else(|| {
                Some(format!(
                    "see the {what} table in the README's campaign section"
                ))
            });
            ctx.error(pos, format!("in {what}: {msg}"), hint);
            T::default()
        }
    }
}

/// The value of the first key that fails to deserialise on its own (missing
/// other fields aside), for a type error serde reports without a position.
fn locate_bad_key<T: serde::de::DeserializeOwned>(node: &Node) -> Option<Pos> {
    let Value::Map(entries) = &node.value else {
        return None;
    };
    entries.iter().find_map(|(k, v)| {
        let mut one = serde_json::Map::new();
        one.insert(k.key_text(), v.to_json());
        match serde_json::from_value::<T>(serde_json::Value::Object(one)) {
            Err(e) if !e.to_string().starts_with("missing field") => Some(v.pos),
            _ => None,
        }
    })
}

fn between_backticks(s: &str) -> Option<String> {
    let mut it = s.split('`');
    it.next()?;
    it.next().map(str::to_string)
}

fn find_text(node: &Node, word: &str) -> Option<Pos> {
    match &node.value {
        Value::Str(s) if s == word => Some(node.pos),
        Value::Seq(items) => items.iter().find_map(|n| find_text(n, word)),
        Value::Map(entries) => entries.iter().find_map(|(k, v)| {
            if k.as_str() == Some(word) {
                Some(k.pos)
            } else {
                find_text(v, word)
            }
        }),
        _ => None,
    }
}

fn table_path(ctx: &mut Ctx, node: &Node, dir: &Path, what: &str) -> Option<PathBuf> {
    let s = ctx.string(node, what)?;
    let p = resolve(dir, Path::new(&s));
    if !p.is_file() {
        ctx.error(
            node.pos,
            format!("{what} file {} does not exist", p.display()),
            Some("give the path relative to the campaign file".to_string()),
        );
        return None;
    }
    Some(p)
}

fn parse_ligands(
    ctx: &mut Ctx,
    node: &Node,
    dir: &Path,
    extra: &mut Vec<Diagnostic>,
    hasher: &mut Sha256,
) -> Vec<Ligand> {
    let mut out: Vec<(Ligand, Pos, PathBuf)> = Vec::new();
    match &node.value {
        Value::Str(_) => {
            let Some(path) = table_path(ctx, node, dir, "ligands") else {
                return Vec::new();
            };
            if let Ok(bytes) = std::fs::read(&path) {
                hasher.update(&bytes);
            }
            let mut fctx = Ctx::new(&path);
            if is_yaml(&path) {
                if let Some(root) = read_yaml_file(&mut fctx, &path) {
                    ligand_list(&mut fctx, &root, &mut out);
                }
            } else if let Some(rows) = read_csv(&mut fctx, &path, &["id"]) {
                for row in rows {
                    let pos = Pos {
                        line: row.line,
                        col: 1,
                    };
                    let Some(id) = row
                        .cells
                        .iter()
                        .find(|(h, _)| h == "id")
                        .map(|(_, c)| c.clone())
                    else {
                        fctx.error(
                            pos,
                            "this row has no id",
                            Some("fill in the id column".to_string()),
                        );
                        continue;
                    };
                    if safe_id(&mut fctx, &id, pos, "ligand id") {
                        out.push((
                            Ligand {
                                id,
                                vars: row_vars(&row, &["id"]),
                            },
                            pos,
                            path.clone(),
                        ));
                    }
                }
            }
            extra.extend(fctx.diags);
        }
        Value::Seq(_) => ligand_list(ctx, node, &mut out),
        _ => ctx.error(
            node.pos,
            format!(
                "ligands must be a list or the path of a CSV/YAML file, not {}",
                node.kind()
            ),
            Some(
                "e.g. ligands: [{ id: lig-1 }, { id: lig-2 }] or ligands: ligands.csv".to_string(),
            ),
        ),
    }
    let mut seen: HashMap<String, (PathBuf, Pos)> = HashMap::new();
    let mut ligands = Vec::new();
    for (lig, pos, file) in out {
        if let Some((f0, p0)) = seen.get(&lig.id) {
            extra.push(Diagnostic {
                severity: super::diagnostic::Severity::Error,
                file: file.clone(),
                line: pos.line,
                col: pos.col,
                message: format!(
                    "duplicate ligand id '{}' (first at {}:{})",
                    lig.id,
                    f0.display(),
                    p0.line
                ),
                hint: Some("every ligand needs its own id".to_string()),
            });
            continue;
        }
        seen.insert(lig.id.clone(), (file, pos));
        ligands.push(lig);
    }
    if ligands.is_empty() && !ctx.has_errors() && extra.is_empty() {
        ctx.error(
            node.pos,
            "there are no ligands",
            Some("list at least one ligand".to_string()),
        );
    }
    ligands
}

fn is_yaml(path: &Path) -> bool {
    matches!(
        path.extension().and_then(|e| e.to_str()),
        Some("yaml" | "yml")
    )
}

fn read_yaml_file(ctx: &mut Ctx, path: &Path) -> Option<Node> {
    let text = match std::fs::read_to_string(path) {
        Ok(t) => t,
        Err(e) => {
            ctx.error(Pos::default(), format!("cannot read: {e}"), None);
            return None;
        }
    };
    match yaml::parse(&text) {
        Ok(n) => Some(n),
        Err(e) => {
            ctx.error(
                e.pos,
                format!("this is not valid YAML: {}", e.message),
                None,
            );
            None
        }
    }
}

fn ligand_list(ctx: &mut Ctx, node: &Node, out: &mut Vec<(Ligand, Pos, PathBuf)>) {
    let Some(items) = ctx.list(node, "ligands") else {
        return;
    };
    for item in items {
        let (id, vars) = match &item.value {
            Value::Str(s) => (Some(s.clone()), Default::default()),
            Value::Map(_) => {
                let Some(f) = ctx.fields(item, "a ligand", &["id", "vars"]) else {
                    continue;
                };
                let id = f
                    .require(ctx, "id", "this ligand", "id: lig-1")
                    .and_then(|n| ctx.string(n, "ligand id"));
                (id, ctx.vars(f.get("vars"), "ligand vars"))
            }
            _ => {
                ctx.error(
                    item.pos,
                    format!(
                        "a ligand must be an id or {{id, vars}}, not {}",
                        item.kind()
                    ),
                    None,
                );
                continue;
            }
        };
        if let Some(id) = id {
            if safe_id(ctx, &id, item.pos, "ligand id") {
                out.push((Ligand { id, vars }, item.pos, ctx.file.clone()));
            }
        }
    }
}

fn parse_edges(
    ctx: &mut Ctx,
    node: &Node,
    dir: &Path,
    ligands: &HashSet<&str>,
    extra: &mut Vec<Diagnostic>,
    hasher: &mut Sha256,
) -> Vec<Edge> {
    let mut raw: Vec<(String, Pos, String, Pos, Vars)> = Vec::new();
    let mut fctx_holder: Option<Ctx> = None;
    match &node.value {
        Value::Str(_) => {
            let Some(path) = table_path(ctx, node, dir, "edges") else {
                return Vec::new();
            };
            if let Ok(bytes) = std::fs::read(&path) {
                hasher.update(&bytes);
            }
            let mut fctx = Ctx::new(&path);
            if let Some(rows) = read_csv(&mut fctx, &path, &["a", "b"]) {
                for row in rows {
                    let pos = Pos {
                        line: row.line,
                        col: 1,
                    };
                    let get = |k: &str| {
                        row.cells
                            .iter()
                            .find(|(h, _)| h == k)
                            .map(|(_, c)| c.clone())
                    };
                    match (get("a"), get("b")) {
                        (Some(a), Some(b)) => {
                            raw.push((a, pos, b, pos, row_vars(&row, &["a", "b"])))
                        }
                        _ => fctx.error(
                            pos,
                            "this edge lacks a or b",
                            Some("fill in both ligand ids".to_string()),
                        ),
                    }
                }
            }
            fctx_holder = Some(fctx);
        }
        Value::Seq(items) => {
            for item in items {
                match &item.value {
                    Value::Seq(pair) => {
                        if pair.len() != 2 {
                            ctx.error(
                                item.pos,
                                format!("an edge is a pair [a, b] of ligand ids; this one has {} entries", pair.len()),
                                None,
                            );
                            continue;
                        }
                        let a = ctx.string(&pair[0], "an edge's first ligand");
                        let b = ctx.string(&pair[1], "an edge's second ligand");
                        if let (Some(a), Some(b)) = (a, b) {
                            raw.push((a, pair[0].pos, b, pair[1].pos, Default::default()));
                        }
                    }
                    Value::Map(_) => {
                        let Some(f) = ctx.fields(item, "an edge", &["a", "b", "vars"]) else {
                            continue;
                        };
                        let a = f
                            .require(ctx, "a", "this edge", "a: lig-1")
                            .and_then(|n| ctx.string(n, "edge a").map(|s| (s, n.pos)));
                        let b = f
                            .require(ctx, "b", "this edge", "b: lig-2")
                            .and_then(|n| ctx.string(n, "edge b").map(|s| (s, n.pos)));
                        let vars = ctx.vars(f.get("vars"), "edge vars");
                        if let (Some((a, pa)), Some((b, pb))) = (a, b) {
                            raw.push((a, pa, b, pb, vars));
                        }
                    }
                    _ => ctx.error(
                        item.pos,
                        format!(
                            "an edge must be [a, b] or {{a, b, vars}}, not {}",
                            item.kind()
                        ),
                        None,
                    ),
                }
            }
        }
        _ => ctx.error(
            node.pos,
            format!(
                "edges must be a list or the path of a CSV file, not {}",
                node.kind()
            ),
            Some("e.g. edges: [[lig-1, lig-2]] or edges: edges.csv".to_string()),
        ),
    }
    let target: &mut Ctx = match fctx_holder.as_mut() {
        Some(f) => f,
        None => ctx,
    };
    let cands: Vec<&str> = ligands.iter().copied().collect();
    let mut seen: HashMap<(String, String), usize> = HashMap::new();
    let mut edges = Vec::new();
    for (a, pa, b, pb, vars) in raw {
        let mut ok = true;
        for (id, p) in [(&a, pa), (&b, pb)] {
            if !ligands.contains(id.as_str()) {
                let hint = did_you_mean(id, &cands)
                    .map(|c| format!("did you mean '{c}'?"))
                    .unwrap_or_else(|| "add the ligand to ligands, or fix the id".into());
                target.error(p, format!("edge names unknown ligand '{id}'"), Some(hint));
                ok = false;
            }
        }
        if a == b {
            target.error(
                pa,
                format!("edge {a}+{b} joins a ligand to itself"),
                Some("an edge needs two different ligands".to_string()),
            );
            ok = false;
        }
        if !ok {
            continue;
        }
        if let Some(line) = seen.get(&(a.clone(), b.clone())) {
            target.error(
                pa,
                format!("duplicate edge {a}+{b} (first on line {line})"),
                Some("remove the repeated edge".to_string()),
            );
            continue;
        }
        if let Some(line) = seen.get(&(b.clone(), a.clone())) {
            target.warn(
                pa,
                format!("edge {a}+{b} is the reverse of {b}+{a} (line {line}): both will be run"),
                Some(
                    "remove one unless you want the transformation run in both directions"
                        .to_string(),
                ),
            );
        }
        seen.insert((a.clone(), b.clone()), pa.line);
        edges.push(Edge { a, b, vars });
    }
    if let Some(f) = fctx_holder {
        extra.extend(f.diags);
    }
    edges
}

fn network_warnings(ctx: &mut Ctx, ligands: &[Ligand], edges: &[Edge], pos: Pos) {
    let index: HashMap<&str, usize> = ligands
        .iter()
        .enumerate()
        .map(|(i, l)| (l.id.as_str(), i))
        .collect();
    let mut parent: Vec<usize> = (0..ligands.len()).collect();
    fn find(p: &mut [usize], i: usize) -> usize {
        let mut r = i;
        while p[r] != r {
            r = p[r];
        }
        p[i] = r;
        r
    }
    for e in edges {
        let (a, b) = (index[e.a.as_str()], index[e.b.as_str()]);
        let (ra, rb) = (find(&mut parent, a), find(&mut parent, b));
        parent[ra] = rb;
    }
    let mut groups: BTreeMap<usize, Vec<&str>> = BTreeMap::new();
    for (i, l) in ligands.iter().enumerate() {
        let r = find(&mut parent, i);
        groups.entry(r).or_default().push(&l.id);
    }
    if groups.len() > 1 {
        let desc: Vec<String> = groups
            .values()
            .map(|g| {
                if g.len() > 4 {
                    format!("{{{}, … {} ligands}}", g[..3].join(", "), g.len())
                } else {
                    format!("{{{}}}", g.join(", "))
                }
            })
            .collect();
        ctx.warn(
            pos,
            format!(
                "the edge network is disconnected: {} separate groups {}",
                groups.len(),
                desc.join(" ")
            ),
            Some(
                "ligands in different groups cannot be compared; add edges that join them"
                    .to_string(),
            ),
        );
    }
}

fn parse_legs(ctx: &mut Ctx, node: &Node) -> Vec<Leg> {
    let Some(f) = ctx.fields(node, "legs", &[]) else {
        return Vec::new();
    };
    let mut legs = Vec::new();
    for (name, leg_node, key_pos) in f.iter() {
        let named_ok = safe_id(ctx, name, key_pos, "leg name");
        let what = format!("leg '{name}'");
        let Some(lf) = ctx.fields(leg_node, &what, LEG_KEYS) else {
            continue;
        };
        let sign = match lf.require(ctx, "sign", &what, "sign: 1 (or -1)") {
            Some(n) => match &n.value {
                Value::Int(1) => 1,
                Value::Int(-1) => -1,
                _ => {
                    ctx.error(
                        n.pos,
                        format!("sign of {what} must be 1 or -1, not {}", n.key_text()),
                        Some("+1 adds the leg's ΔG to the cycle, -1 subtracts it".to_string()),
                    );
                    1
                }
            },
            None => 1,
        };
        let lambdas = lf
            .require(
                ctx,
                "lambdas",
                &what,
                "lambdas: { count: 12, spacing: linear }",
            )
            .and_then(|n| parse_lambdas(ctx, n, &what));
        let replicas = match lf.get("replicas") {
            Some(n) => match &n.value {
                Value::Int(i) if *i >= 1 => *i as u32,
                _ => {
                    ctx.error(
                        n.pos,
                        format!(
                            "replicas of {what} must be a whole number ≥ 1, not {}",
                            n.key_text()
                        ),
                        Some("e.g. replicas: 3".to_string()),
                    );
                    1
                }
            },
            None => 1,
        };
        let resources = parse_resources(ctx, lf.get("resources"), &what);
        let vars = ctx.vars(lf.get("vars"), &format!("vars of {what}"));
        let correction = lf
            .get("correction")
            .and_then(|n| ctx.number(n, "correction"));
        let restraint = lf
            .get("restraint")
            .and_then(|n| parse_restraint(ctx, n, &what));
        if let (true, Some(lambdas)) = (named_ok, lambdas) {
            legs.push(Leg {
                name: name.to_string(),
                sign,
                lambdas,
                replicas,
                resources,
                vars,
                correction,
                restraint,
            });
        }
    }
    if legs.is_empty() && !ctx.has_errors() {
        ctx.error(
            node.pos,
            "there are no legs",
            Some("define at least one leg, e.g. legs: { complex: {…} }".to_string()),
        );
    }
    legs
}

fn number_list(ctx: &mut Ctx, node: &Node, what: &str) -> Option<(Vec<f64>, Vec<Pos>)> {
    let items = ctx.list(node, what)?;
    let mut vals = Vec::new();
    let mut poss = Vec::new();
    let mut ok = true;
    for it in items {
        match ctx.number(it, &format!("each λ of {what}")) {
            Some(v) => {
                vals.push(v);
                poss.push(it.pos);
            }
            None => ok = false,
        }
    }
    ok.then_some((vals, poss))
}

fn report_values(
    ctx: &mut Ctx,
    vals: &[f64],
    poss: &[Pos],
    list_pos: Pos,
    strict: bool,
    what: &str,
) -> bool {
    let problems = check_values(vals, strict);
    for (i, msg, hint) in &problems {
        let pos = i.map(|i| poss[i]).unwrap_or(list_pos);
        ctx.error(
            pos,
            format!("{msg} (λ schedule of {what})"),
            Some(hint.clone()),
        );
    }
    problems.is_empty()
}

fn parse_lambdas(ctx: &mut Ctx, node: &Node, what: &str) -> Option<LambdaSchedule> {
    match &node.value {
        Value::Seq(_) => {
            let (vals, poss) = number_list(ctx, node, &format!("lambdas of {what}"))?;
            report_values(ctx, &vals, &poss, node.pos, true, what)
                .then(|| LambdaSchedule::single(vals))
        }
        Value::Map(entries)
            if entries
                .iter()
                .any(|(k, _)| k.as_str() == Some("components")) =>
        {
            let f = ctx.fields(node, &format!("lambdas of {what}"), &["components"])?;
            let comps = f.get("components")?;
            let cf = ctx.fields(comps, &format!("λ components of {what}"), &[])?;
            let mut names = Vec::new();
            let mut values = Vec::new();
            let mut ok = true;
            let mut len: Option<(usize, String)> = None;
            for (name, list, kpos) in cf.iter() {
                ok &= safe_id(ctx, name, kpos, "λ component name");
                let Some((vals, poss)) =
                    number_list(ctx, list, &format!("component '{name}' of {what}"))
                else {
                    ok = false;
                    continue;
                };
                match &len {
                    Some((n, first)) if *n != vals.len() => {
                        ctx.error(
                            list.pos,
                            format!("λ component '{name}' of {what} has {} values but '{first}' has {n}", vals.len()),
                            Some("components are aligned lists: one value per state in each".to_string()),
                        );
                        ok = false;
                        continue;
                    }
                    None => len = Some((vals.len(), name.to_string())),
                    _ => {}
                }
                ok &= report_values(
                    ctx,
                    &vals,
                    &poss,
                    list.pos,
                    false,
                    &format!("{what}, component '{name}'"),
                );
                names.push(name.to_string());
                values.push(vals);
            }
            if names.is_empty() {
                ctx.error(
                    comps.pos,
                    format!("λ components of {what} are empty"),
                    Some("e.g. components: { charge: [0, 1, 1], vdw: [0, 0, 1] }".to_string()),
                );
                return None;
            }
            if ok {
                let n = values[0].len();
                for k in 1..n {
                    if values.iter().all(|v| v[k] == v[k - 1]) {
                        ctx.error(
                            cf.iter().next().map(|(_, l, _)| l.pos).unwrap_or(comps.pos),
                            format!(
                                "states {} and {k} of {what} are the same in every component",
                                k - 1
                            ),
                            Some("remove one of the repeated states".to_string()),
                        );
                        ok = false;
                    }
                }
            }
            ok.then_some(LambdaSchedule {
                components: names,
                values,
            })
        }
        Value::Map(_) => {
            let f = ctx.fields(node, &format!("lambdas of {what}"), &["count", "spacing"])?;
            let count = f
                .require(ctx, "count", &format!("lambdas of {what}"), "count: 12")
                .and_then(|n| ctx.uint(n, "λ count"));
            let spacing = match f.get("spacing") {
                None => Some(Spacing::Linear),
                Some(n) => match ctx.string(n, "spacing").as_deref() {
                    Some("linear") => Some(Spacing::Linear),
                    Some("ends") => Some(Spacing::Ends),
                    Some(other) => {
                        let hint = did_you_mean(other, &["linear", "ends"])
                            .map(|s| format!("did you mean '{s}'?"))
                            .unwrap_or_else(|| "use linear or ends (denser near 0 and 1)".into());
                        ctx.error(n.pos, format!("unknown λ spacing '{other}'"), Some(hint));
                        None
                    }
                    None => None,
                },
            };
            let count = count?;
            if count < 2 {
                ctx.error(
                    f.get("count").map_or(node.pos, |n| n.pos),
                    format!("a λ schedule needs at least 2 states, count is {count}"),
                    Some("use count: 2 or more".to_string()),
                );
                return None;
            }
            if count > 10_000 {
                ctx.error(
                    f.get("count").map_or(node.pos, |n| n.pos),
                    format!("λ count {count} is implausibly large"),
                    Some("use at most 10000 states".to_string()),
                );
                return None;
            }
            Some(LambdaSchedule::spaced(count as usize, spacing?))
        }
        _ => {
            ctx.error(
                node.pos,
                format!("lambdas of {what} must be a list, {{count, spacing}} or {{components}}, not {}", node.kind()),
                Some("e.g. lambdas: [0, 0.25, 0.5, 0.75, 1] or lambdas: { count: 12, spacing: ends }".to_string()),
            );
            None
        }
    }
}

fn parse_resources(ctx: &mut Ctx, node: Option<&Node>, what: &str) -> Resources {
    let mut r = Resources {
        cpus: 1,
        gpus: 0,
        memory_mb: 0,
        walltime_s: 3600,
    };
    let Some(node) = node else {
        return r;
    };
    let Some(f) = ctx.fields(node, &format!("resources of {what}"), RESOURCE_KEYS) else {
        return r;
    };
    if let Some(n) = f.get("cpus") {
        match ctx.uint(n, "cpus") {
            Some(0) => ctx.error(n.pos, "cpus must be at least 1", None),
            Some(c) => r.cpus = c as u32,
            None => {}
        }
    }
    if let Some(n) = f.get("gpus") {
        if let Some(g) = ctx.uint(n, "gpus") {
            r.gpus = g as u32;
        }
    }
    if let Some(n) = f.get("memory") {
        let text = match &n.value {
            Value::Str(s) => Some(s.clone()),
            Value::Int(i) => Some(i.to_string()),
            _ => {
                ctx.error(
                    n.pos,
                    format!("memory must be a size like 4G, not {}", n.kind()),
                    None,
                );
                None
            }
        };
        if let Some(t) = text {
            match parse_memory(&t) {
                Ok(m) => r.memory_mb = m,
                Err(e) => ctx.error(n.pos, e, Some("K, M, G, T (and KiB…TiB) are powers of 1024; KB, MB, GB, TB powers of 1000".to_string())),
            }
        }
    }
    if let Some(n) = f.get("walltime") {
        let text = match &n.value {
            Value::Str(s) => Some(s.clone()),
            Value::Int(i) => Some(i.to_string()),
            _ => {
                ctx.error(
                    n.pos,
                    format!("walltime must be a duration like 4h, not {}", n.kind()),
                    None,
                );
                None
            }
        };
        if let Some(t) = text {
            match parse_walltime(&t) {
                Ok(s) => r.walltime_s = s,
                Err(e) => ctx.error(
                    n.pos,
                    e,
                    Some("units: d, h, m, s (largest first), or HH:MM:SS / D-HH:MM:SS".to_string()),
                ),
            }
        }
    }
    r
}

fn parse_restraint(ctx: &mut Ctx, node: &Node, what: &str) -> Option<Restraint> {
    let w = format!("restraint of {what}");
    let f: Fields = ctx.fields(node, &w, RESTRAINT_KEYS)?;
    let kind = f
        .require(ctx, "kind", &w, "kind: boresch")
        .and_then(|n| ctx.string(n, "restraint kind"));
    if let Some(k) = &kind {
        if k != "boresch" {
            ctx.error(
                f.get("kind").map_or(f.pos, |n| n.pos),
                format!("unknown restraint kind '{k}'"),
                Some("the only kind is boresch".to_string()),
            );
        }
    }
    let mut get = |key: &str, lo: f64, hi: f64| -> Option<f64> {
        let n = f.require(ctx, key, &w, &format!("{key}: 1.0"))?;
        let v = ctx.number(n, key)?;
        let allowed_zero = lo == 0.0 && v == 0.0 && key.starts_with("k_");
        if !(v > lo && v < hi || allowed_zero) {
            ctx.error(n.pos, format!("{key} = {v} is outside ({lo}, {hi})"), None);
            return None;
        }
        Some(v)
    };
    let r0 = get("r0", 0.0, f64::INFINITY);
    let theta_a = get("theta_a", 0.0, 180.0);
    let theta_b = get("theta_b", 0.0, 180.0);
    let k_r = get("k_r", 0.0, f64::INFINITY);
    let k_theta_a = get("k_theta_a", 0.0, f64::INFINITY);
    let k_theta_b = get("k_theta_b", 0.0, f64::INFINITY);
    let k_phi_a = get("k_phi_a", 0.0, f64::INFINITY);
    let k_phi_b = get("k_phi_b", 0.0, f64::INFINITY);
    let k_phi_c = get("k_phi_c", 0.0, f64::INFINITY);
    let r = Restraint {
        kind: kind?,
        r0: r0?,
        theta_a: theta_a?,
        theta_b: theta_b?,
        k_r: k_r?,
        k_theta_a: k_theta_a?,
        k_theta_b: k_theta_b?,
        k_phi_a: k_phi_a?,
        k_phi_b: k_phi_b?,
        k_phi_c: k_phi_c?,
    };
    // The numeric core's rule, the same one the cycle applies after the run.
    let core = crate::cycle::BoreschRestraint {
        r0: r.r0,
        theta_a: r.theta_a,
        theta_b: r.theta_b,
        k_r: r.k_r,
        k_theta_a: r.k_theta_a,
        k_theta_b: r.k_theta_b,
        k_phi_a: r.k_phi_a,
        k_phi_b: r.k_phi_b,
        k_phi_c: r.k_phi_c,
    };
    if let Err(e) = core.validate() {
        let pos = e
            .parameter()
            .and_then(|p| f.get(p.field()))
            .map_or(f.pos, |n| n.pos);
        ctx.error(
            pos,
            format!("{w}: {e}"),
            Some("force constants must be above 0 and angles strictly between 0 and 180 degrees; see 'Restraint corrections' in the README".into()),
        );
        return None;
    }
    Some(r)
}

/// A stage, where its name is, and each `after` entry with its position.
type StageAt = (Stage, Pos, Vec<(String, Pos)>);

fn parse_stages(
    ctx: &mut Ctx,
    node: &Node,
    templates_dir: &Path,
    templates_ok: bool,
) -> Vec<Stage> {
    let Some(items) = ctx.list(node, "stages") else {
        return Vec::new();
    };
    let mut stages: Vec<StageAt> = Vec::new();
    let mut broken: Vec<(String, Vec<(String, Pos)>)> = Vec::new();
    for item in items {
        let Some(f) = ctx.fields(item, "a stage", STAGE_KEYS) else {
            continue;
        };
        let name = f
            .require(ctx, "name", "this stage", "name: production")
            .and_then(|n| {
                let s = ctx.string(n, "stage name")?;
                safe_id(ctx, &s, n.pos, "stage name").then_some(s)
            });
        let what = format!("stage '{}'", name.as_deref().unwrap_or("?"));
        let per = match f.get("per") {
            None => Some(StagePer::Window),
            Some(n) => match ctx.string(n, "per").as_deref() {
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
            },
        };
        let mut after = Vec::new();
        if let Some(n) = f.get("after") {
            match &n.value {
                Value::Str(s) => after.push((s.clone(), n.pos)),
                Value::Seq(list) => {
                    for a in list {
                        if let Some(s) = ctx.string(a, "a stage name in after") {
                            after.push((s, a.pos));
                        }
                    }
                }
                _ => ctx.error(
                    n.pos,
                    format!(
                        "after of {what} must be a list of stage names, not {}",
                        n.kind()
                    ),
                    Some("e.g. after: [prepare]".to_string()),
                ),
            }
        }
        let template = f
            .require(ctx, "template", &what, "template: production.sh.tera")
            .and_then(|n| {
                let s = ctx.string(n, "template")?;
                if let Err(e) = confined_relative(&s) {
                    ctx.error(
                        n.pos,
                        format!("template of {what}: {e}"),
                        Some("give a file inside the template folder, relative to it".to_string()),
                    );
                    return None;
                }
                let p = templates_dir.join(&s);
                if templates_ok && !p.is_file() {
                    ctx.error(
                        n.pos,
                        format!("template {} of {what} does not exist", p.display()),
                        Some(format!(
                            "create it, or fix the name (the template folder is {})",
                            templates_dir.display()
                        )),
                    );
                    return None;
                }
                Some((s, p))
            });
        let output = f.get("output").and_then(|n| {
            let s = ctx.string(n, "output")?;
            match confined_relative(&s) {
                Ok(()) => Some(s),
                Err(e) => {
                    ctx.error(
                        n.pos,
                        format!("output of {what}: {e}"),
                        Some(
                            "name a file inside the task directory, e.g. output: window.tsv"
                                .to_string(),
                        ),
                    );
                    None
                }
            }
        });
        let frames = f.get("frames").and_then(|n| match ctx.uint(n, "frames") {
            Some(0) => {
                ctx.error(
                    n.pos,
                    "frames must be at least 1",
                    Some("leave frames out to accept any number".to_string()),
                );
                None
            }
            v => v,
        });
        let vars = ctx.vars(f.get("vars"), &format!("vars of {what}"));
        let named = name.clone().map(|n| (n, after.clone()));
        if let (Some(name), Some(per), Some((template, template_path))) = (name, per, template) {
            if let Some((_, p0, _)) = stages.iter().find(|(s, _, _)| s.name == name) {
                let line = p0.line;
                ctx.error(
                    f.key_pos("name"),
                    format!("duplicate stage name '{name}' (first on line {line})"),
                    Some("every stage needs its own name".to_string()),
                );
                continue;
            }
            stages.push((
                Stage {
                    name,
                    per,
                    after: after.iter().map(|(s, _)| s.clone()).collect(),
                    template,
                    template_path,
                    output,
                    frames,
                    vars,
                },
                f.key_pos("name"),
                after,
            ));
        } else if let Some(n) = named {
            // Reported already (template or `per`); still check its `after` below.
            broken.push(n);
        }
    }
    let mut names: Vec<String> = stages.iter().map(|(s, _, _)| s.name.clone()).collect();
    names.extend(broken.iter().map(|(n, _)| n.clone()));
    let cands: Vec<&str> = names.iter().map(String::as_str).collect();
    let mut ok = broken.is_empty();
    let edges = stages
        .iter()
        .map(|(s, _, after)| (s.name.as_str(), after))
        .chain(broken.iter().map(|(n, after)| (n.as_str(), after)));
    for (stage_name, after) in edges {
        for (a, p) in after {
            if !names.contains(a) {
                let hint = did_you_mean(a, &cands)
                    .map(|c| format!("did you mean '{c}'?"))
                    .unwrap_or_else(|| format!("stages are: {}", cands.join(", ")));
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
    if !ok {
        return stages.into_iter().map(|(s, _, _)| s).collect();
    }
    // Kahn's algorithm, file order among the ready ones.
    let mut done: Vec<bool> = vec![false; stages.len()];
    let mut order = Vec::new();
    loop {
        let next = (0..stages.len()).find(|&i| {
            !done[i]
                && stages[i]
                    .0
                    .after
                    .iter()
                    .all(|a| names.iter().position(|n| n == a).is_some_and(|j| done[j]))
        });
        match next {
            Some(i) => {
                done[i] = true;
                order.push(i);
            }
            None => break,
        }
    }
    if order.len() < stages.len() {
        let stuck: Vec<&str> = (0..stages.len())
            .filter(|&i| !done[i])
            .map(|i| stages[i].0.name.as_str())
            .collect();
        let first = (0..stages.len()).find(|&i| !done[i]).unwrap();
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
        .map(|i| by_index[i].take().unwrap())
        .collect()
}
