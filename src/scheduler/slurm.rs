//! Slurm: `sbatch --parsable` array jobs with `%` throttles and dependencies, one
//! `squeue` per poll for every job of the campaign, `sacct` for terminal states
//! when accounting is enabled, `scancel`.

use super::kind::KindSpec;
use super::runner::{RunError, Runner};
use super::{
    Dependency, JobId, JobStatus, QueryResult, QueueState, Scheduler, SchedulerError,
    SchedulerKind, Submission,
};
use std::collections::HashSet;

/// `scheduler.kind: slurm`.
pub const KIND: KindSpec = KindSpec {
    name: "slurm",
    display: "Slurm",
    template: include_str!("../../templates/batch/slurm.sh.tera"),
    // a shared filesystem may show a compute node's file late.
    marker_grace_s: 120,
    runs_here: false,
    build: |cx| Box::new(Slurm::new(cx.runner)),
};

impl SchedulerKind {
    /// Slurm.
    pub const SLURM: SchedulerKind = SchedulerKind::of(&KIND);
}

/// The Slurm client.
pub struct Slurm {
    runner: Runner,
    /// `None` until the first sacct call says whether accounting is enabled.
    accounting: Option<bool>,
}

impl Slurm {
    /// A client running commands through `runner`.
    pub fn new(runner: Runner) -> Self {
        Slurm {
            runner,
            accounting: None,
        }
    }
}

/// Maps a Slurm job state name (squeue `%T`, sacct `State`; e.g. `CANCELLED by
/// 0`) onto legwork's vocabulary. The 24 states are those listed in the squeue
/// manual's JOB STATE CODES section.
pub fn map_state(s: &str) -> QueueState {
    let word = s
        .split_whitespace()
        .next()
        .unwrap_or("")
        .trim_end_matches('+');
    match word {
        "PENDING" | "PD" => QueueState::Pending,
        "CONFIGURING" | "CF" => QueueState::Pending,
        "RUNNING" | "R" | "RESIZING" | "RS" | "SIGNALING" | "SI" => QueueState::Running,
        "COMPLETING" | "CG" | "STAGE_OUT" | "SO" => QueueState::Completing,
        "SUSPENDED" | "S" | "STOPPED" | "ST" => QueueState::Suspended,
        "REQUEUED" | "RQ" | "REQUEUE_FED" | "RF" => QueueState::Requeued,
        "REQUEUE_HOLD" | "RH" | "RESV_DEL_HOLD" | "RD" | "SPECIAL_EXIT" | "SE" => QueueState::Held,
        "COMPLETED" | "CD" => QueueState::Completed,
        "FAILED" | "F" => QueueState::Failed,
        "TIMEOUT" | "TO" => QueueState::Timeout,
        "OUT_OF_MEMORY" | "OOM" => QueueState::OutOfMemory,
        "NODE_FAIL" | "NF" => QueueState::NodeFail,
        "PREEMPTED" | "PR" => QueueState::Preempted,
        "BOOT_FAIL" | "BF" => QueueState::BootFail,
        "DEADLINE" | "DL" => QueueState::Deadline,
        "CANCELLED" | "CA" | "REVOKED" | "RV" => QueueState::Cancelled,
        other => QueueState::Other(other.to_string()),
    }
}

fn user() -> String {
    nix::unistd::User::from_uid(nix::unistd::getuid())
        .ok()
        .flatten()
        .map(|u| u.name)
        .or_else(|| std::env::var("USER").ok())
        .unwrap_or_else(|| "root".into())
}

fn base_of(element: &str) -> &str {
    element.split('_').next().unwrap_or(element)
}

/// Parses `squeue -h -r -o '%i|%j|%T|%r'` lines into (element id, name, status).
pub fn parse_squeue(out: &str) -> Vec<(String, String, JobStatus)> {
    out.lines()
        .filter_map(|l| {
            let mut f = l.trim().splitn(4, '|');
            let id = f.next()?.trim().to_string();
            let name = f.next()?.trim().to_string();
            let mut st = JobStatus::new(map_state(f.next()?.trim()));
            let reason = f.next().unwrap_or("").trim();
            if !reason.is_empty() && reason != "None" && reason != "(null)" {
                if st.state == QueueState::Pending && reason.starts_with("DependencyNeverSatisfied")
                {
                    st.state = QueueState::DependencyNeverSatisfied;
                }
                st.reason = Some(reason.to_string());
            }
            (!id.is_empty()).then_some((id, name, st))
        })
        .collect()
}

/// Parses `sacct -n -P -X -o JobID,JobName,State,ExitCode` lines into (element id,
/// name, status). `ExitCode` is `code:signal`.
pub fn parse_sacct(out: &str) -> Vec<(String, String, JobStatus)> {
    out.lines()
        .filter_map(|l| {
            let f: Vec<&str> = l.trim().split('|').collect();
            if f.len() < 4 || f[0].is_empty() {
                return None;
            }
            let mut st = JobStatus::new(map_state(f[2]));
            if let Some((c, s)) = f[3].split_once(':') {
                st.exit_code = c.parse().ok();
                st.signal = s.parse().ok().filter(|s: &i32| *s != 0);
            }
            if f[2].starts_with("CANCELLED by") {
                st.reason = Some(f[2].to_ascii_lowercase());
            }
            Some((f[0].to_string(), f[1].to_string(), st))
        })
        .collect()
}

impl Scheduler for Slurm {
    fn kind(&self) -> SchedulerKind {
        SchedulerKind::SLURM
    }

    fn index_variable(&self) -> &'static str {
        "SLURM_ARRAY_TASK_ID"
    }

    fn elementwise_dependencies(&self) -> bool {
        true
    }

    fn submit(&mut self, sub: &Submission) -> Result<JobId, SchedulerError> {
        let mut args = vec!["--parsable".to_string()];
        let deps: Vec<String> = sub
            .after
            .iter()
            .map(|d| match d {
                Dependency::AfterOk(j) => format!("afterok:{j}"),
                Dependency::AfterCorr(j) => format!("aftercorr:{j}"),
            })
            .collect();
        if !deps.is_empty() {
            args.push(format!("--dependency={}", deps.join(",")));
        }
        args.push(format!("--chdir={}", sub.root.display()));
        args.push(sub.script.display().to_string());
        let out = self.runner.run_once("sbatch", &args)?;
        // --parsable prints `jobid` or `jobid;cluster`.
        let id = out
            .stdout
            .lines()
            .last()
            .unwrap_or("")
            .split(';')
            .next()
            .unwrap_or("")
            .trim()
            .to_string();
        if id.is_empty() || !id.chars().all(|c| c.is_ascii_digit()) {
            return Err(SchedulerError::Parse {
                command: "sbatch --parsable".into(),
                detail: format!("expected a job id, got {:?}", out.stdout),
            });
        }
        Ok(id)
    }

    fn element_id(&self, job: &str, array_index: usize) -> String {
        format!("{job}_{array_index}")
    }

    fn query(&mut self, jobs: &[JobId]) -> Result<QueryResult, SchedulerError> {
        let wanted: HashSet<&str> = jobs.iter().map(|j| j.as_str()).collect();
        let mut result = QueryResult::default();
        if wanted.is_empty() {
            return Ok(result);
        }
        // One call for all of this user's jobs, filtered here: its cost does not
        // grow with the number of the campaign's jobs, and squeue does not fail
        // on ids it has already forgotten.
        let out = self.runner.run(
            "squeue",
            &[
                "-h".into(),
                "-r".into(),
                "-u".into(),
                user(),
                "-o".into(),
                "%i|%j|%T|%r".into(),
            ],
        )?;
        for (id, _, st) in parse_squeue(&out.stdout) {
            if wanted.contains(base_of(&id)) {
                result.elements.insert(id, st);
            }
        }
        if self.accounting != Some(false) {
            let mut list: Vec<&str> = wanted.iter().copied().collect();
            list.sort_unstable();
            match self.runner.run(
                "sacct",
                &[
                    "-n".into(),
                    "-P".into(),
                    "-X".into(),
                    "-j".into(),
                    list.join(","),
                    "-o".into(),
                    "JobID,JobName,State,ExitCode".into(),
                ],
            ) {
                Ok(out) => {
                    self.accounting = Some(true);
                    result.accounting = true;
                    for (id, _, st) in parse_sacct(&out.stdout) {
                        // The live queue is fresher for what is still in it.
                        if st.state.is_live() || result.elements.contains_key(&id) {
                            continue;
                        }
                        result.elements.insert(id, st);
                    }
                }
                Err(RunError::Failed { stderr, .. }) => {
                    tracing::info!(
                        "sacct unavailable ({stderr}); using task markers for ended jobs"
                    );
                    self.accounting = Some(false);
                }
                Err(e) => return Err(e.into()),
            }
        }
        Ok(result)
    }

    fn find_by_name(&mut self, name: &str) -> Result<Vec<JobId>, SchedulerError> {
        let out = self.runner.run(
            "squeue",
            &[
                "-h".into(),
                "-u".into(),
                user(),
                "-n".into(),
                name.into(),
                "-o".into(),
                "%i|%j|%T|%r".into(),
            ],
        )?;
        let mut ids: Vec<String> = parse_squeue(&out.stdout)
            .into_iter()
            .filter(|(_, n, _)| n == name)
            .map(|(id, _, _)| base_of(&id).to_string())
            .collect();
        if self.accounting != Some(false) {
            if let Ok(out) = self.runner.run(
                "sacct",
                &[
                    "-n".into(),
                    "-P".into(),
                    "-X".into(),
                    "--name".into(),
                    name.into(),
                    "-o".into(),
                    "JobID,JobName,State,ExitCode".into(),
                ],
            ) {
                ids.extend(
                    parse_sacct(&out.stdout)
                        .into_iter()
                        .filter(|(_, n, _)| n == name)
                        .map(|(id, _, _)| base_of(&id).to_string()),
                );
            }
        }
        ids.sort();
        ids.dedup();
        Ok(ids)
    }

    fn cancel(&mut self, elements: &[String]) -> Result<(), SchedulerError> {
        for chunk in elements.chunks(500) {
            let r = self.runner.run("scancel", chunk);
            match r {
                Ok(_) => {}
                // Elements that already ended are not an error to the user.
                Err(RunError::Failed { ref stderr, .. })
                    if stderr.contains("already completing")
                        || stderr.contains("Invalid job id") => {}
                Err(e) => return Err(e.into()),
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_documented_state_maps_to_something_known() {
        for s in [
            "BOOT_FAIL",
            "CANCELLED",
            "COMPLETED",
            "CONFIGURING",
            "COMPLETING",
            "DEADLINE",
            "FAILED",
            "NODE_FAIL",
            "OUT_OF_MEMORY",
            "PENDING",
            "PREEMPTED",
            "RUNNING",
            "RESV_DEL_HOLD",
            "REQUEUE_FED",
            "REQUEUE_HOLD",
            "REQUEUED",
            "RESIZING",
            "REVOKED",
            "SIGNALING",
            "SPECIAL_EXIT",
            "STAGE_OUT",
            "STOPPED",
            "SUSPENDED",
            "TIMEOUT",
        ] {
            assert!(!matches!(map_state(s), QueueState::Other(_)), "{s}");
        }
        assert_eq!(map_state("CANCELLED by 0"), QueueState::Cancelled);
        assert_eq!(map_state("WHATEVER"), QueueState::Other("WHATEVER".into()));
    }

    #[test]
    fn squeue_dependency_never_satisfied_is_its_own_state() {
        let v = parse_squeue(
            "12_3|lw.c.b.s1|PENDING|DependencyNeverSatisfied\n12_4|lw.c.b.s1|RUNNING|None\n",
        );
        assert_eq!(v[0].2.state, QueueState::DependencyNeverSatisfied);
        assert_eq!(v[1].2.state, QueueState::Running);
        assert_eq!(v[1].2.reason, None);
    }

    #[test]
    fn sacct_exit_codes_split_code_and_signal() {
        let v = parse_sacct("7_1|n|FAILED|3:0\n7_2|n|CANCELLED by 0|0:15\n");
        assert_eq!(v[0].2.exit_code, Some(3));
        assert_eq!(v[0].2.signal, None);
        assert_eq!(v[1].2.signal, Some(15));
        assert_eq!(v[1].2.state, QueueState::Cancelled);
    }
}
