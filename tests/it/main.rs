//! legwork's integration tests, as one test binary (one link instead of one per
//! file): one module per capability, each readable on its own. Run them all with
//! `./tests/run-all.sh` (which also sets up Python, Slurm and Chromium); `cargo test`
//! alone runs the ones that need no set-up and fails loudly for the rest when `CI`
//! is set.

mod estimate_support;
mod life_support;
mod reference_support;
mod scheduler_support;
mod skip;

mod browser;
mod campaign_errors;
mod campaign_limits;
mod campaign_new;
mod cli;
mod costs;
mod crash;
mod cycle;
mod cycle_demo;
mod demo_engine;
mod demo_run;
mod design;
mod estimate_calibration;
mod estimate_command;
mod estimate_demo;
mod estimate_reference;
mod estimate_warnings;
mod exactly_once;
mod expand;
mod experiment;
mod hints;
mod journal;
mod late_marker;
mod life;
mod local;
mod looking;
mod lsf;
mod network;
mod outage;
mod own_engine;
mod partial_results;
mod pbs;
mod progress;
mod reader;
mod render_crash;
mod report;
mod report_fixture;
mod resume;
mod resume_cli;
mod scale;
mod sge;
mod sge_live;
mod slurm;
mod stats;
