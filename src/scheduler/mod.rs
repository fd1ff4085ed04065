//! Schedulers behind one trait: local executor, Slurm, PBS, SGE, LSF.

pub mod config;

pub use config::{SchedulerConfig, SchedulerKind};
