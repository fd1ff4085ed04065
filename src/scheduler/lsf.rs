//! IBM Spectrum LSF: `bsub < script` array jobs (`-J name[…]%n`, `-w done(…)`),
//! one `bjobs -a` per poll for all of the user's jobs, `bkill`.
//!
//! LSF array indices start at 1, so a batch position p is array index p + 1.

use super::kind::KindSpec;
use super::runner::{RunError, Runner};
use super::{
    Dependency, JobId, JobStatus, QueryResult, QueueState, Scheduler, SchedulerError,
    SchedulerKind, Submission,
};
use std::collections::HashSet;

/// `scheduler.kind: lsf`.
pub const KIND: KindSpec = KindSpec {
    name: "lsf",
    display: "LSF",
    template: include_str!("../../templates/batch/lsf.sh.tera"),
    // a shared filesystem may show a compute node's file late.
    marker_grace_s: 120,
    runs_here: false,
    build: |cx| Box::new(Lsf::new(cx.runner)),
};

impl SchedulerKind {
    /// LSF.
    pub const LSF: SchedulerKind = SchedulerKind::of(&KIND);
}

/// The LSF client.
pub struct Lsf {
    runner: Runner,
}

impl Lsf {
    /// A client running commands through `runner`.
    pub fn new(runner: Runner) -> Self {
        Lsf { runner }
    }
}

/// Maps an LSF job state (bjobs `STAT`: PEND, PROV, PSUSP, RUN, USUSP, SSUSP,
/// DONE, EXIT, UNKWN, WAIT, ZOMBI, as listed in the bjobs reference).
pub fn map_state(stat: &str, exit: Option<i32>) -> JobStatus {
    let state = match stat {
        "PEND" | "WAIT" | "PROV" => QueueState::Pending,
        "PSUSP" => QueueState::Held,
        "RUN" => QueueState::Running,
        "USUSP" | "SSUSP" => QueueState::Suspended,
        "DONE" => QueueState::Completed,
        "EXIT" => QueueState::Failed,
        "ZOMBI" => QueueState::NodeFail,
        other => QueueState::Other(other.to_string()),
    };
    let mut st = JobStatus::new(state);
    st.exit_code = exit;
    st
}

/// Parses `bjobs -o 'jobid jobindex stat exit_code job_name delimiter=\"|\"'
/// -noheader` into (element id, name, status).
pub fn parse_bjobs(out: &str) -> Vec<(String, String, JobStatus)> {
    out.lines()
        .filter_map(|l| {
            let f: Vec<&str> = l.trim().split('|').collect();
            if f.len() < 5 || !f[0].chars().all(|c| c.is_ascii_digit()) || f[0].is_empty() {
                return None;
            }
            let exit = f[3].trim().parse().ok();
            let id = if f[1].trim() == "0" {
                f[0].to_string()
            } else {
                format!("{}[{}]", f[0], f[1].trim())
            };
            // job_name of an element is `name[index]`.
            let name = f[4].split('[').next().unwrap_or("").to_string();
            Some((id, name, map_state(f[2].trim(), exit)))
        })
        .collect()
}

const FORMAT: &str = "jobid jobindex stat exit_code job_name delimiter='|'";

impl Scheduler for Lsf {
    fn kind(&self) -> SchedulerKind {
        SchedulerKind::LSF
    }

    fn array_indices(&self, positions: &[usize]) -> Vec<usize> {
        positions.iter().map(|p| p + 1).collect()
    }

    fn index_variable(&self) -> &'static str {
        "LSB_JOBINDEX"
    }

    fn submit(&mut self, sub: &Submission) -> Result<JobId, SchedulerError> {
        let mut args = Vec::new();
        let conds: Vec<String> = sub
            .after
            .iter()
            .map(|d| match d {
                Dependency::AfterOk(j) | Dependency::AfterCorr(j) => format!("done({j})"),
            })
            .collect();
        if !conds.is_empty() {
            args.push("-w".into());
            args.push(conds.join(" && "));
        }
        let out = self.runner.run_once_stdin("bsub", &args, &sub.script)?;
        // `Job <123> is submitted to queue <normal>.`
        let id = out
            .stdout
            .split_once('<')
            .and_then(|(_, r)| r.split_once('>'))
            .map(|(id, _)| id.to_string())
            .unwrap_or_default();
        if id.is_empty() || !id.chars().all(|c| c.is_ascii_digit()) {
            return Err(SchedulerError::Parse {
                command: "bsub".into(),
                detail: format!("expected `Job <id> is submitted`, got {:?}", out.stdout),
            });
        }
        Ok(id)
    }

    fn element_id(&self, job: &str, array_index: usize) -> String {
        format!("{job}[{array_index}]")
    }

    fn query(&mut self, jobs: &[JobId]) -> Result<QueryResult, SchedulerError> {
        let wanted: HashSet<&str> = jobs.iter().map(|j| j.as_str()).collect();
        let mut result = QueryResult {
            accounting: true,
            ..Default::default()
        };
        if wanted.is_empty() {
            return Ok(result);
        }
        let out = match self.runner.run(
            "bjobs",
            &["-a".into(), "-o".into(), FORMAT.into(), "-noheader".into()],
        ) {
            Ok(o) => o.stdout,
            // "No job found" is an exit 255 with nothing useful on stdout.
            Err(RunError::Failed { stdout, .. }) => stdout,
            Err(e) => return Err(e.into()),
        };
        for (id, _, st) in parse_bjobs(&out) {
            if wanted.contains(id.split('[').next().unwrap_or("")) {
                result.elements.insert(id, st);
            }
        }
        Ok(result)
    }

    fn find_by_name(&mut self, name: &str) -> Result<Vec<JobId>, SchedulerError> {
        let out = match self.runner.run(
            "bjobs",
            &[
                "-a".into(),
                "-J".into(),
                name.into(),
                "-o".into(),
                FORMAT.into(),
                "-noheader".into(),
            ],
        ) {
            Ok(o) => o.stdout,
            Err(RunError::Failed { stdout, .. }) => stdout,
            Err(e) => return Err(e.into()),
        };
        let mut ids: Vec<String> = parse_bjobs(&out)
            .into_iter()
            .filter(|(_, n, _)| n == name)
            .map(|(id, _, _)| id.split('[').next().unwrap_or("").to_string())
            .collect();
        ids.sort();
        ids.dedup();
        Ok(ids)
    }

    fn cancel(&mut self, elements: &[String]) -> Result<(), SchedulerError> {
        for chunk in elements.chunks(200) {
            match self.runner.run("bkill", chunk) {
                Ok(_) | Err(RunError::Failed { .. }) => {}
                Err(e) => return Err(e.into()),
            }
        }
        Ok(())
    }
}
