//! Status benchmark at 100,000 tasks: one poll (one query to a stub scheduler
//! that keeps every element pending, then the tracker over every live task) and
//! a journal replay, from the full journal and from snapshot + empty tail.
//! Target: a poll under 1 s. Prints medians of 5 runs; never pass/fail.
//!
//! Run: `cargo bench --bench status`.

#[path = "../tests/it/scheduler_support/mod.rs"]
mod scheduler_support;

use legwork::state::{self, CampaignState, Selection};
use scheduler_support::{exit_code_context, plan, Stub};
use std::time::{Duration, Instant};

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(|a, b| a.partial_cmp(b).unwrap());
    v[v.len() / 2]
}

fn main() {
    let d = tempfile::tempdir().unwrap();
    let root = d.path();
    let p = plan(1000, 99, 600);
    let n = p.tasks.len();
    let cfg = legwork::scheduler::SchedulerConfig {
        max_queued: 0,
        ..Default::default()
    };
    let ctx = exit_code_context(&cfg);
    let (mut stub, queries) = Stub::new();
    let t = Instant::now();
    let mut st = CampaignState::open(root, p.clone(), Duration::ZERO).unwrap();
    state::submit_ready(&mut st, &mut stub, &ctx, &Selection::all()).unwrap();
    let submit_s = t.elapsed().as_secs_f64();
    let mut polls = Vec::new();
    for _ in 0..5 {
        let t = Instant::now();
        state::poll(&mut st, &mut stub, &ctx).unwrap();
        polls.push(t.elapsed().as_secs_f64());
    }
    let per_poll = queries.get() as f64 / 5.0;
    drop(st);
    let journal = std::fs::metadata(root.join(".legwork/journal.jsonl"))
        .unwrap()
        .len();
    let mut replays = Vec::new();
    for _ in 0..5 {
        let t = Instant::now();
        let st = CampaignState::open(root, p.clone(), Duration::ZERO).unwrap();
        replays.push(t.elapsed().as_secs_f64());
        assert_eq!(st.summary().total.queued, n);
    }
    let mut st = CampaignState::open(root, p.clone(), Duration::ZERO).unwrap();
    st.compact().unwrap();
    drop(st);
    let mut snaps = Vec::new();
    for _ in 0..5 {
        let t = Instant::now();
        let st = CampaignState::open(root, p.clone(), Duration::ZERO).unwrap();
        snaps.push(t.elapsed().as_secs_f64());
        assert_eq!(st.summary().total.queued, n);
    }
    let poll = median(polls);
    println!("status benchmark, {n} tasks in {} batches", p.batches.len());
    println!(
        "  submit (render {} batch scripts, journal): {submit_s:.2} s",
        p.batches.len()
    );
    println!(
        "  one status poll: {poll:.3} s ({:.2} of the 1 s target), {per_poll} scheduler query per poll",
        poll / 1.0
    );
    println!(
        "  journal replay ({:.1} MB): {:.3} s; snapshot replay: {:.3} s",
        journal as f64 / 1e6,
        median(replays),
        median(snaps)
    );
}
