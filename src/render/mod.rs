//! Rendering the plan into the tree: tera context, confined, atomic, idempotent writes.
//!
//! Each task directory gets one file, `task.sh`, rendered from its stage's
//! template. Writes never leave the campaign root, go through a temporary file
//! and a rename, and skip files whose content would not change. A file the user
//! edited since legwork wrote it is left alone (and listed) unless forced. What
//! was written is recorded in `<root>/.legwork/render-manifest.tsv`.

pub mod context;
pub mod filters;
pub mod manifest;

pub use context::{task_context, ContextBuilder};
pub use filters::{quote_word, register_filters};

use crate::campaign::{templates, Campaign, Diagnostic};
use crate::plan::{Plan, TaskIndex};
use manifest::{Entry, Manifest};
use rayon::prelude::*;
use std::io::Write;
use std::os::unix::fs::PermissionsExt;
use std::path::{Component, Path, PathBuf};

/// The file render writes in each task directory.
pub const TASK_FILE: &str = "task.sh";

/// Options of [`write_tree`].
#[derive(Debug, Clone, Copy, Default)]
pub struct RenderOptions {
    /// Overwrite files the user edited.
    pub force: bool,
    /// Decide everything, write nothing.
    pub dry_run: bool,
    /// Show a progress bar on standard error.
    pub progress: bool,
}

/// What [`write_tree`] did (or, for a dry run, would do).
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize)]
pub struct TreeReport {
    /// Files written (new or changed).
    pub written: usize,
    /// Files already up to date.
    pub unchanged: usize,
    /// User-edited files left as they are (relative to the root); `--force`
    /// overwrites them.
    pub protected: Vec<PathBuf>,
    /// Whether anything was actually written.
    pub dry_run: bool,
}

/// Rendering failed; nothing was written.
#[derive(Debug, thiserror::Error)]
pub enum RenderError {
    /// The templates do not load.
    #[error("templates do not load:\n{}", .0.iter().map(|d| d.to_string()).collect::<Vec<_>>().join("\n"))]
    Templates(Vec<Diagnostic>),
    /// A template failed for one task (e.g. an undefined variable).
    #[error("task {task}: template {template} failed: {message}\n  hint: every variable the template uses must be in the context (see the README's template section), or guarded with `is defined`")]
    Template {
        /// task id
        task: String,
        /// template name
        template: String,
        /// what tera said
        message: String,
    },
    /// A path would leave the campaign root.
    #[error("{0} would be written outside the campaign root; refusing")]
    Escape(PathBuf),
    /// A write failed.
    #[error("cannot write {path}: {source}")]
    Io {
        /// the file
        path: PathBuf,
        /// why
        source: std::io::Error,
    },
}

/// `root/rel` if `rel` only goes down (no `..`, no absolute part, no hidden part).
pub fn confined(root: &Path, rel: &Path) -> Result<PathBuf, RenderError> {
    let ok = rel.components().all(|c| match c {
        Component::Normal(s) => !s.to_string_lossy().starts_with('.'),
        _ => false,
    }) && rel.components().next().is_some();
    if ok && root.is_absolute() {
        Ok(root.join(rel))
    } else {
        Err(RenderError::Escape(rel.to_path_buf()))
    }
}

enum Action {
    Unchanged,
    Write(String),
    Protected,
    Adopt(Entry),
}

struct Decision {
    rel: String,
    action: Action,
    attempt: u32,
    restart: bool,
}

fn entry_matches(meta: &std::fs::Metadata, e: &Entry) -> bool {
    meta.len() == e.size && manifest::mtime_ns(meta) == e.mtime_ns
}

fn disk_hash(path: &Path) -> Option<String> {
    std::fs::read(path).ok().map(|b| manifest::hash(&b))
}

fn fingerprint(campaign: &Campaign) -> String {
    let lw = context::legwork_value();
    format!(
        "{}:{}",
        campaign.fingerprint,
        manifest::hash(lw.to_string().as_bytes())
    )
}

fn render_one(
    tera: &tera::Tera,
    builder: &ContextBuilder,
    campaign: &Campaign,
    plan: &Plan,
    i: TaskIndex,
    attempt: u32,
    restart: bool,
) -> Result<String, RenderError> {
    let task = &plan.tasks[i];
    let stage = campaign
        .stage(&task.stage)
        .expect("plan stages come from the campaign");
    let ctx = builder.context(i, attempt, restart);
    tera.render(&stage.template, &ctx)
        .map_err(|e| RenderError::Template {
            task: task.id.clone(),
            template: stage.template_path.display().to_string(),
            message: templates::chain_text(&e),
        })
}

fn decide(
    campaign: &Campaign,
    plan: &Plan,
    i: TaskIndex,
    man: &Manifest,
    fast: bool,
    force: bool,
    render: &dyn Fn(TaskIndex, u32, bool) -> Result<String, RenderError>,
) -> Result<Decision, RenderError> {
    let task = &plan.tasks[i];
    let rel_path = task.dir.join(TASK_FILE);
    let abs = confined(&campaign.root, &rel_path)?;
    let rel = rel_path.to_string_lossy().into_owned();
    let entry = man.entries.get(&rel);
    let (attempt, restart) = entry.map_or((1, false), |e| (e.attempt, e.restart));
    let meta = std::fs::symlink_metadata(&abs).ok();
    if let Some(m) = &meta {
        if !m.file_type().is_file() {
            return Err(RenderError::Escape(rel_path));
        }
    }
    let ours = match (&meta, entry) {
        (Some(m), Some(e)) if entry_matches(m, e) => Some(true),
        _ => None,
    };
    if fast && ours == Some(true) {
        return Ok(Decision {
            rel,
            action: Action::Unchanged,
            attempt,
            restart,
        });
    }
    let content = render(i, attempt, restart)?;
    let new_hash = manifest::hash(content.as_bytes());
    let action = match (&meta, entry) {
        (None, _) => Action::Write(content),
        (Some(_), Some(e)) => {
            let ours = ours == Some(true) || disk_hash(&abs).as_deref() == Some(e.hash.as_str());
            if ours {
                if new_hash == e.hash {
                    Action::Unchanged
                } else {
                    Action::Write(content)
                }
            } else if disk_hash(&abs).as_deref() == Some(new_hash.as_str()) {
                adopt(&abs, new_hash, attempt, restart)
            } else if force {
                Action::Write(content)
            } else {
                Action::Protected
            }
        }
        (Some(_), None) => {
            if disk_hash(&abs).as_deref() == Some(new_hash.as_str()) {
                adopt(&abs, new_hash, attempt, restart)
            } else if force {
                Action::Write(content)
            } else {
                Action::Protected
            }
        }
    };
    Ok(Decision {
        rel,
        action,
        attempt,
        restart,
    })
}

fn adopt(abs: &Path, hash: String, attempt: u32, restart: bool) -> Action {
    match std::fs::metadata(abs) {
        Ok(m) => Action::Adopt(Entry {
            hash,
            size: m.len(),
            mtime_ns: manifest::mtime_ns(&m),
            attempt,
            restart,
        }),
        Err(_) => Action::Unchanged,
    }
}

/// Writes `content` to `path` atomically: a temporary file beside it, mode 0755,
/// then a rename. Returns the manifest entry.
fn write_atomic(
    path: &Path,
    content: &str,
    attempt: u32,
    restart: bool,
) -> Result<Entry, RenderError> {
    let io = |source| RenderError::Io {
        path: path.to_path_buf(),
        source,
    };
    let dir = path.parent().expect("task files have a directory");
    std::fs::create_dir_all(dir).map_err(io)?;
    let tmp = dir.join(format!(".{TASK_FILE}.tmp-{}", std::process::id()));
    let mut f = std::fs::File::create(&tmp).map_err(io)?;
    let res = (|| {
        f.write_all(content.as_bytes())?;
        f.set_permissions(std::fs::Permissions::from_mode(0o755))?;
        let meta = f.metadata()?;
        drop(f);
        std::fs::rename(&tmp, path)?;
        Ok::<_, std::io::Error>(meta)
    })();
    match res {
        Ok(meta) => Ok(Entry {
            hash: manifest::hash(content.as_bytes()),
            size: meta.len(),
            mtime_ns: manifest::mtime_ns(&meta),
            attempt,
            restart,
        }),
        Err(e) => {
            let _ = std::fs::remove_file(&tmp);
            Err(io(e))
        }
    }
}

fn progress_bar(show: bool, len: usize, msg: &'static str) -> indicatif::ProgressBar {
    if !show {
        return indicatif::ProgressBar::hidden();
    }
    let pb = indicatif::ProgressBar::new(len as u64);
    pb.set_style(
        indicatif::ProgressStyle::with_template("{msg:>9} [{bar:40}] {pos}/{len} {eta}")
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar())
            .progress_chars("=> "),
    );
    pb.set_message(msg);
    pb
}

/// Renders every task of the plan into the tree under the campaign root.
///
/// Every template is rendered before anything is written, so a template error
/// leaves the tree as it was.
pub fn write_tree(
    campaign: &Campaign,
    plan: &Plan,
    opts: &RenderOptions,
) -> Result<TreeReport, RenderError> {
    if !campaign.root.is_absolute() {
        return Err(RenderError::Escape(campaign.root.clone()));
    }
    let tera = templates::load_tera(campaign).map_err(RenderError::Templates)?;
    let builder = ContextBuilder::new(campaign, plan);
    let mut man = Manifest::load(&campaign.root);
    let fp = fingerprint(campaign);
    let fast = !opts.force && man.fingerprint == fp;
    let render = |i, a, r| render_one(&tera, &builder, campaign, plan, i, a, r);

    let pb = progress_bar(
        opts.progress && plan.tasks.len() >= 200,
        plan.tasks.len(),
        "rendering",
    );
    let indices: Vec<TaskIndex> = (0..plan.tasks.len()).collect();
    let decisions: Vec<Decision> = indices
        .par_chunks(256)
        .map(|chunk| {
            let out = chunk
                .iter()
                .map(|&i| decide(campaign, plan, i, &man, fast, opts.force, &render))
                .collect::<Result<Vec<_>, _>>();
            pb.inc(chunk.len() as u64);
            out
        })
        .collect::<Result<Vec<Vec<_>>, _>>()?
        .into_iter()
        .flatten()
        .collect();
    pb.finish_and_clear();

    let mut report = TreeReport {
        dry_run: opts.dry_run,
        ..Default::default()
    };
    let mut to_write: Vec<(&Decision, &String)> = Vec::new();
    let mut changed = man.fingerprint != fp;
    for d in &decisions {
        match &d.action {
            Action::Unchanged => report.unchanged += 1,
            Action::Adopt(e) => {
                report.unchanged += 1;
                if !opts.dry_run {
                    man.entries.insert(d.rel.clone(), e.clone());
                    changed = true;
                }
            }
            Action::Protected => report.protected.push(PathBuf::from(&d.rel)),
            Action::Write(c) => to_write.push((d, c)),
        }
    }
    report.written = to_write.len();
    if opts.dry_run {
        return Ok(report);
    }
    let pb = progress_bar(
        opts.progress && to_write.len() >= 200,
        to_write.len(),
        "writing",
    );
    let results: Vec<Result<(String, Entry), RenderError>> = to_write
        .par_chunks(128)
        .flat_map_iter(|chunk| {
            let out: Vec<_> = chunk
                .iter()
                .map(|(d, c)| {
                    let abs = campaign.root.join(&d.rel);
                    write_atomic(&abs, c, d.attempt, d.restart).map(|e| (d.rel.clone(), e))
                })
                .collect();
            pb.inc(chunk.len() as u64);
            out
        })
        .collect();
    pb.finish_and_clear();
    let mut first_err = None;
    for r in results {
        match r {
            Ok((rel, e)) => {
                man.entries.insert(rel, e);
                changed = true;
            }
            Err(e) => {
                first_err.get_or_insert(e);
            }
        }
    }
    if first_err.is_none() {
        man.fingerprint = fp;
    }
    if changed {
        man.save(&campaign.root).map_err(|source| RenderError::Io {
            path: manifest::path(&campaign.root),
            source,
        })?;
    }
    match first_err {
        Some(e) => Err(e),
        None => Ok(report),
    }
}

/// Re-renders the `task.sh` of several tasks for a resubmission (attempt,
/// restart), updating the manifest once. A file the user edited is left as it is
/// (its path is still returned, and a warning logged).
pub fn render_tasks(
    campaign: &Campaign,
    plan: &Plan,
    tasks: &[(TaskIndex, u32, bool)],
) -> Result<Vec<PathBuf>, RenderError> {
    let tera = templates::load_tera(campaign).map_err(RenderError::Templates)?;
    let builder = ContextBuilder::new(campaign, plan);
    let mut man = Manifest::load(&campaign.root);
    let mut rendered = Vec::with_capacity(tasks.len());
    for &(i, attempt, restart) in tasks {
        let rel_path = plan.tasks[i].dir.join(TASK_FILE);
        let abs = confined(&campaign.root, &rel_path)?;
        let content = render_one(&tera, &builder, campaign, plan, i, attempt, restart)?;
        rendered.push((rel_path, abs, content, attempt, restart));
    }
    let mut out = Vec::with_capacity(rendered.len());
    for (rel_path, abs, content, attempt, restart) in rendered {
        let rel = rel_path.to_string_lossy().into_owned();
        let edited = match (std::fs::metadata(&abs).ok(), man.entries.get(&rel)) {
            (Some(m), Some(e)) => {
                !entry_matches(&m, e) && disk_hash(&abs).as_deref() != Some(e.hash.as_str())
            }
            (Some(_), None) => true,
            (None, _) => false,
        };
        if edited {
            tracing::warn!(
                "{} was edited by hand; left as it is for the rerun",
                abs.display()
            );
        } else {
            let e = write_atomic(&abs, &content, attempt, restart)?;
            man.entries.insert(rel, e);
        }
        out.push(abs);
    }
    man.save(&campaign.root).map_err(|source| RenderError::Io {
        path: manifest::path(&campaign.root),
        source,
    })?;
    Ok(out)
}

/// Re-renders one task's `task.sh` for a resubmission; see [`render_tasks`].
pub fn render_task(
    campaign: &Campaign,
    plan: &Plan,
    task: TaskIndex,
    attempt: u32,
    restart: bool,
) -> Result<PathBuf, RenderError> {
    Ok(render_tasks(campaign, plan, &[(task, attempt, restart)])?.remove(0))
}
