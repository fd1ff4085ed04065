//! The local executor's client side: submissions become job files under
//! `<root>/.legwork/local/jobs/`, which a detached executor process
//! ([`super::local_executor`]) runs on this machine.
//!
//! `legwork submit` starts the executor when none is running; it owns the
//! running tasks, survives the legwork that started it (so `status` and `watch`
//! work as on a cluster) and exits when it has nothing left to run. If the
//! executor dies, its tasks receive SIGTERM (parent-death signal) and record it in
//! their exit markers; elements that never started are run by the next executor,
//! which any query starts again.

use super::kind::KindSpec;
use super::{
    write_file, Dependency, JobId, JobStatus, QueryResult, QueueState, Scheduler, SchedulerConfig,
    SchedulerError, SchedulerKind, Submission,
};
use fs4::fs_std::FileExt;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// One submission as the executor reads it.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct LocalJob {
    /// Job id (a number, as a string).
    pub id: String,
    /// Job name.
    pub name: String,
    /// The batch script.
    pub script: PathBuf,
    /// Array indices.
    pub indices: Vec<usize>,
    /// Jobs it waits for: (job id, element-wise).
    pub after: Vec<(String, bool)>,
    /// Walltime of each element, seconds.
    pub walltime_s: u64,
    /// CPU cores per element (counted against the executor's slots).
    pub cpus: u32,
    /// Most elements running at once (0: no limit).
    pub throttle: usize,
    /// Where element logs go.
    pub log_dir: PathBuf,
}

/// What the executor says about one element.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(tag = "state", rename_all = "snake_case")]
pub enum ElementState {
    /// Waiting for a slot or a dependency.
    Pending,
    /// Will never start: a job it waits for failed.
    DependencyFailed,
    /// Running in process group `pid`.
    Running {
        /// The element's process (and process group) id.
        pid: i32,
    },
    /// Ended.
    Ended {
        /// Exit code, if it exited.
        code: Option<i32>,
        /// Signal that ended it, if one did.
        signal: Option<i32>,
        /// Killed at its walltime.
        timeout: bool,
        /// Cancelled on request.
        cancelled: bool,
        /// Stopped because the executor itself was interrupted or died.
        interrupted: bool,
    },
}

impl ElementState {
    /// Whether it has ended (or never will start).
    pub fn is_terminal(&self) -> bool {
        matches!(self, ElementState::Ended { .. })
    }

    /// As a scheduler status.
    pub fn status(&self) -> JobStatus {
        match self {
            ElementState::Pending => JobStatus::new(QueueState::Pending),
            ElementState::DependencyFailed => JobStatus::new(QueueState::DependencyNeverSatisfied),
            ElementState::Running { .. } => JobStatus::new(QueueState::Running),
            ElementState::Ended {
                code,
                signal,
                timeout,
                cancelled,
                interrupted,
            } => {
                let state = if *timeout {
                    QueueState::Timeout
                } else if *cancelled {
                    QueueState::Cancelled
                } else if *interrupted {
                    QueueState::Other("interrupted".into())
                } else if *code == Some(0) {
                    QueueState::Completed
                } else {
                    QueueState::Failed
                };
                let mut st = JobStatus::new(state);
                st.exit_code = *code;
                st.signal = *signal;
                if *interrupted {
                    st.reason = Some("the local executor was stopped".into());
                }
                st
            }
        }
    }
}

/// The executor's status file of one job: array index → state.
pub type JobStatusFile = BTreeMap<usize, ElementState>;

/// Paths of the local executor's files.
#[derive(Debug, Clone)]
pub struct Paths {
    /// `<root>/.legwork/local`
    pub base: PathBuf,
}

impl Paths {
    /// For the campaign root `root`.
    pub fn new(root: &Path) -> Self {
        Paths {
            base: root.join(".legwork").join("local"),
        }
    }
    /// Job files.
    pub fn jobs(&self) -> PathBuf {
        self.base.join("jobs")
    }
    /// Status files.
    pub fn status(&self) -> PathBuf {
        self.base.join("status")
    }
    /// Cancel requests.
    pub fn cancel(&self) -> PathBuf {
        self.base.join("cancel")
    }
    /// The executor's lock (held while it runs).
    pub fn lock(&self) -> PathBuf {
        self.base.join("executor.lock")
    }
    /// Written by an executor once it is ready: its pid.
    pub fn ready(&self) -> PathBuf {
        self.base.join("executor.ready")
    }
    /// The job id counter.
    pub fn counter(&self) -> PathBuf {
        self.base.join("next_id")
    }
    /// The job file of `id`.
    pub fn job(&self, id: &str) -> PathBuf {
        self.jobs().join(format!("{id}.json"))
    }
    /// The status file of `id`.
    pub fn status_of(&self, id: &str) -> PathBuf {
        self.status().join(format!("{id}.json"))
    }
}

/// Whether an executor holds the lock.
pub fn executor_running(paths: &Paths) -> bool {
    let Ok(f) = std::fs::OpenOptions::new()
        .create(true)
        .truncate(false)
        .write(true)
        .open(paths.lock())
    else {
        return false;
    };
    match f.try_lock_exclusive() {
        Ok(true) => {
            let _ = FileExt::unlock(&f);
            false
        }
        _ => true,
    }
}

/// The legwork executable that runs the executor: `LEGWORK_EXE` when set, else
/// the running program.
pub fn legwork_exe() -> PathBuf {
    std::env::var_os("LEGWORK_EXE")
        .map(PathBuf::from)
        .or_else(|| std::env::current_exe().ok())
        .unwrap_or_else(|| PathBuf::from("legwork"))
}

/// `scheduler.kind: local`.
pub const KIND: KindSpec = KindSpec {
    name: "local",
    display: "local",
    template: include_str!("../../templates/batch/local.sh.tera"),
    // the local executor's files are on this machine: no shared-filesystem delay.
    marker_grace_s: 0,
    runs_here: true,
    build: |cx| Box::new(Local::new(cx.root, cx.config)),
};

impl SchedulerKind {
    /// local.
    pub const LOCAL: SchedulerKind = SchedulerKind::of(&KIND);
}

/// The local executor client.
pub struct Local {
    root: PathBuf,
    paths: Paths,
    max_parallel: usize,
    exe: PathBuf,
    env: Vec<(String, String)>,
}

impl Local {
    /// For the campaign at `root`.
    pub fn new(root: &Path, config: &SchedulerConfig) -> Self {
        let max_parallel = config.max_parallel.unwrap_or_else(|| {
            std::thread::available_parallelism()
                .map(|n| n.get())
                .unwrap_or(1)
        });
        Local {
            root: root.to_path_buf(),
            paths: Paths::new(root),
            max_parallel,
            exe: config.executor_exe.clone().unwrap_or_else(legwork_exe),
            env: config.command_env.clone(),
        }
    }

    /// Starts an executor unless one is running, and waits until it is ready.
    pub fn ensure_executor(&self) -> Result<(), SchedulerError> {
        if executor_running(&self.paths) {
            return Ok(());
        }
        let exe = self.exe.clone();
        let log = self.paths.base.join("executor.log");
        let logf = std::fs::OpenOptions::new()
            .create(true)
            .append(true)
            .open(&log)
            .map_err(|e| SchedulerError::io(&log, e))?;
        let mut cmd = std::process::Command::new(&exe);
        cmd.arg("local-executor")
            .arg(&self.root)
            .arg("--max-parallel")
            .arg(self.max_parallel.to_string())
            .envs(self.env.iter().map(|(k, v)| (k, v)))
            .stdin(std::process::Stdio::null())
            .stdout(logf.try_clone().map_err(|e| SchedulerError::io(&log, e))?)
            .stderr(logf);
        // A session of its own: Ctrl-C in the terminal that ran `legwork submit`
        // does not reach the executor, as it would not reach a cluster's jobs.
        use std::os::unix::process::CommandExt;
        unsafe {
            cmd.pre_exec(|| {
                nix::unistd::setsid()?;
                Ok(())
            });
        }
        tracing::debug!(
            "starting the local executor: {} local-executor {}",
            exe.display(),
            self.root.display()
        );
        let mut child = cmd.spawn().map_err(|e| SchedulerError::io(&exe, e))?;
        let pid = child.id().to_string();
        let start = Instant::now();
        loop {
            if std::fs::read_to_string(self.paths.ready())
                .ok()
                .as_deref()
                .map(str::trim)
                == Some(pid.as_str())
            {
                // Reap it in the background when it exits.
                std::thread::spawn(move || child.wait());
                return Ok(());
            }
            if let Ok(Some(_)) = child.try_wait() {
                // Another executor won the lock; fine if it is running.
                if executor_running(&self.paths) {
                    return Ok(());
                }
                return Err(SchedulerError::io(
                    &log,
                    std::io::Error::other("the local executor exited at start; see this log"),
                ));
            }
            if start.elapsed() > Duration::from_secs(20) {
                return Err(SchedulerError::io(
                    &log,
                    std::io::Error::other("the local executor did not start within 20 s"),
                ));
            }
            std::thread::sleep(Duration::from_millis(10));
        }
    }

    fn next_id(&self) -> Result<String, SchedulerError> {
        let p = self.paths.counter();
        let n: u64 = std::fs::read_to_string(&p)
            .ok()
            .and_then(|s| s.trim().parse().ok())
            .unwrap_or(1);
        // Skip ids already taken (a crash after writing the job, before the counter).
        let mut n = n;
        while self.paths.job(&n.to_string()).exists() {
            n += 1;
        }
        write_file(&p, (n + 1).to_string().as_bytes())?;
        Ok(n.to_string())
    }

    fn read_status(&self, id: &str) -> Option<JobStatusFile> {
        std::fs::read(self.paths.status_of(id))
            .ok()
            .and_then(|b| serde_json::from_slice(&b).ok())
    }
}

impl Scheduler for Local {
    fn kind(&self) -> SchedulerKind {
        SchedulerKind::LOCAL
    }

    fn index_variable(&self) -> &'static str {
        "LEGWORK_ARRAY_INDEX"
    }

    fn elementwise_dependencies(&self) -> bool {
        true
    }

    fn submit(&mut self, sub: &Submission) -> Result<JobId, SchedulerError> {
        for d in [self.paths.jobs(), self.paths.status(), self.paths.cancel()] {
            std::fs::create_dir_all(&d).map_err(|e| SchedulerError::io(&d, e))?;
        }
        let id = self.next_id()?;
        let job = LocalJob {
            id: id.clone(),
            name: sub.name.clone(),
            script: sub.script.clone(),
            indices: sub.elements.iter().map(|e| e.array_index).collect(),
            after: sub
                .after
                .iter()
                .map(|d| match d {
                    Dependency::AfterOk(j) => (j.clone(), false),
                    Dependency::AfterCorr(j) => (j.clone(), true),
                })
                .collect(),
            walltime_s: sub.resources.walltime_s,
            cpus: sub.resources.cpus,
            throttle: sub.throttle,
            log_dir: sub.log_dir.clone(),
        };
        let bytes = serde_json::to_vec_pretty(&job).expect("serialisable");
        let path = self.paths.job(&id);
        tracing::debug!(command = %format!("local submit {} -> {}", sub.script.display(), path.display()), "running");
        write_file(&path, &bytes)?;
        self.ensure_executor()?;
        Ok(id)
    }

    fn element_id(&self, job: &str, array_index: usize) -> String {
        format!("{job}_{array_index}")
    }

    fn query(&mut self, jobs: &[JobId]) -> Result<QueryResult, SchedulerError> {
        let mut result = QueryResult {
            accounting: true,
            ..Default::default()
        };
        let mut running = executor_running(&self.paths);
        let statuses: Vec<(String, Option<JobStatusFile>)> = jobs
            .iter()
            .map(|j| (j.clone(), self.read_status(j)))
            .collect();
        let unfinished = statuses.iter().any(|(j, s)| match s {
            Some(s) => s.values().any(|e| !e.is_terminal()),
            None => self.paths.job(j).exists(),
        });
        if unfinished && !running {
            // Elements that never started still belong to this machine's queue:
            // start an executor for them (it marks what the dead one was running
            // as interrupted).
            self.ensure_executor()?;
            running = true;
        }
        let statuses: Vec<(String, Option<JobStatusFile>)> = if unfinished {
            jobs.iter()
                .map(|j| (j.clone(), self.read_status(j)))
                .collect()
        } else {
            statuses
        };
        for (job, st) in statuses {
            // Submitted but not yet read by the executor: every element waits.
            let st = st.or_else(|| {
                let bytes = std::fs::read(self.paths.job(&job)).ok()?;
                let j: LocalJob = serde_json::from_slice(&bytes).ok()?;
                Some(
                    j.indices
                        .iter()
                        .map(|i| (*i, ElementState::Pending))
                        .collect(),
                )
            });
            let Some(st) = st else { continue };
            for (idx, e) in st {
                if !running && !e.is_terminal() {
                    continue;
                }
                result
                    .elements
                    .insert(self.element_id(&job, idx), e.status());
            }
        }
        Ok(result)
    }

    fn find_by_name(&mut self, name: &str) -> Result<Vec<JobId>, SchedulerError> {
        let mut ids = Vec::new();
        let Ok(rd) = std::fs::read_dir(self.paths.jobs()) else {
            return Ok(ids);
        };
        for e in rd.flatten() {
            if let Ok(b) = std::fs::read(e.path()) {
                if let Ok(j) = serde_json::from_slice::<LocalJob>(&b) {
                    if j.name == name {
                        ids.push(j.id);
                    }
                }
            }
        }
        ids.sort();
        Ok(ids)
    }

    fn cancel(&mut self, elements: &[String]) -> Result<(), SchedulerError> {
        let dir = self.paths.cancel();
        std::fs::create_dir_all(&dir).map_err(|e| SchedulerError::io(&dir, e))?;
        for e in elements {
            let p = dir.join(e);
            std::fs::write(&p, b"").map_err(|err| SchedulerError::io(&p, err))?;
        }
        Ok(())
    }
}
