//! legwork: parse the command line, run one verb, map its error to an exit code.

use clap::Parser;
use legwork::{cli::Cli, commands, exit, logging};
use std::process::ExitCode;

fn main() -> ExitCode {
    logging::quiet_on_broken_pipe();
    let cli = Cli::parse();
    logging::init(&cli.global);
    match commands::dispatch(cli.command, &cli.global) {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) if logging::is_broken_pipe(&err) => ExitCode::SUCCESS,
        Err(err) => {
            eprintln!("{}", logging::render_error(&err));
            ExitCode::from(exit::classify(&err).code())
        }
    }
}
