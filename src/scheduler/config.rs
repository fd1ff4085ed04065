//! The `scheduler:` section of a campaign file.

use serde::{Deserialize, Serialize};

/// Which scheduler runs the tasks.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SchedulerKind {
    /// The built-in local executor.
    #[default]
    Local,
    /// Slurm.
    Slurm,
    /// PBS Pro or Torque.
    Pbs,
    /// Sun/Son of/Univa Grid Engine.
    Sge,
    /// IBM Spectrum LSF.
    Lsf,
}

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
    /// the login node. Default 0 for the local executor, 120 for the others.
    #[serde(default)]
    pub marker_grace_seconds: Option<u64>,
    /// The folder holding the scheduler's commands (`sbatch`, `squeue`, …), for a
    /// site with several installations; default: found on `PATH`.
    #[serde(default)]
    pub commands_dir: Option<std::path::PathBuf>,
}

impl SchedulerConfig {
    /// The wait for a late exit marker, in seconds.
    pub fn marker_grace_s(&self) -> u64 {
        self.marker_grace_seconds.unwrap_or(match self.kind {
            SchedulerKind::Local => 0,
            _ => 120,
        })
    }
}

impl Default for SchedulerConfig {
    fn default() -> Self {
        SchedulerConfig {
            kind: SchedulerKind::Local,
            max_queued: default_max_queued(),
            max_attempts: default_max_attempts(),
            poll_seconds: default_poll(),
            max_parallel: None,
            batch_template: None,
            options: Default::default(),
            walltime_factor: default_walltime_factor(),
            array_throttle: 0,
            marker_grace_seconds: None,
            commands_dir: None,
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
fn default_walltime_factor() -> f64 {
    1.5
}

/// The spelling of every scheduler kind in campaign files, in declaration order,
/// taken from the serde derive of [`SchedulerKind`]: a new variant is listed
/// without another edit.
pub fn kind_names() -> Vec<&'static str> {
    /// Captures the list of variants serde reports for an unknown one.
    #[derive(Debug)]
    struct Variants(&'static [&'static str]);
    impl std::fmt::Display for Variants {
        fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
            write!(f, "{}", self.0.join(", "))
        }
    }
    impl std::error::Error for Variants {}
    impl serde::de::Error for Variants {
        fn custom<T: std::fmt::Display>(_: T) -> Self {
            Variants(&[])
        }
        fn unknown_variant(_: &str, expected: &'static [&'static str]) -> Self {
            Variants(expected)
        }
    }
    let probe = serde::de::value::StrDeserializer::<Variants>::new("");
    match SchedulerKind::deserialize(probe) {
        Err(Variants(names)) => names.to_vec(),
        Ok(_) => Vec::new(),
    }
}

#[cfg(test)]
mod kind_tests {
    use super::*;

    #[test]
    fn every_kind_is_named_once_and_reads_back() {
        let names = kind_names();
        let kinds: Vec<SchedulerKind> = names
            .iter()
            .map(|n| serde_json::from_value(serde_json::json!(n)).unwrap())
            .collect();
        // A match the compiler checks: a new variant must be counted here.
        let count = kinds
            .iter()
            .map(|k| match k {
                SchedulerKind::Local
                | SchedulerKind::Slurm
                | SchedulerKind::Pbs
                | SchedulerKind::Sge
                | SchedulerKind::Lsf => 1,
            })
            .sum::<usize>();
        assert_eq!(count, 5);
        let mut unique = kinds.clone();
        unique.dedup();
        assert_eq!(unique.len(), kinds.len());
        assert_eq!(names, ["local", "slurm", "pbs", "sge", "lsf"]);
    }
}
