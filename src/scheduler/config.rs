//! The `scheduler:` section of a campaign file.

use super::SchedulerKind;
use serde::{Deserialize, Serialize};

/// The `scheduler:` section.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SchedulerConfig {
    /// Which scheduler.
    #[serde(default)]
    pub kind: SchedulerKind,
    /// Most tasks queued or running at once (0: no limit).
    #[serde(default = "default_max_queued")]
    pub max_queued: u64,
    /// Attempts per task before resume gives up on it.
    #[serde(default = "default_max_attempts")]
    pub max_attempts: u32,
    /// Seconds between polls of the queue.
    #[serde(default = "default_poll")]
    pub poll_seconds: f64,
    /// The local executor's concurrency (default: the machine's cores).
    #[serde(default)]
    pub max_parallel: Option<usize>,
    /// Batch-script template, relative to the campaign's template folder; default
    /// legwork's built-in one for the kind.
    #[serde(default)]
    pub batch_template: Option<String>,
    /// Free-form options passed to batch templates as `scheduler.options`.
    #[serde(default)]
    pub options: serde_json::Map<String, serde_json::Value>,
    /// Factor applied to a task's walltime when resume resubmits it after a
    /// walltime kill.
    #[serde(default = "default_walltime_factor")]
    pub walltime_factor: f64,
    /// Most elements of one array running at once (Slurm `%`, LSF `%`, Grid
    /// Engine `-tc`; 0: no limit).
    #[serde(default)]
    pub array_throttle: usize,
    /// Seconds to wait for the exit marker of a task the scheduler no longer
    /// lists (or lists as completed) before calling it lost: on a shared
    /// filesystem a file written on the compute node can take a while to show on
    /// the login node. Default: the kind's own (0 for the local executor, 120 for
    /// the others).
    #[serde(default)]
    pub marker_grace_seconds: Option<u64>,
    /// Seconds one scheduler command may take before it is stopped (a submission
    /// stopped this way is looked up by name before anything else happens).
    #[serde(default = "default_command_timeout")]
    pub command_timeout_seconds: u64,
    /// Seconds legwork keeps asking an unreachable scheduler (capped exponential
    /// back-off) before a query failure ends `watch` or `run`.
    #[serde(default = "default_outage_wait")]
    pub outage_wait_seconds: u64,
    /// The folder holding the scheduler's commands (`sbatch`, `squeue`, …), for a
    /// site with several installations; default: found on `PATH`.
    #[serde(default)]
    pub commands_dir: Option<std::path::PathBuf>,
    /// Variables added to the environment of every scheduler command (not a
    /// campaign key: for programs that embed legwork, and for tests, which must
    /// not change the process's own environment).
    #[serde(skip)]
    pub command_env: Vec<(String, String)>,
    /// The legwork program that runs the local executor (not a campaign key);
    /// default: `LEGWORK_EXE` when set, else the running program.
    #[serde(skip)]
    pub executor_exe: Option<std::path::PathBuf>,
}

impl SchedulerConfig {
    /// The wait for a late exit marker, in seconds.
    pub fn marker_grace_s(&self) -> u64 {
        self.marker_grace_seconds
            .unwrap_or(self.kind.spec().marker_grace_s)
    }
}

impl Default for SchedulerConfig {
    fn default() -> Self {
        SchedulerConfig {
            kind: SchedulerKind::default(),
            max_queued: default_max_queued(),
            max_attempts: default_max_attempts(),
            poll_seconds: default_poll(),
            max_parallel: None,
            batch_template: None,
            options: Default::default(),
            walltime_factor: default_walltime_factor(),
            array_throttle: 0,
            marker_grace_seconds: None,
            command_timeout_seconds: default_command_timeout(),
            outage_wait_seconds: default_outage_wait(),
            commands_dir: None,
            command_env: Vec::new(),
            executor_exe: None,
        }
    }
}

fn default_max_queued() -> u64 {
    1000
}
fn default_max_attempts() -> u32 {
    3
}
fn default_poll() -> f64 {
    30.0
}
fn default_command_timeout() -> u64 {
    60
}
fn default_outage_wait() -> u64 {
    900
}
fn default_walltime_factor() -> f64 {
    1.5
}
