//! From the campaign file's text to a validated [`Campaign`], collecting every
//! problem with its position: the top level. Each section has its own file
//! (`members`: ligands and edges; `legs`: legs and λ; `stages`; `resources`:
//! resources and restraints; `settings`: scheduler, reader and analysis; `paths`).

use super::diagnostic::Diagnostic;
use super::fields::{did_you_mean, Ctx, Fields};
use super::members::{self, Sink};
use super::model::*;
use super::paths::{normalize, resolve};
use super::stages::{self, Templates};
use super::yaml::{self, Node, Pos};
use super::{legs, safe_id, settings};
use crate::units::EnergyUnit;
use sha2::{Digest, Sha256};
use std::collections::HashSet;
use std::path::{Path, PathBuf};

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

/// Everything `parse` needs from outside.
pub struct Input<'a> {
    /// the campaign file, absolute
    pub file: &'a Path,
    /// its text
    pub text: &'a str,
    /// `--root`, absolute
    pub root_override: Option<&'a Path>,
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
    let mut extra = Vec::new();
    let campaign = build(&mut ctx, &root, input, &mut extra);
    let mut all = ctx.diags;
    all.extend(extra);
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

/// The folders a campaign file names.
struct Folders {
    dir: PathBuf,
    root: PathBuf,
    templates: PathBuf,
    templates_ok: bool,
}

fn build(ctx: &mut Ctx, root: &Node, input: &Input, extra: &mut Vec<Diagnostic>) -> Campaign {
    let dir = input.file.parent().unwrap_or(Path::new("/")).to_path_buf();
    let mut hasher = Sha256::new();
    hasher.update(env!("CARGO_PKG_VERSION").as_bytes());
    hasher.update(input.text.as_bytes());
    let Some(top) = ctx.fields(root, "the campaign file", TOP_KEYS) else {
        return empty_campaign(input.file, &dir);
    };
    let name = name(ctx, &top);
    let folders = folders(ctx, &top, input, dir, &name);
    let scheduler = settings::scheduler(ctx, top.get("scheduler"), &folders.templates);
    let vars = ctx.vars(top.get("vars"), "vars");
    let mut sink = Sink {
        extra,
        hasher: &mut hasher,
        dir: &folders.dir,
    };
    let (kind, ligands, edges) = members_and_kind(ctx, &top, &mut sink);
    let reference_ligand = top
        .get("reference_ligand")
        .and_then(|n| reference_ligand(ctx, n, &ligands));
    let legs = top
        .require(
            ctx,
            "legs",
            "the campaign file",
            "legs: { complex: {…}, solvent: {…} }",
        )
        .map_or_else(Vec::new, |n| legs::legs(ctx, n));
    let stages = stages(ctx, &top, &folders);
    let reader = settings::section(ctx, top.get("reader"), "reader");
    let analysis = settings::analysis(ctx, top.get("analysis"), &stages);
    let experiment = top
        .get("experiment")
        .and_then(|n| experiment(ctx, n, &folders.dir));
    let mut campaign = Campaign {
        name,
        file: input.file.to_path_buf(),
        dir: folders.dir,
        root: folders.root,
        templates_dir: folders.templates,
        experiment,
        seed: top
            .get("seed")
            .and_then(|n| ctx.uint(n, "seed"))
            .unwrap_or(0),
        temperature_k: temperature(ctx, &top),
        unit: unit(ctx, &top),
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
    if folders.templates_ok {
        templates_in(ctx, &campaign, &mut hasher, extra);
    }
    hasher.update(campaign.root.to_string_lossy().as_bytes());
    campaign.fingerprint = format!("{:x}", hasher.finalize());
    campaign
}

fn stages(ctx: &mut Ctx, top: &Fields, folders: &Folders) -> Vec<Stage> {
    let templates = Templates {
        dir: &folders.templates,
        ok: folders.templates_ok,
    };
    let stages = top
        .require(
            ctx,
            "stages",
            "the campaign file",
            "stages: [{ name: production, per: window, template: production.sh.tera }]",
        )
        .map_or_else(Vec::new, |n| stages::stages(ctx, n, &templates));
    if !stages.is_empty() && !stages.iter().any(|s| s.per == StagePer::Window) {
        ctx.warn(
            top.key_pos("stages"),
            "no stage runs per window: there will be nothing to analyse",
            None,
        );
    }
    stages
}

fn name(ctx: &mut Ctx, top: &Fields) -> String {
    top.require(ctx, "campaign", "the campaign file", "campaign: my-series")
        .and_then(|n| {
            let s = ctx.string(n, "campaign (the name)")?;
            safe_id(ctx, &s, n.pos, "campaign name").then_some(s)
        })
        .unwrap_or_else(|| "campaign".into())
}

fn temperature(ctx: &mut Ctx, top: &Fields) -> f64 {
    let Some(n) = top.get("temperature_K") else {
        return 298.15;
    };
    match ctx.number(n, "temperature_K") {
        Some(t) if t > 0.0 && t <= 10_000.0 => t,
        Some(t) => {
            ctx.error(
                n.pos,
                format!("temperature_K must be above 0 K and at most 10000 K, not {t}"),
                Some("e.g. temperature_K: 298.15".to_string()),
            );
            298.15
        }
        None => 298.15,
    }
}

fn unit(ctx: &mut Ctx, top: &Fields) -> EnergyUnit {
    let Some(n) = top.get("unit") else {
        return EnergyUnit::KcalPerMol;
    };
    match ctx.string(n, "unit").as_deref() {
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
    }
}

fn folders(ctx: &mut Ctx, top: &Fields, input: &Input, dir: PathBuf, name: &str) -> Folders {
    let root = match (input.root_override, top.get("root")) {
        (Some(r), _) => normalize(r),
        (None, Some(n)) => ctx
            .string(n, "root")
            .map(|s| resolve(&dir, Path::new(&s)))
            .unwrap_or_else(|| dir.join(name)),
        (None, None) => dir.join(name),
    };
    if input.file.starts_with(&root) {
        ctx.error(
            top.key_pos("root"),
            format!("root {} holds the campaign file itself", root.display()),
            Some("give the tree a folder of its own, e.g. root: runs".to_string()),
        );
    }
    let templates = top
        .get("templates")
        .and_then(|n| ctx.string(n, "templates"))
        .map(|s| resolve(&dir, Path::new(&s)))
        .unwrap_or_else(|| dir.join("templates"));
    let templates_ok = templates.is_dir();
    if !templates_ok {
        ctx.error(
            top.key_pos("templates"),
            format!("template folder {} does not exist", templates.display()),
            Some("set templates: to the folder holding your stage templates, relative to the campaign file".to_string()),
        );
    }
    Folders {
        dir,
        root,
        templates,
        templates_ok,
    }
}

/// Ligands, edges and the campaign kind, which must agree with each other.
fn members_and_kind(
    ctx: &mut Ctx,
    top: &Fields,
    sink: &mut Sink,
) -> (CampaignKind, Vec<Ligand>, Vec<Edge>) {
    let ligands = top
        .require(ctx, "ligands", "the campaign file", "ligands: ligands.csv")
        .map_or_else(Vec::new, |n| members::ligands(ctx, n, sink));
    let ids: HashSet<&str> = ligands.iter().map(|l| l.id.as_str()).collect();
    let edges_node = top.get("edges");
    let mut edges = edges_node.map_or_else(Vec::new, |n| members::edges(ctx, n, &ids, sink));
    let written = top.get("kind").and_then(|n| kind(ctx, n));
    let kind = match (written, edges_node.is_some()) {
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
        members::network_warnings(ctx, &ligands, &edges, top.key_pos("edges"));
    }
    (kind, ligands, edges)
}

fn kind(ctx: &mut Ctx, n: &Node) -> Option<CampaignKind> {
    const KINDS: [CampaignKind; 3] = [
        CampaignKind::Relative,
        CampaignKind::Absolute,
        CampaignKind::Solvation,
    ];
    let s = ctx.string(n, "kind")?;
    if let Some(k) = KINDS.into_iter().find(|k| k.as_str() == s) {
        return Some(k);
    }
    let names = KINDS.map(CampaignKind::as_str);
    let hint = did_you_mean(&s, &names)
        .map(|c| format!("did you mean '{c}'?"))
        .unwrap_or_else(|| "use relative, absolute or solvation".into());
    ctx.error(n.pos, format!("unknown campaign kind '{s}'"), Some(hint));
    None
}

fn reference_ligand(ctx: &mut Ctx, n: &Node, ligands: &[Ligand]) -> Option<String> {
    let s = ctx.string(n, "reference_ligand")?;
    if ligands.iter().any(|l| l.id == s) {
        return Some(s);
    }
    let cands: Vec<&str> = ligands.iter().map(|l| l.id.as_str()).collect();
    let hint = did_you_mean(&s, &cands)
        .map(|c| format!("did you mean '{c}'?"))
        .unwrap_or_else(|| "name one of the ligands".to_string());
    ctx.error(
        n.pos,
        format!("reference_ligand '{s}' is not one of the ligands"),
        Some(hint),
    );
    None
}

fn experiment(ctx: &mut Ctx, n: &Node, dir: &Path) -> Option<PathBuf> {
    let s = ctx.string(n, "experiment")?;
    let p = resolve(dir, Path::new(&s));
    if !p.is_file() {
        ctx.error(
            n.pos,
            format!("experiment file {} does not exist", p.display()),
            Some("give the path of the measured-affinities CSV relative to the campaign file, or remove experiment:".to_string()),
        );
    }
    Some(p)
}

/// Every template file goes into the fingerprint; each is parsed with tera now,
/// so that a typo is found before any write, and checked for unquoted variables.
fn templates_in(ctx: &mut Ctx, c: &Campaign, hasher: &mut Sha256, extra: &mut Vec<Diagnostic>) {
    match super::templates::template_files(&c.templates_dir) {
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
    match super::templates::load_tera(c) {
        Ok(_) => extra.extend(super::quoting::unquoted_variables(c)),
        Err(diags) => extra.extend(diags),
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
