//! Schedulers behind one trait: local executor, Slurm, PBS, SGE, LSF.
//!
//! A [`Scheduler`] submits one [`Submission`] (a subset of one batch, as one
//! array job), answers for every job of the campaign in one [`Scheduler::query`]
//! call, finds jobs by name (crash recovery) and cancels array elements. Every
//! external command goes through [`runner::Runner`].

pub mod config;
pub mod kind;
pub mod local;
pub mod local_executor;
pub mod lsf;
pub mod pbs;
pub mod runner;
pub mod script;
pub mod sge;
pub mod slurm;
mod status;

pub use config::SchedulerConfig;
pub use kind::{kind_names, KindSpec, SchedulerKind, KINDS};
pub use status::{JobStatus, QueueState};

use crate::plan::Resources;
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use thiserror::Error;

/// A scheduler's id of a submitted (array) job.
pub type JobId = String;

/// What went wrong talking to a scheduler.
#[derive(Debug, Error)]
pub enum SchedulerError {
    /// A command failed or timed out.
    #[error(transparent)]
    Run(#[from] runner::RunError),
    /// The scheduler answered something legwork does not understand.
    #[error("could not understand `{command}` output: {detail}")]
    Parse {
        /// The command.
        command: String,
        /// What was unexpected.
        detail: String,
    },
    /// Reading or writing a file legwork owns.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The error.
        source: std::io::Error,
    },
    /// The batch template could not be rendered.
    #[error("batch template {template}: {detail}")]
    Template {
        /// The template.
        template: String,
        /// What tera said.
        detail: String,
    },
}

/// [`crate::fsutil::write_atomic`] with the scheduler's error.
pub(crate) fn write_file(path: &Path, bytes: &[u8]) -> Result<(), SchedulerError> {
    crate::fsutil::write_atomic(path, bytes).map_err(|e| SchedulerError::io(path, e))
}

impl SchedulerError {
    pub(crate) fn io(path: &Path, source: std::io::Error) -> Self {
        SchedulerError::Io {
            path: path.to_path_buf(),
            source,
        }
    }
}

/// One array element of a submission.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Element {
    /// Its array index as the scheduler sees it (see [`Scheduler::array_indices`]).
    pub array_index: usize,
    /// Task id.
    pub task_id: String,
    /// The task's directory (absolute).
    pub dir: PathBuf,
    /// Attempt number, from 1.
    pub attempt: u32,
}

/// How a submission waits for jobs already submitted.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Dependency {
    /// Start only after every element of that job ended successfully.
    AfterOk(JobId),
    /// Element i starts only after element i of that job ended successfully.
    AfterCorr(JobId),
}

/// A subset of one batch submitted as one array job.
#[derive(Debug, Clone)]
pub struct Submission {
    /// Job name: carries the campaign, the batch and the submission number, so
    /// legwork can find its own jobs (see [`job_name`]).
    pub name: String,
    /// The batch id.
    pub batch_id: String,
    /// The elements, by increasing array index.
    pub elements: Vec<Element>,
    /// Resources of every element (walltime already multiplied after a walltime kill).
    pub resources: Resources,
    /// Jobs this one waits for.
    pub after: Vec<Dependency>,
    /// Most elements running at once (0: no limit).
    pub throttle: usize,
    /// The campaign root.
    pub root: PathBuf,
    /// The rendered batch script.
    pub script: PathBuf,
    /// Where the scheduler writes the job's standard output and error.
    pub log_dir: PathBuf,
}

/// The answer of one poll: the status of every element the scheduler still knows.
#[derive(Debug, Clone, Default)]
pub struct QueryResult {
    /// Element id ([`Scheduler::element_id`]) → status.
    pub elements: HashMap<String, JobStatus>,
    /// Whether terminal states come from accounting (sacct, qacct, bhist-like
    /// history) rather than only from the live queue.
    pub accounting: bool,
}

/// One scheduler.
pub trait Scheduler: Send {
    /// Which kind.
    fn kind(&self) -> SchedulerKind;

    /// The array indices this scheduler uses for batch positions `positions`
    /// (sorted). Slurm and the local executor use the position itself, so sparse
    /// subsets keep their window numbers; others renumber densely.
    fn array_indices(&self, positions: &[usize]) -> Vec<usize> {
        positions.to_vec()
    }

    /// The environment variable holding the array index inside a job.
    fn index_variable(&self) -> &'static str;

    /// Whether element-wise dependencies (`aftercorr`) are supported; if not,
    /// legwork waits for the whole job instead.
    fn elementwise_dependencies(&self) -> bool {
        false
    }

    /// Submits one array job and returns its id.
    fn submit(&mut self, sub: &Submission) -> Result<JobId, SchedulerError>;

    /// The id of one element of an array job as [`Scheduler::query`] reports it.
    fn element_id(&self, job: &str, array_index: usize) -> String;

    /// The status of every element of these jobs that the scheduler still knows,
    /// in a fixed number of commands whatever the number of jobs.
    fn query(&mut self, jobs: &[JobId]) -> Result<QueryResult, SchedulerError>;

    /// Jobs (ids) carrying exactly this name, live or recently ended.
    fn find_by_name(&mut self, name: &str) -> Result<Vec<JobId>, SchedulerError>;

    /// Cancels these elements (ids from [`Scheduler::element_id`]).
    fn cancel(&mut self, elements: &[String]) -> Result<(), SchedulerError>;
}

/// Builds the scheduler a campaign asks for. `root` is the campaign root (the
/// local executor keeps its queue under `<root>/.legwork/local/`); `campaign` its
/// name (Grid Engine's accounting is searched by job-name pattern).
pub fn build(config: &SchedulerConfig, root: &Path, campaign: &str) -> Box<dyn Scheduler> {
    let runner = runner::Runner {
        program_dir: config.commands_dir.clone(),
        env: config.command_env.clone(),
        timeout: std::time::Duration::from_secs(config.command_timeout_seconds.max(1)),
        ..runner::Runner::default()
    };
    (config.kind.spec().build)(kind::BuildContext {
        config,
        root,
        campaign,
        runner,
    })
}

/// The job name of submission number `submission` of batch `batch_id` of campaign
/// `campaign`: `lw.<campaign>.<batch>.s<submission>`, with every character a
/// scheduler might reject replaced by `-` (`/` becomes `.`), and the middle
/// shortened with a hash when it would exceed 200 characters (PBS Pro's limit is
/// 236).
pub fn job_name(campaign: &str, batch_id: &str, submission: u64) -> String {
    fn clean(s: &str) -> String {
        s.chars()
            .map(|c| match c {
                'a'..='z' | 'A'..='Z' | '0'..='9' | '-' | '_' => c,
                '/' => '.',
                _ => '-',
            })
            .collect()
    }
    let mut body = format!("{}.{}", clean(campaign), clean(batch_id));
    if body.len() > 180 {
        use sha2::Digest;
        let h = sha2::Sha256::digest(body.as_bytes());
        let hex: String = h.iter().take(6).map(|b| format!("{b:02x}")).collect();
        body = format!("{}+{hex}", &body[..160]);
    }
    format!("lw.{body}.s{submission}")
}

/// The submission number encoded in a job name made by [`job_name`].
pub fn submission_of_name(name: &str) -> Option<u64> {
    name.rsplit_once(".s").and_then(|(_, n)| n.parse().ok())
}

/// `HH:MM:SS` (hours may exceed 24).
pub fn hms(seconds: u64) -> String {
    format!(
        "{:02}:{:02}:{:02}",
        seconds / 3600,
        (seconds / 60) % 60,
        seconds % 60
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn job_names_are_safe_and_carry_the_submission() {
        let n = job_name("orrin demo", "ork-01+ork-02/complex/r1/production", 17);
        assert_eq!(n, "lw.orrin-demo.ork-01-ork-02.complex.r1.production.s17");
        assert_eq!(submission_of_name(&n), Some(17));
        let long = job_name("c", &"x".repeat(400), 3);
        assert!(long.len() < 200, "{}", long.len());
        assert_eq!(submission_of_name(&long), Some(3));
    }

    #[test]
    fn hms_formats_long_walltimes() {
        assert_eq!(hms(90), "00:01:30");
        assert_eq!(hms(100 * 3600 + 61), "100:01:01");
    }
}
