//! Grid Engine (SGE, Son of Grid Engine, Univa/Altair): `qsub -terse` array jobs
//! (`-t`, `-tc` throttle, `-hold_jid`), one `qstat` for live jobs and one `qacct`
//! (by the campaign's job-name pattern) for ended ones per poll, `qdel`.
//!
//! Grid Engine arrays take a range only, so a subset of a batch is numbered
//! densely from 1 and the batch script maps each index back to its task.

use super::kind::KindSpec;
use super::runner::{RunError, Runner};
use super::{
    Dependency, JobId, JobStatus, QueryResult, QueueState, Scheduler, SchedulerError,
    SchedulerKind, Submission,
};
use std::collections::HashSet;

/// `scheduler.kind: sge`.
pub const KIND: KindSpec = KindSpec {
    name: "sge",
    display: "Grid Engine",
    template: include_str!("../../templates/batch/sge.sh.tera"),
    // a shared filesystem may show a compute node's file late.
    marker_grace_s: 120,
    runs_here: false,
    build: |cx| Box::new(Sge::new(cx.runner, cx.campaign)),
};

impl SchedulerKind {
    /// Grid Engine.
    pub const SGE: SchedulerKind = SchedulerKind::of(&KIND);
}

/// The Grid Engine client.
pub struct Sge {
    runner: Runner,
    pattern: String,
}

impl Sge {
    /// A client for the campaign `campaign`, running commands through `runner`.
    pub fn new(runner: Runner, campaign: &str) -> Self {
        let prefix = super::job_name(campaign, "", 0);
        let prefix = prefix.trim_end_matches(".s0").trim_end_matches('.');
        Sge {
            runner,
            pattern: format!("{prefix}.*"),
        }
    }
}

/// Maps a Grid Engine state code (`qw`, `hqw`, `r`, `t`, `Rr`, `s`, `Eqw`, `dr`,
/// …) as listed in the sge_status(5) manual page.
pub fn map_state(code: &str) -> QueueState {
    if code.contains('E') {
        QueueState::Held
    } else if code.contains('d') {
        QueueState::Completing
    } else if code.contains('h') {
        QueueState::Held
    } else if code.contains('q') || code.contains('w') {
        QueueState::Pending
    } else if code.contains('s') || code.contains('S') || code.contains('T') {
        QueueState::Suspended
    } else if code.contains('r') || code.contains('t') {
        QueueState::Running
    } else {
        QueueState::Other(code.to_string())
    }
}

/// Expands a `ja-task-ID` field (`3`, `2-5:1`, `1,4`, `1-9:2`).
fn expand_tasks(field: &str) -> Vec<usize> {
    let mut v = Vec::new();
    for part in field.split(',') {
        let (range, step) = part.split_once(':').unwrap_or((part, "1"));
        let step: usize = step.parse().unwrap_or(1).max(1);
        match range.split_once('-') {
            Some((a, b)) => {
                if let (Ok(a), Ok(b)) = (a.parse::<usize>(), b.parse::<usize>()) {
                    v.extend((a..=b).step_by(step));
                }
            }
            None => v.extend(range.parse::<usize>().ok()),
        }
    }
    v
}

/// Parses plain `qstat` output into (element id `job.task`, status).
pub fn parse_qstat(out: &str) -> Vec<(String, JobStatus)> {
    let mut v = Vec::new();
    for line in out.lines() {
        let f: Vec<&str> = line.split_whitespace().collect();
        if f.len() < 5 || !f[0].chars().all(|c| c.is_ascii_digit()) {
            continue;
        }
        let state = map_state(f[4]);
        // Running tasks have a queue column; pending ones do not, so the task
        // field is the last one when it looks like a task list.
        let last = f[f.len() - 1];
        let tasks = if f.len() >= 9
            && last
                .chars()
                .all(|c| c.is_ascii_digit() || ",-:".contains(c))
        {
            expand_tasks(last)
        } else {
            vec![]
        };
        for t in tasks {
            v.push((format!("{}.{t}", f[0]), JobStatus::new(state.clone())));
        }
    }
    v
}

/// Parses `qacct -j` records into (element id, job name, status).
pub fn parse_qacct(out: &str) -> Vec<(String, String, JobStatus)> {
    let mut v = Vec::new();
    for rec in out.split("==============================================================") {
        let mut name = String::new();
        let mut job = String::new();
        let mut task = String::new();
        let mut failed = String::new();
        let mut exit: Option<i32> = None;
        for line in rec.lines() {
            let Some((k, val)) = line.split_once(char::is_whitespace) else {
                continue;
            };
            let val = val.trim();
            match k {
                "jobname" => name = val.into(),
                "jobnumber" => job = val.into(),
                "taskid" => task = val.into(),
                "failed" => failed = val.into(),
                "exit_status" => exit = val.split_whitespace().next().and_then(|x| x.parse().ok()),
                _ => {}
            }
        }
        if job.is_empty() {
            continue;
        }
        let failed_code = failed.split_whitespace().next().unwrap_or("0");
        let state = if failed.contains("h_rt") || failed.contains("s_rt") {
            QueueState::Timeout
        } else if failed_code != "0" {
            QueueState::Failed
        } else if exit == Some(0) {
            QueueState::Completed
        } else {
            QueueState::Failed
        };
        let mut st = JobStatus::new(state);
        st.exit_code = exit;
        if failed_code == "100" && exit.is_some_and(|c| c > 128) {
            // A live cell writes `failed 100 : assumedly after job` with exit
            // status 128+n both for a task deleted with `qdel` while running and
            // for one killed by a signal from outside (SIGKILL from the kernel's
            // out-of-memory killer, say): the accounting cannot tell them apart.
            st.signal = exit.map(|c| c - 128);
            st.reason = Some(format!(
                "qacct says \"failed {failed}\": deleted with qdel, or killed from outside the job"
            ));
        } else if failed_code != "0" {
            st.reason = Some(failed.clone());
        }
        let id = if task.is_empty() || task == "undefined" {
            job.clone()
        } else {
            format!("{job}.{task}")
        };
        v.push((id, name, st));
    }
    v
}

impl Scheduler for Sge {
    fn kind(&self) -> SchedulerKind {
        SchedulerKind::SGE
    }

    fn array_indices(&self, positions: &[usize]) -> Vec<usize> {
        (1..=positions.len()).collect()
    }

    fn index_variable(&self) -> &'static str {
        "SGE_TASK_ID"
    }

    fn submit(&mut self, sub: &Submission) -> Result<JobId, SchedulerError> {
        let mut args = vec!["-terse".to_string()];
        let ids: Vec<&str> = sub
            .after
            .iter()
            .map(|d| match d {
                Dependency::AfterOk(j) | Dependency::AfterCorr(j) => j.as_str(),
            })
            .collect();
        if !ids.is_empty() {
            args.push("-hold_jid".into());
            args.push(ids.join(","));
        }
        args.push(sub.script.display().to_string());
        let out = self.runner.run_once("qsub", &args)?;
        // -terse prints `123` or, for arrays, `123.1-5:1`.
        let id = out
            .stdout
            .trim()
            .split('.')
            .next()
            .unwrap_or("")
            .to_string();
        if id.is_empty() || !id.chars().all(|c| c.is_ascii_digit()) {
            return Err(SchedulerError::Parse {
                command: "qsub -terse".into(),
                detail: format!("expected a job id, got {:?}", out.stdout),
            });
        }
        Ok(id)
    }

    fn element_id(&self, job: &str, array_index: usize) -> String {
        format!("{job}.{array_index}")
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
        let user = std::env::var("USER").unwrap_or_else(|_| "*".into());
        let out = self.runner.run("qstat", &["-u".into(), user])?;
        for (id, st) in parse_qstat(&out.stdout) {
            if wanted.contains(id.split('.').next().unwrap_or("")) {
                result.elements.insert(id, st);
            }
        }
        let acct = match self
            .runner
            .run("qacct", &["-j".into(), self.pattern.clone()])
        {
            Ok(o) => o.stdout,
            // qacct fails when nothing matches yet.
            Err(RunError::Failed { stdout, .. }) => stdout,
            Err(e) => return Err(e.into()),
        };
        for (id, _, st) in parse_qacct(&acct) {
            if wanted.contains(id.split('.').next().unwrap_or(""))
                && !result.elements.contains_key(&id)
            {
                result.elements.insert(id, st);
            }
        }
        Ok(result)
    }

    fn find_by_name(&mut self, name: &str) -> Result<Vec<JobId>, SchedulerError> {
        let mut ids = Vec::new();
        if let Ok(o) = self.runner.run("qstat", &["-j".into(), name.into()]) {
            for line in o.stdout.lines() {
                if let Some(n) = line.strip_prefix("job_number:") {
                    ids.push(n.trim().to_string());
                }
            }
        }
        let acct = match self.runner.run("qacct", &["-j".into(), name.into()]) {
            Ok(o) => o.stdout,
            Err(RunError::Failed { stdout, .. }) => stdout,
            Err(e) => return Err(e.into()),
        };
        for (id, n, _) in parse_qacct(&acct) {
            if n == name {
                ids.push(id.split('.').next().unwrap_or("").to_string());
            }
        }
        ids.sort();
        ids.dedup();
        Ok(ids)
    }

    fn cancel(&mut self, elements: &[String]) -> Result<(), SchedulerError> {
        for e in elements {
            let (job, task) = e.split_once('.').unwrap_or((e, "1"));
            match self
                .runner
                .run("qdel", &[job.into(), "-t".into(), task.into()])
            {
                Ok(_) | Err(RunError::Failed { .. }) => {}
                Err(err) => return Err(err.into()),
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn task_ranges_expand() {
        assert_eq!(expand_tasks("2-5:1"), vec![2, 3, 4, 5]);
        assert_eq!(expand_tasks("1-9:4"), vec![1, 5, 9]);
        assert_eq!(expand_tasks("1,4"), vec![1, 4]);
    }

    #[test]
    fn a_task_deleted_while_running_is_a_signal_not_an_exit_code() {
        // Recorded from a Grid Engine 8.1.9 cell (tests/sge/provision.sh): task
        // 1 deleted with `qdel 1 -t 1` while running, task 2 killed at h_rt.
        let out = "==============================================================
qname        test.q
jobname      k.sh
jobnumber    1
taskid       1
failed       100 : assumedly after job
exit_status  137                  (Killed)
==============================================================
qname        test.q
jobname      k.sh
jobnumber    1
taskid       2
failed       37  : qmaster enforced h_rt, h_cpu, or h_vmem limit
exit_status  137                  (Killed)
";
        let v = parse_qacct(out);
        assert_eq!(v[0].0, "1.1");
        assert_eq!(v[0].2.state, QueueState::Failed);
        assert_eq!(v[0].2.signal, Some(9));
        assert!(v[0].2.reason.as_deref().unwrap().contains("qdel"));
        assert_eq!(v[1].2.state, QueueState::Timeout);
    }

    #[test]
    fn state_codes_from_the_manual_map_sensibly() {
        assert_eq!(map_state("qw"), QueueState::Pending);
        assert_eq!(map_state("hqw"), QueueState::Held);
        assert_eq!(map_state("r"), QueueState::Running);
        assert_eq!(map_state("Rr"), QueueState::Running);
        assert_eq!(map_state("dr"), QueueState::Completing);
        assert_eq!(map_state("Eqw"), QueueState::Held);
        assert_eq!(map_state("s"), QueueState::Suspended);
    }
}
