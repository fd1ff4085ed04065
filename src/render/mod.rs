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
use std::os::unix::fs::OpenOptionsExt;
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
}

/// Progress of [`write_tree_with`], reported as it goes; the command that called
/// it owns the display (a bar, a log line, nothing). Called from several
/// threads at once.
pub trait Progress: Sync {
    /// A phase (`"rendering"`, then `"writing"`) of `total` tasks begins.
    fn begin(&self, phase: &'static str, total: usize);
    /// `n` more tasks of the current phase are done.
    fn advance(&self, n: usize);
    /// The current phase is over.
    fn end(&self);
}

/// Reports nothing.
#[derive(Debug, Clone, Copy, Default)]
pub struct NoProgress;

impl Progress for NoProgress {
    fn begin(&self, _: &'static str, _: usize) {}
    fn advance(&self, _: usize) {}
    fn end(&self) {}
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
    /// Task files legwork wrote earlier for tasks the campaign no longer has
    /// (relative to the root); left in place.
    pub stale: Vec<PathBuf>,
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
    /// Replace an existing file of ours (temp + rename).
    Write(String),
    /// Create a file believed absent; see [`create_new`].
    Create(String),
    Protected,
    Adopt(Entry),
}

/// What a write did.
enum Outcome {
    Written(String, Entry),
    Adopted(String, Entry),
    Protected(String),
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

/// The render manifest's fingerprint of the campaign as it is now (its inputs
/// and legwork's own template variables).
pub(crate) fn fingerprint(campaign: &Campaign) -> String {
    let lw = context::legwork_value();
    format!(
        "{}:{}",
        campaign.fingerprint,
        manifest::hash(lw.to_string().as_bytes())
    )
}

/// Task `i`'s script for `attempt`, as expand writes it.
pub(crate) fn render_one(
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
    flags: Flags,
    render: &dyn Fn(TaskIndex, u32, bool) -> Result<String, RenderError>,
) -> Result<Decision, RenderError> {
    let Flags {
        fast,
        force,
        dry_run,
        crashed,
    } = flags;
    let task = &plan.tasks[i];
    let rel_path = task.dir.join(TASK_FILE);
    let abs = confined(&campaign.root, &rel_path)?;
    let rel = rel_path.to_string_lossy().into_owned();
    let entry = man.entries.get(&rel);
    let (attempt, restart) = entry.map_or((1, false), |e| (e.attempt, e.restart));
    if entry.is_none() && !dry_run {
        // Not ours yet: try to create it, and look at what is there only if
        // something is (saves a stat per file on a first expand).
        let content = render(i, attempt, restart)?;
        return Ok(Decision {
            rel,
            action: Action::Create(content),
            attempt,
            restart,
        });
    }
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
            if crashed {
                Action::Write(content)
            } else if disk_hash(&abs).as_deref() == Some(new_hash.as_str()) {
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

/// How [`decide`] treats files.
#[derive(Clone, Copy)]
struct Flags {
    fast: bool,
    force: bool,
    dry_run: bool,
    /// A previous expand stopped while writing: files on disk without a manifest
    /// entry may be its half-written ones, so they are ours to replace.
    crashed: bool,
}

/// Where an expand records that it is writing; present at the start of the next
/// one only if that one stopped half-way.
fn in_progress_path(root: &Path) -> PathBuf {
    root.join(".legwork").join("render-in-progress")
}

/// Creates a task file that did not exist, writing it in place (no reader can be
/// looking at a file that did not exist; a crash half-way is covered by the
/// in-progress marker). If something is already there, decides as for an
/// existing file: adopt it when equal, replace it when forced or left by a crashed
/// run, else protect it.
fn create_new(
    root: &Path,
    d: &Decision,
    content: &str,
    force: bool,
    crashed: bool,
) -> Result<Outcome, RenderError> {
    let path = root.join(&d.rel);
    let io = |source| RenderError::Io {
        path: path.clone(),
        source,
    };
    let dir = path.parent().expect("task files have a directory");
    std::fs::create_dir_all(dir).map_err(io)?;
    match std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .mode(0o755)
        .open(&path)
    {
        Ok(mut f) => {
            f.write_all(content.as_bytes()).map_err(io)?;
            let meta = f.metadata().map_err(io)?;
            Ok(Outcome::Written(
                d.rel.clone(),
                Entry {
                    hash: manifest::hash(content.as_bytes()),
                    size: meta.len(),
                    mtime_ns: manifest::mtime_ns(&meta),
                    attempt: d.attempt,
                    restart: d.restart,
                },
            ))
        }
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
            let m = std::fs::symlink_metadata(&path).map_err(io)?;
            if !m.file_type().is_file() {
                return Err(RenderError::Escape(PathBuf::from(&d.rel)));
            }
            let new_hash = manifest::hash(content.as_bytes());
            if !crashed && disk_hash(&path).as_deref() == Some(new_hash.as_str()) {
                return Ok(match adopt(&path, new_hash, d.attempt, d.restart) {
                    Action::Adopt(e) => Outcome::Adopted(d.rel.clone(), e),
                    _ => Outcome::Protected(d.rel.clone()),
                });
            }
            if force || crashed {
                return write_atomic(&path, content, d.attempt, d.restart)
                    .map(|e| Outcome::Written(d.rel.clone(), e));
            }
            Ok(Outcome::Protected(d.rel.clone()))
        }
        Err(e) => Err(io(e)),
    }
}

/// Replaces `path` with `content` through [`crate::fsutil`] (mode 0755) and
/// returns the manifest entry.
fn write_atomic(
    path: &Path,
    content: &str,
    attempt: u32,
    restart: bool,
) -> Result<Entry, RenderError> {
    let meta = crate::fsutil::write_with(path, crate::fsutil::SCRIPT_MODE, |w| {
        w.write_all(content.as_bytes())
    })
    .map_err(|source| RenderError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    Ok(Entry {
        hash: manifest::hash(content.as_bytes()),
        size: meta.len(),
        mtime_ns: manifest::mtime_ns(&meta),
        attempt,
        restart,
    })
}

/// Which task files are exactly as the manifest recorded them (size and mtime),
/// by one `fstatat` each relative to its batch's directory: a re-expand with
/// unchanged inputs is mostly this, and short relative lookups are much cheaper
/// than walking every absolute path.
fn unchanged_by_stat(root: &Path, plan: &Plan, man: &Manifest) -> Vec<bool> {
    use nix::fcntl::AtFlags;
    use std::os::fd::AsRawFd;
    let per_batch: Vec<Vec<(TaskIndex, bool)>> = plan
        .batches
        .par_iter()
        .map(|b| {
            let Some(&first) = b.tasks.first() else {
                return Vec::new();
            };
            // The replica folder (`<subject>/<leg>/r<k>`) holds every task of the batch.
            let base: PathBuf = plan.tasks[first].dir.components().take(3).collect();
            let dir = std::fs::File::open(root.join(&base)).ok();
            b.tasks
                .iter()
                .map(|&t| {
                    let rel = plan.tasks[t].dir.join(TASK_FILE);
                    let ok = (|| {
                        let dir = dir.as_ref()?;
                        let e = man.entries.get(rel.to_str()?)?;
                        let below = rel.strip_prefix(&base).ok()?;
                        let st = nix::sys::stat::fstatat(
                            Some(dir.as_raw_fd()),
                            below,
                            AtFlags::AT_SYMLINK_NOFOLLOW,
                        )
                        .ok()?;
                        let is_file = st.st_mode & libc::S_IFMT == libc::S_IFREG;
                        let mtime = st.st_mtime as u64 * 1_000_000_000 + st.st_mtime_nsec as u64;
                        Some(is_file && st.st_size as u64 == e.size && mtime == e.mtime_ns)
                    })();
                    (t, ok == Some(true))
                })
                .collect()
        })
        .collect();
    let mut out = vec![false; plan.tasks.len()];
    for (t, ok) in per_batch.into_iter().flatten() {
        out[t] = ok;
    }
    out
}

/// Manifest entries no task of the plan has. Counting first keeps the usual case
/// (every entry is a task) to one lookup per task.
fn stale_files(plan: &Plan, man: &Manifest) -> Vec<PathBuf> {
    let rels: Vec<String> = plan
        .tasks
        .iter()
        .map(|t| t.dir.join(TASK_FILE).to_string_lossy().into_owned())
        .collect();
    let known = rels.iter().filter(|r| man.entries.contains_key(*r)).count();
    if known == man.entries.len() {
        return Vec::new();
    }
    let planned: std::collections::HashSet<&str> = rels.iter().map(String::as_str).collect();
    let mut stale: Vec<PathBuf> = man
        .entries
        .keys()
        .filter(|k| !planned.contains(k.as_str()))
        .map(PathBuf::from)
        .collect();
    stale.sort();
    stale
}

/// A symbolic link among the upper levels of the tree (subject, leg, replica)
/// could send writes outside the root: refuse it.
fn refuse_symlinked_dirs(root: &Path, plan: &Plan) -> Result<(), RenderError> {
    let mut seen = std::collections::HashSet::new();
    for b in &plan.batches {
        let Some(&t) = b.tasks.first() else { continue };
        let mut rel = PathBuf::new();
        for (depth, c) in plan.tasks[t].dir.components().enumerate() {
            if depth >= 3 {
                break;
            }
            rel.push(c);
            if seen.insert(rel.clone()) {
                if let Ok(m) = std::fs::symlink_metadata(root.join(&rel)) {
                    if m.file_type().is_symlink() {
                        return Err(RenderError::Escape(rel));
                    }
                }
            }
        }
    }
    Ok(())
}

/// Renders every task of the plan into the tree under the campaign root,
/// reporting no progress (see [`write_tree_with`]).
pub fn write_tree(
    campaign: &Campaign,
    plan: &Plan,
    opts: &RenderOptions,
) -> Result<TreeReport, RenderError> {
    write_tree_with(campaign, plan, opts, &NoProgress)
}

/// Renders every task of the plan into the tree under the campaign root,
/// reporting progress to `progress`.
///
/// Every template is rendered before anything is written, so a template error
/// leaves the tree as it was. Steps: decide per task (in parallel), sort the
/// decisions, write (in parallel, under the in-progress marker), record what was
/// written in the manifest.
pub fn write_tree_with(
    campaign: &Campaign,
    plan: &Plan,
    opts: &RenderOptions,
    progress: &dyn Progress,
) -> Result<TreeReport, RenderError> {
    if !campaign.root.is_absolute() {
        return Err(RenderError::Escape(campaign.root.clone()));
    }
    let tera = templates::load_tera(campaign).map_err(RenderError::Templates)?;
    refuse_symlinked_dirs(&campaign.root, plan)?;
    let mut man = Manifest::load(&campaign.root);
    let fp = fingerprint(campaign);
    let flags = Flags {
        fast: !opts.force && man.fingerprint == fp,
        force: opts.force,
        dry_run: opts.dry_run,
        crashed: in_progress_path(&campaign.root).exists(),
    };
    tracing::debug!(
        tasks = plan.tasks.len(),
        manifest_entries = man.entries.len(),
        fast = flags.fast,
        crashed = flags.crashed,
        "rendering the tree under {}",
        campaign.root.display()
    );
    if flags.crashed {
        tracing::warn!(
            "a previous expand stopped while writing; files it may have half-written are replaced"
        );
    }
    let decisions = decide_all(campaign, plan, &tera, &man, flags, progress)?;

    let mut report = TreeReport {
        dry_run: opts.dry_run,
        stale: stale_files(plan, &man),
        ..Default::default()
    };
    let mut changed = man.fingerprint != fp || man.replayed;
    let to_write = triage(&decisions, &mut report, &mut man, &mut changed);
    if opts.dry_run {
        report.written = to_write.len();
        return Ok(report);
    }
    let marker = in_progress_path(&campaign.root);
    if !to_write.is_empty() {
        let io = |source| RenderError::Io {
            path: marker.clone(),
            source,
        };
        std::fs::create_dir_all(marker.parent().expect("has a parent")).map_err(io)?;
        std::fs::write(&marker, format!("{}\n", std::process::id())).map_err(io)?;
    }
    let results = write_all(&campaign.root, &to_write, flags, progress);
    let first_err = record_outcomes(results, &mut report, &mut man, &mut changed);
    tracing::debug!(
        written = report.written,
        unchanged = report.unchanged,
        protected = report.protected.len(),
        "tree rendered"
    );
    if first_err.is_none() {
        man.fingerprint = fp;
    }
    if changed {
        man.save(&campaign.root).map_err(|source| RenderError::Io {
            path: manifest::path(&campaign.root),
            source,
        })?;
    }
    if first_err.is_none() && (changed || flags.crashed) {
        let _ = std::fs::remove_file(&marker);
    }
    match first_err {
        Some(e) => Err(e),
        None => Ok(report),
    }
}

/// Step 1: what to do with each task's file, in plan order (renders in
/// parallel; with an unchanged fingerprint, files matching the manifest by
/// `stat` are not rendered at all).
fn decide_all(
    campaign: &Campaign,
    plan: &Plan,
    tera: &tera::Tera,
    man: &Manifest,
    flags: Flags,
    progress: &dyn Progress,
) -> Result<Vec<Decision>, RenderError> {
    let builder = ContextBuilder::for_rendering(campaign, plan);
    let render = |i, a, r| render_one(tera, &builder, campaign, plan, i, a, r);
    let unchanged = if flags.fast {
        unchanged_by_stat(&campaign.root, plan, man)
    } else {
        vec![false; plan.tasks.len()]
    };
    progress.begin("rendering", plan.tasks.len());
    let indices: Vec<TaskIndex> = (0..plan.tasks.len()).collect();
    let decisions = indices
        .par_chunks(256)
        .map(|chunk| {
            let out = chunk
                .iter()
                .map(|&i| {
                    if unchanged[i] {
                        Ok(Decision {
                            rel: String::new(),
                            action: Action::Unchanged,
                            attempt: 1,
                            restart: false,
                        })
                    } else {
                        decide(campaign, plan, i, man, flags, &render)
                    }
                })
                .collect::<Result<Vec<_>, _>>();
            progress.advance(chunk.len());
            out
        })
        .collect::<Result<Vec<Vec<_>>, _>>();
    progress.end();
    Ok(decisions?.into_iter().flatten().collect())
}

/// Step 2: counts the unchanged and protected files into `report`, records
/// adopted files in the manifest (unless a dry run), and returns the files to
/// write.
fn triage<'d>(
    decisions: &'d [Decision],
    report: &mut TreeReport,
    man: &mut Manifest,
    changed: &mut bool,
) -> Vec<&'d Decision> {
    let mut to_write = Vec::new();
    for d in decisions {
        match &d.action {
            Action::Unchanged => report.unchanged += 1,
            Action::Adopt(e) => {
                report.unchanged += 1;
                if !report.dry_run {
                    man.entries.insert(d.rel.clone(), e.clone());
                    *changed = true;
                }
            }
            Action::Protected => report.protected.push(PathBuf::from(&d.rel)),
            Action::Write(_) | Action::Create(_) => to_write.push(d),
        }
    }
    to_write
}

/// Step 3: writes the files (in parallel): new ones created in place, ours
/// replaced through [`crate::fsutil`].
fn write_all(
    root: &Path,
    to_write: &[&Decision],
    flags: Flags,
    progress: &dyn Progress,
) -> Vec<Result<Outcome, RenderError>> {
    let intents: Vec<manifest::Intent> = to_write
        .iter()
        .filter_map(|d| match &d.action {
            Action::Write(c) => Some(manifest::Intent {
                rel: d.rel.clone(),
                hash: manifest::hash(c.as_bytes()),
                attempt: d.attempt,
                restart: d.restart,
            }),
            _ => None,
        })
        .collect();
    if let Err(source) = manifest::record_intents(root, &intents) {
        return vec![Err(RenderError::Io {
            path: manifest::journal_path(root),
            source,
        })];
    }
    progress.begin("writing", to_write.len());
    let results = to_write
        .par_chunks(128)
        .flat_map_iter(|chunk| {
            let out: Vec<_> = chunk
                .iter()
                .map(|d| match &d.action {
                    Action::Create(c) => create_new(root, d, c, flags.force, flags.crashed),
                    Action::Write(c) => write_atomic(&root.join(&d.rel), c, d.attempt, d.restart)
                        .map(|e| Outcome::Written(d.rel.clone(), e)),
                    _ => unreachable!("only writes are queued"),
                })
                .inspect(|_| after_script_write())
                .collect();
            progress.advance(chunk.len());
            out
        })
        .collect();
    progress.end();
    results
}

/// Step 4: records what was written in `report` and the manifest; returns the
/// first error (the files written before and after it are recorded too).
fn record_outcomes(
    results: Vec<Result<Outcome, RenderError>>,
    report: &mut TreeReport,
    man: &mut Manifest,
    changed: &mut bool,
) -> Option<RenderError> {
    let mut first_err = None;
    for r in results {
        match r {
            Ok(Outcome::Written(rel, e)) => {
                report.written += 1;
                man.entries.insert(rel, e);
                *changed = true;
            }
            Ok(Outcome::Adopted(rel, e)) => {
                report.unchanged += 1;
                man.entries.insert(rel, e);
                *changed = true;
            }
            Ok(Outcome::Protected(rel)) => report.protected.push(PathBuf::from(rel)),
            Err(e) => {
                first_err.get_or_insert(e);
            }
        }
    }
    report.protected.sort();
    first_err
}

/// Renders (without writing) every task's script, in parallel, so that `check`
/// finds an undefined variable or a failing filter before `expand` does, also one
/// that only some windows or replicas reach; the first failure in plan order is
/// reported.
pub fn probe(campaign: &Campaign, plan: &Plan) -> Result<(), RenderError> {
    let tera = templates::load_tera(campaign).map_err(RenderError::Templates)?;
    let builder = ContextBuilder::for_rendering(campaign, plan);
    match (0..plan.tasks.len())
        .into_par_iter()
        .find_map_first(|t| render_one(&tera, &builder, campaign, plan, t, 1, false).err())
    {
        Some(e) => Err(e),
        None => Ok(()),
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
    let builder = ContextBuilder::for_rendering(campaign, plan);
    let mut man = Manifest::load(&campaign.root);
    let mut rendered = Vec::with_capacity(tasks.len());
    for &(i, attempt, restart) in tasks {
        let rel_path = plan.tasks[i].dir.join(TASK_FILE);
        let abs = confined(&campaign.root, &rel_path)?;
        let content = render_one(&tera, &builder, campaign, plan, i, attempt, restart)?;
        rendered.push((rel_path, abs, content, attempt, restart));
    }
    let crashed = in_progress_path(&campaign.root).exists();
    let mut out = Vec::with_capacity(rendered.len());
    let mut writes = Vec::with_capacity(rendered.len());
    for (rel_path, abs, content, attempt, restart) in rendered {
        let rel = rel_path.to_string_lossy().into_owned();
        let edited = match (std::fs::metadata(&abs).ok(), man.entries.get(&rel)) {
            (Some(m), Some(e)) => {
                !entry_matches(&m, e) && disk_hash(&abs).as_deref() != Some(e.hash.as_str())
            }
            // Without an entry a file is ours only if an expand stopped while
            // creating it.
            (Some(_), None) => !crashed,
            (None, _) => false,
        };
        if edited {
            tracing::warn!(
                "{} was edited by hand; left as it is for the rerun",
                abs.display()
            );
        } else {
            writes.push((rel, abs.clone(), content, attempt, restart));
        }
        out.push(abs);
    }
    let intents: Vec<manifest::Intent> = writes
        .iter()
        .map(|(rel, _, content, attempt, restart)| manifest::Intent {
            rel: rel.clone(),
            hash: manifest::hash(content.as_bytes()),
            attempt: *attempt,
            restart: *restart,
        })
        .collect();
    manifest::record_intents(&campaign.root, &intents).map_err(|source| RenderError::Io {
        path: manifest::journal_path(&campaign.root),
        source,
    })?;
    for (rel, abs, content, attempt, restart) in writes {
        let e = write_atomic(&abs, &content, attempt, restart)?;
        after_script_write();
        man.entries.insert(rel, e);
    }
    man.save(&campaign.root).map_err(|source| RenderError::Io {
        path: manifest::path(&campaign.root),
        source,
    })?;
    Ok(out)
}

/// Test hook for the crash tests: with `LEGWORK_KILL_AFTER_SCRIPT_WRITES=k` in
/// its environment the process kills itself (SIGKILL) right after its k-th task
/// script write, so a test can stop a render between any two writes.
fn after_script_write() {
    use std::sync::atomic::{AtomicUsize, Ordering};
    static LIMIT: std::sync::OnceLock<Option<usize>> = std::sync::OnceLock::new();
    static WRITTEN: AtomicUsize = AtomicUsize::new(0);
    let limit = LIMIT.get_or_init(|| {
        std::env::var("LEGWORK_KILL_AFTER_SCRIPT_WRITES")
            .ok()
            .and_then(|v| v.parse().ok())
    });
    if let Some(k) = *limit {
        if WRITTEN.fetch_add(1, Ordering::SeqCst) + 1 >= k {
            let _ = nix::sys::signal::raise(nix::sys::signal::Signal::SIGKILL);
        }
    }
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
