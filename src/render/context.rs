//! The tera context of a stage template (every variable is listed in the README,
//! "Templates and their variables").

use crate::campaign::quantity::format_walltime;
use crate::campaign::{Campaign, CampaignKind, Vars};
use crate::plan::{Plan, Subject, TaskIndex};
use serde_json::{json, Map, Value};
use std::path::PathBuf;

/// Where the running legwork is (`legwork.exe`, `legwork.bin_dir`).
pub fn legwork_value() -> Value {
    let exe = std::env::current_exe()
        .ok()
        .and_then(|p| p.canonicalize().ok())
        .unwrap_or_else(|| PathBuf::from("legwork"));
    let bin_dir = exe.parent().map(PathBuf::from).unwrap_or_default();
    json!({
        "version": env!("CARGO_PKG_VERSION"),
        "exe": exe,
        "bin_dir": bin_dir,
    })
}

fn merge(into: &mut Vars, from: &Vars) {
    for (k, v) in from {
        into.insert(k.clone(), v.clone());
    }
}

/// What every task of one subject × leg shares; built once and cloned per task.
pub struct LegBase {
    ctx: tera::Context,
    vars: Vars,
    states: Vec<Value>,
}

/// Builds contexts quickly for many tasks.
pub struct ContextBuilder<'a> {
    campaign: &'a Campaign,
    plan: &'a Plan,
    common: tera::Context,
    bases: std::collections::HashMap<(String, String), LegBase>,
    with_states: bool,
}

impl<'a> ContextBuilder<'a> {
    /// Prepares the shared parts of every context: the full context the README lists.
    pub fn new(campaign: &'a Campaign, plan: &'a Plan) -> Self {
        Self::build(campaign, plan, true)
    }

    /// Like [`ContextBuilder::new`], but leaves out `states` (the one large,
    /// per-leg list) when no template of the campaign's folder mentions it: copying
    /// it into every task's context is most of the cost of rendering a large tree,
    /// and a template can only reach a variable by naming it.
    pub fn for_rendering(campaign: &'a Campaign, plan: &'a Plan) -> Self {
        let mentions = |word: &str| {
            let mut files: Vec<std::path::PathBuf> =
                crate::campaign::templates::template_files(&campaign.templates_dir)
                    .map(|f| f.into_iter().map(|(_, p)| p).collect())
                    .unwrap_or_default();
            files.extend(campaign.stages.iter().map(|s| s.template_path.clone()));
            files.iter().any(|p| {
                std::fs::read_to_string(p)
                    .map_or(true, |t| t.contains(word) || t.contains("__tera_context"))
            })
        };
        Self::build(campaign, plan, mentions("states"))
    }

    fn build(campaign: &'a Campaign, plan: &'a Plan, with_states: bool) -> Self {
        let mut common = tera::Context::new();
        common.insert(
            "campaign",
            &json!({
                "name": campaign.name,
                "seed": campaign.seed,
                "temperature_K": campaign.temperature_k,
                "unit": campaign.unit.as_str(),
                "kind": campaign.kind.as_str(),
                "file": campaign.file,
                "dir": campaign.dir,
                "root": campaign.root,
            }),
        );
        common.insert(
            "scheduler",
            &json!({
                "kind": campaign.scheduler.kind,
                "options": campaign.scheduler.options,
            }),
        );
        common.insert("legwork", &legwork_value());
        let mut b = ContextBuilder {
            campaign,
            plan,
            common,
            bases: Default::default(),
            with_states,
        };
        for subject in campaign.subjects() {
            for leg in &campaign.legs {
                let base = b.leg_base(&subject, &leg.name);
                b.bases.insert((subject.id(), leg.name.clone()), base);
            }
        }
        b
    }

    fn leg_base(&self, subject: &Subject, leg_name: &str) -> LegBase {
        let c = self.campaign;
        let leg = c.leg(leg_name).expect("plan legs come from the campaign");
        let mut ctx = self.common.clone();
        let mut vars = c.vars.clone();
        merge(&mut vars, &leg.vars);
        let lig = |id: &str| {
            let l = c.ligand(id);
            json!({"id": id, "vars": l.map(|l| l.vars.clone()).unwrap_or_default()})
        };
        match subject {
            Subject::Edge { a, b } => {
                let edge = c.edges.iter().find(|e| &e.a == a && &e.b == b);
                let evars = edge.map(|e| e.vars.clone()).unwrap_or_default();
                ctx.insert("subject", &json!({"id": subject.id(), "kind": "edge"}));
                ctx.insert(
                    "edge",
                    &json!({"id": subject.id(), "a": a, "b": b, "vars": evars}),
                );
                ctx.insert("ligand_a", &lig(a));
                ctx.insert("ligand_b", &lig(b));
                merge(&mut vars, &evars);
            }
            Subject::Ligand { id } => {
                ctx.insert("subject", &json!({"id": id, "kind": "ligand"}));
                ctx.insert("ligand", &lig(id));
                if c.kind != CampaignKind::Relative {
                    if let Some(l) = c.ligand(id) {
                        merge(&mut vars, &l.vars);
                    }
                }
            }
        }
        let n = leg.windows();
        let states: Vec<Value> = (0..n)
            .map(|k| {
                let comps: Map<String, Value> = leg
                    .lambdas
                    .state(k)
                    .into_iter()
                    .map(|(name, v)| (name, json!(v)))
                    .collect();
                json!({"index": k, "lambda": leg.lambdas.primary(k), "lambdas": comps})
            })
            .collect();
        ctx.insert(
            "leg",
            &json!({"name": leg.name, "sign": leg.sign, "replicas": leg.replicas, "windows": n}),
        );
        if self.with_states {
            ctx.insert("states", &states);
        }
        ctx.insert("lambdas", &leg.lambdas.primaries());
        ctx.insert("components", &leg.lambdas.components);
        LegBase { ctx, vars, states }
    }

    /// The context of one task.
    pub fn context(&self, index: TaskIndex, attempt: u32, restart: bool) -> tera::Context {
        let c = self.campaign;
        let task = &self.plan.tasks[index];
        let stage = c
            .stage(&task.stage)
            .expect("plan stages come from the campaign");
        let base = &self.bases[&(task.subject.id(), task.leg.clone())];
        let mut ctx = base.ctx.clone();
        let dir = c.root.join(&task.dir);
        ctx.insert(
            "task",
            &json!({
                "id": task.id,
                "dir": dir,
                "stage": task.stage,
                "attempt": attempt.max(1),
                "restart": restart,
                "seed": task.seed,
                "frames": task.frames,
                "output": stage.output,
            }),
        );
        ctx.insert("replica", &task.replica);
        if let Some(k) = task.window {
            ctx.insert("window", &base.states[k]);
        }
        ctx.insert(
            "stage",
            &json!({"name": stage.name, "per": stage.per.as_str(), "frames": stage.frames, "output": stage.output}),
        );
        let r = &task.resources;
        ctx.insert(
            "resources",
            &json!({
                "cpus": r.cpus,
                "gpus": r.gpus,
                "memory_mb": r.memory_mb,
                "walltime_s": r.walltime_s,
                "walltime": format_walltime(r.walltime_s),
            }),
        );
        let mut after = Map::new();
        for dep in &stage.after {
            let dep_tasks: Vec<&crate::plan::Task> = task
                .after
                .iter()
                .map(|&i| &self.plan.tasks[i])
                .filter(|t| &t.stage == dep)
                .collect();
            if dep_tasks.len() == 1 {
                let t = dep_tasks[0];
                after.insert(dep.clone(), json!({"id": t.id, "dir": c.root.join(&t.dir)}));
            }
        }
        ctx.insert("after", &after);
        let mut vars = base.vars.clone();
        merge(&mut vars, &stage.vars);
        ctx.insert("vars", &vars);
        ctx
    }
}

/// The context of one task, exactly as its stage template sees it.
pub fn task_context(
    campaign: &Campaign,
    plan: &Plan,
    index: TaskIndex,
    attempt: u32,
    restart: bool,
) -> tera::Context {
    ContextBuilder::new(campaign, plan).context(index, attempt, restart)
}
