//! Shared by the scheduler, local, journal, crash and scale tests: small plans
//! built by hand (the same shapes `plan::expand` makes: a per-leg stage, then
//! one array of windows waiting for it) and task scripts written by the test.
#![allow(dead_code)]

use legwork::plan::{Batch, BatchDep, Plan, Resources, Subject, Task};
use legwork::state::TaskHooks;
use std::path::{Path, PathBuf};

/// A plan with `subjects` edges `e{k}a~e{k}b`, one leg `complex`, one replica,
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

/// Points the local executor at the legwork binary Cargo built for the tests.
pub fn use_built_legwork() {
    std::env::set_var("LEGWORK_EXE", env!("CARGO_BIN_EXE_legwork"));
}
