//! PBS Pro and Torque: `qsub` (arrays with `-J`, or `-t` for Torque), one
//! `qstat -f -x -t` per poll for every job of the campaign, `qselect -N` to find
//! jobs by name, `qdel`.
//!
//! PBS Pro arrays take a range only, so a subset of a batch is numbered densely
//! from 1 and the batch script maps each index back to its task.

use super::kind::KindSpec;
use super::runner::{RunError, Runner};
use super::{
    Dependency, JobId, JobStatus, QueryResult, QueueState, Scheduler, SchedulerError,
    SchedulerKind, Submission,
};

/// `scheduler.kind: pbs`.
pub const KIND: KindSpec = KindSpec {
    name: "pbs",
    display: "PBS",
    template: include_str!("../../templates/batch/pbs.sh.tera"),
    // a shared filesystem may show a compute node's file late.
    marker_grace_s: 120,
    runs_here: false,
    build: |cx| Box::new(Pbs::new(cx.runner)),
};

impl SchedulerKind {
    /// PBS.
    pub const PBS: SchedulerKind = SchedulerKind::of(&KIND);
}

/// The PBS client.
pub struct Pbs {
    runner: Runner,
}

impl Pbs {
    /// A client running commands through `runner`.
    pub fn new(runner: Runner) -> Self {
        Pbs { runner }
    }
}

/// Maps a PBS `job_state` letter (with the `Exit_status` for finished jobs).
/// Letters from the PBS Pro reference guide's job-state table: B begun (array),
/// E exiting, F finished, H held, M moved, Q queued, R running, S suspended,
/// T transit, U user-suspended, W waiting, X subjob finished; Torque's C
/// completed.
pub fn map_state(letter: &str, exit: Option<i32>) -> JobStatus {
    let state = match letter {
        "Q" | "W" | "T" | "M" => QueueState::Pending,
        "H" => QueueState::Held,
        "R" | "B" => QueueState::Running,
        "E" => QueueState::Completing,
        "S" | "U" => QueueState::Suspended,
        "F" | "X" | "C" => match exit {
            Some(0) => QueueState::Completed,
            // PBS reports a job it could not start or killed itself with a
            // negative exit status (from memory: -11 walltime on Torque).
            Some(-11) => QueueState::Timeout,
            Some(_) => QueueState::Failed,
            None => QueueState::Cancelled,
        },
        other => QueueState::Other(other.to_string()),
    };
    let mut st = JobStatus::new(state);
    if let Some(code) = exit {
        // PBS Pro reports a job killed by signal n as 256 + n.
        if code > 256 {
            st.signal = Some(code - 256);
        } else {
            st.exit_code = Some(code);
        }
    }
    st
}

/// Parses `qstat -f` blocks into (job id, name, status).
pub fn parse_qstat_full(out: &str) -> Vec<(String, String, JobStatus)> {
    let mut v = Vec::new();
    let mut cur: Option<(String, String, String, Option<i32>)> = None;
    let flush = |c: Option<(String, String, String, Option<i32>)>, v: &mut Vec<_>| {
        if let Some((id, name, st, exit)) = c {
            v.push((id, name, map_state(&st, exit)));
        }
    };
    for line in out.lines() {
        if let Some(id) = line.strip_prefix("Job Id:") {
            flush(cur.take(), &mut v);
            cur = Some((id.trim().to_string(), String::new(), String::new(), None));
        } else if let (Some(c), Some((k, val))) = (cur.as_mut(), line.split_once('=')) {
            match k.trim() {
                "Job_Name" => c.1 = val.trim().to_string(),
                "job_state" => c.2 = val.trim().to_string(),
                "Exit_status" | "exit_status" => c.3 = val.trim().parse().ok(),
                _ => {}
            }
        }
    }
    flush(cur, &mut v);
    v
}

impl Scheduler for Pbs {
    fn kind(&self) -> SchedulerKind {
        SchedulerKind::PBS
    }

    fn array_indices(&self, positions: &[usize]) -> Vec<usize> {
        (1..=positions.len()).collect()
    }

    fn index_variable(&self) -> &'static str {
        "PBS_ARRAY_INDEX"
    }

    fn submit(&mut self, sub: &Submission) -> Result<JobId, SchedulerError> {
        let mut args = Vec::new();
        let ids: Vec<&str> = sub
            .after
            .iter()
            .map(|d| match d {
                Dependency::AfterOk(j) | Dependency::AfterCorr(j) => j.as_str(),
            })
            .collect();
        if !ids.is_empty() {
            // An array job as a whole is `afterok` only when every subjob ended 0.
            args.push("-W".into());
            args.push(format!("depend=afterok:{}", ids.join(":")));
        }
        args.push(sub.script.display().to_string());
        let out = self.runner.run_once("qsub", &args)?;
        let id = out.stdout.trim().to_string();
        if id.is_empty() || !id.chars().next().unwrap().is_ascii_digit() {
            return Err(SchedulerError::Parse {
                command: "qsub".into(),
                detail: format!("expected a job id, got {:?}", out.stdout),
            });
        }
        Ok(id)
    }

    fn element_id(&self, job: &str, array_index: usize) -> String {
        match job.find("[]") {
            Some(i) => format!("{}[{array_index}]{}", &job[..i], &job[i + 2..]),
            None => job.to_string(),
        }
    }

    fn query(&mut self, jobs: &[JobId]) -> Result<QueryResult, SchedulerError> {
        let mut result = QueryResult {
            accounting: true,
            ..Default::default()
        };
        if jobs.is_empty() {
            return Ok(result);
        }
        let mut args = vec!["-f".into(), "-x".into(), "-t".into()];
        args.extend(jobs.iter().cloned());
        let out = match self.runner.run("qstat", &args) {
            Ok(o) => o.stdout,
            // qstat prints what it knows and complains about the rest.
            Err(RunError::Failed { stdout, .. }) => stdout,
            Err(e) => return Err(e.into()),
        };
        for (id, _, st) in parse_qstat_full(&out) {
            if !id.contains("[]") {
                result.elements.insert(id, st);
            }
        }
        Ok(result)
    }

    fn find_by_name(&mut self, name: &str) -> Result<Vec<JobId>, SchedulerError> {
        let out = match self
            .runner
            .run("qselect", &["-x".into(), "-N".into(), name.into()])
        {
            Ok(o) => o.stdout,
            Err(RunError::Failed { stdout, .. }) => stdout,
            Err(e) => return Err(e.into()),
        };
        Ok(out
            .lines()
            .map(str::trim)
            .filter(|l| !l.is_empty())
            .map(String::from)
            .collect())
    }

    fn cancel(&mut self, elements: &[String]) -> Result<(), SchedulerError> {
        for chunk in elements.chunks(200) {
            match self.runner.run("qdel", chunk) {
                Ok(_) => {}
                Err(RunError::Failed { .. }) => {
                    tracing::info!("qdel reported some elements already finished")
                }
                Err(e) => return Err(e.into()),
            }
        }
        Ok(())
    }
}
