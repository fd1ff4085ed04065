//! One file per verb: its clap options (`Args`) and its `run`. Commands are the
//! only layer that prints for the user and turns library errors into
//! [`crate::exit::Exit`] codes.

pub mod cancel;
pub mod check;
pub mod collect;
pub mod completions;
pub mod estimate;
pub mod expand;
pub mod extend;
pub mod life;
pub mod man;
pub mod new;
pub mod progress;
pub mod propose;
pub mod report;
pub mod rerun;
pub mod resume;
pub mod run;
pub mod status;
pub mod submit;
pub mod try_reader;
pub mod watch;

use crate::cli::{Command, Global};

/// Runs the chosen verb.
pub fn dispatch(command: Command, global: &Global) -> anyhow::Result<()> {
    match command {
        Command::New(a) => new::run(a, global),
        Command::Check(a) => check::run(a, global),
        Command::Expand(a) => expand::run(a, global),
        Command::Submit(a) => submit::run(a, global),
        Command::Status(a) => status::run(a, global),
        Command::Watch(a) => watch::run(a, global),
        Command::Resume(a) => resume::run(a, global),
        Command::Cancel(a) => cancel::run(a, global),
        Command::Rerun(a) => rerun::run(a, global),
        Command::Extend(a) => extend::run(a, global),
        Command::Collect(a) => collect::run(a, global),
        Command::Report(a) => report::run(a, global),
        Command::Estimate(a) => estimate::run(a, global),
        Command::Propose(a) => propose::run(a, global),
        Command::TryReader(a) => try_reader::run(a, global),
        Command::Run(a) => run::run(a, global),
        Command::Completions(a) => completions::run(a, global),
        Command::Man(a) => man::run(a, global),
        Command::LocalExecutor(a) => submit::run_executor(a),
    }
}
