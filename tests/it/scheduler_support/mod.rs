//! Shared by the scheduler, local, journal, crash and scale tests: small plans
//! built by hand (the same shapes `plan::expand` makes: a per-leg stage, then
//! one array of windows waiting for it) and task scripts written by the test.
#![allow(dead_code)]

use legwork::plan::{Batch, BatchDep, Plan, Resources, Subject, Task};
use legwork::scheduler::{SchedulerConfig, SchedulerKind};
use legwork::state::{Context, ExitCodeOnly, TaskHooks};
use std::path::{Path, PathBuf};

/// A plan with `subjects` edges `e{k}a+e{k}b`, one leg `complex`, one replica,
/// a per-leg `prepare` and `windows` production windows after it.
pub fn plan(subjects: usize, windows: usize, walltime_s: u64) -> Plan {
    let mut p = Plan {
        campaign: "t".into(),
        ..Default::default()
    };
    let res = Resources {
        cpus: 1,
        gpus: 0,
        memory_mb: 0,
        walltime_s,
    };
    for k in 0..subjects {
        let subject = Subject::Edge {
            a: format!("e{k}a"),
            b: format!("e{k}b"),
        };
        let sid = subject.id();
        let prep_batch = p.batches.len();
        let prep = p.tasks.len();
        p.tasks.push(Task {
            id: format!("{sid}/complex/r1/prepare"),
            subject: subject.clone(),
            leg: "complex".into(),
            replica: 1,
            window: None,
            stage: "prepare".into(),
            dir: PathBuf::from(format!("{sid}/complex/r1/prepare")),
            after: vec![],
            resources: res.clone(),
            seed: k as u64,
            frames: None,
            batch: prep_batch,
        });
        p.batches.push(Batch {
            id: format!("{sid}/complex/r1/prepare"),
            stage: "prepare".into(),
            tasks: vec![prep],
            after: vec![],
            resources: res.clone(),
        });
        let prod_batch = p.batches.len();
        let mut members = Vec::new();
        for w in 0..windows {
            members.push(p.tasks.len());
            p.tasks.push(Task {
                id: format!("{sid}/complex/r1/w{w:02}/production"),
                subject: subject.clone(),
                leg: "complex".into(),
                replica: 1,
                window: Some(w),
                stage: "production".into(),
                dir: PathBuf::from(format!("{sid}/complex/r1/w{w:02}/production")),
                after: vec![prep],
                resources: res.clone(),
                seed: (k * 1000 + w) as u64,
                frames: Some(10),
                batch: prod_batch,
            });
        }
        p.batches.push(Batch {
            id: format!("{sid}/complex/r1/production"),
            stage: "production".into(),
            tasks: members,
            after: vec![BatchDep::All(prep_batch)],
            resources: res.clone(),
        });
    }
    p
}

/// Writes `script` as every task's `task.sh` (the script sees `$PWD` = its
/// task directory).
pub fn write_tasks(root: &Path, plan: &Plan, script: &str) {
    for t in &plan.tasks {
        let d = root.join(&t.dir);
        std::fs::create_dir_all(&d).unwrap();
        std::fs::write(d.join("task.sh"), script).unwrap();
    }
}

/// Done means: exit 0 and an `out.txt` holding `ok`.
pub struct OutTxt;

impl TaskHooks for OutTxt {
    fn check_output(&self, _: &Plan, _: usize, dir: &Path) -> Result<(), String> {
        match std::fs::read_to_string(dir.join("out.txt")) {
            Ok(s) if s.trim() == "ok" => Ok(()),
            Ok(_) => Err("out.txt is incomplete".into()),
            Err(_) => Err("out.txt is missing".into()),
        }
    }
    fn prepare_attempt(&self, _: &Plan, _: usize, _: u32, _: bool) -> Result<(), String> {
        Ok(())
    }
}

/// `cfg` with the local executor run by the legwork binary Cargo built for the
/// tests (the test binary itself is not legwork). Passed through the config,
/// never the process environment: the tests share one process.
pub fn with_built_legwork(cfg: SchedulerConfig) -> SchedulerConfig {
    SchedulerConfig {
        executor_exe: Some(env!("CARGO_BIN_EXE_legwork").into()),
        ..cfg
    }
}

/// A scheduler that keeps every submitted element pending (or, with `gone`, has
/// forgotten them all) and counts the queries it answers.
pub struct Stub {
    next: u64,
    jobs: Vec<(String, Vec<usize>)>,
    /// `query` calls so far.
    pub queries: std::rc::Rc<std::cell::Cell<u64>>,
    /// When set, the stub has forgotten every job (as a scheduler does once its
    /// elements have ended and left the queue).
    pub gone: bool,
}

// The counter is only read on the test's own thread.
unsafe impl Send for Stub {}

impl Stub {
    /// A fresh stub and a handle on its query counter.
    pub fn new() -> (Stub, std::rc::Rc<std::cell::Cell<u64>>) {
        let q = std::rc::Rc::new(std::cell::Cell::new(0));
        (
            Stub {
                next: 1,
                jobs: Vec::new(),
                queries: q.clone(),
                gone: false,
            },
            q,
        )
    }
}

impl legwork::scheduler::Scheduler for Stub {
    fn kind(&self) -> legwork::scheduler::SchedulerKind {
        legwork::scheduler::SchedulerKind::SLURM
    }
    fn index_variable(&self) -> &'static str {
        "STUB_INDEX"
    }
    fn submit(
        &mut self,
        sub: &legwork::scheduler::Submission,
    ) -> Result<String, legwork::scheduler::SchedulerError> {
        let id = self.next.to_string();
        self.next += 1;
        self.jobs.push((
            id.clone(),
            sub.elements.iter().map(|e| e.array_index).collect(),
        ));
        Ok(id)
    }
    fn element_id(&self, job: &str, i: usize) -> String {
        format!("{job}_{i}")
    }
    fn query(
        &mut self,
        jobs: &[String],
    ) -> Result<legwork::scheduler::QueryResult, legwork::scheduler::SchedulerError> {
        self.queries.set(self.queries.get() + 1);
        let wanted: std::collections::HashSet<&str> = jobs.iter().map(String::as_str).collect();
        let mut r = legwork::scheduler::QueryResult::default();
        if self.gone {
            return Ok(r);
        }
        for (id, idx) in &self.jobs {
            if wanted.contains(id.as_str()) {
                for i in idx {
                    r.elements.insert(
                        format!("{id}_{i}"),
                        legwork::scheduler::JobStatus::new(legwork::scheduler::QueueState::Pending),
                    );
                }
            }
        }
        Ok(r)
    }
    fn find_by_name(&mut self, _: &str) -> Result<Vec<String>, legwork::scheduler::SchedulerError> {
        Ok(vec![])
    }
    fn cancel(&mut self, _: &[String]) -> Result<(), legwork::scheduler::SchedulerError> {
        Ok(())
    }
}

/// For the recorded-output tests: the scheduler `kind` with its commands taken
/// from `tests/fixtures/<kind>/bin` (`scheduler.commands_dir`) and the shims'
/// call log under `dir` passed in their environment (`SHIM_LOG`), and that log's
/// path. Nothing changes the process environment: the tests share one process.
pub fn with_shims(kind: SchedulerKind, dir: &Path) -> (SchedulerConfig, PathBuf) {
    let bin = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures")
        .join(kind.name())
        .join("bin");
    let log = dir.join("calls.log");
    let cfg = SchedulerConfig {
        kind,
        commands_dir: Some(bin),
        command_env: vec![("SHIM_LOG".into(), log.display().to_string())],
        ..Default::default()
    };
    (cfg, log)
}

/// Renders a four-window production submission for `kind` under `root`, waiting
/// for job `after`, and returns it with its script text.
pub fn rendered_submission(
    sched: &dyn legwork::scheduler::Scheduler,
    root: &Path,
    after: &str,
) -> (legwork::scheduler::Submission, String) {
    use legwork::scheduler::{job_name, script, Dependency, Element, Submission};
    let indices = sched.array_indices(&[0, 1, 2, 3]);
    let elements = indices
        .iter()
        .enumerate()
        .map(|(w, &i)| Element {
            array_index: i,
            task_id: format!("e0a+e0b/complex/r1/w{w:02}/production"),
            dir: root.join(format!("e0a+e0b/complex/r1/w{w:02}/production")),
            attempt: 1,
        })
        .collect();
    let name = job_name("t", "e0a+e0b/complex/r1/production", 2);
    let sub = Submission {
        script: root.join(".legwork/batches").join(format!("{name}.sh")),
        name,
        batch_id: "e0a+e0b/complex/r1/production".into(),
        elements,
        resources: Resources {
            cpus: 4,
            gpus: 1,
            memory_mb: 2048,
            walltime_s: 5400,
        },
        after: vec![Dependency::AfterOk(after.into())],
        throttle: 2,
        root: root.to_path_buf(),
        log_dir: root.join(".legwork/logs"),
    };
    let wrapper = script::install_wrapper(root).unwrap();
    script::render(sched.kind(), None, &sub, "t", &Default::default(), &wrapper).unwrap();
    let text = std::fs::read_to_string(&sub.script).unwrap();
    let syntax = std::process::Command::new("bash")
        .arg("-n")
        .arg(&sub.script)
        .status()
        .unwrap();
    assert!(
        syntax.success(),
        "the rendered batch script is not valid bash:\n{text}"
    );
    (sub, text)
}

/// The context of the state-level tests: no campaign file, the built-in batch
/// template, success judged by the exit code alone.
pub fn exit_code_context(config: &legwork::scheduler::SchedulerConfig) -> Context<'_> {
    Context {
        campaign: "t",
        config,
        batch_template: None,
        hooks: &ExitCodeOnly,
        clock: &legwork::state::SystemClock,
    }
}
