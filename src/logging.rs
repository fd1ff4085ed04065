//! Logging through `tracing` to standard error, and the one place errors are
//! rendered for the user.

use crate::cli::Global;
use crate::exit::Exit;
use tracing_subscriber::EnvFilter;

/// Sets up the tracing subscriber from `-v`/`-q` (or `LEGWORK_LOG`, which wins).
pub fn init(global: &Global) {
    let default = if global.quiet {
        "error"
    } else {
        match global.verbose {
            0 => "warn",
            1 => "legwork=debug,info",
            _ => "trace",
        }
    };
    let filter = EnvFilter::try_from_env("LEGWORK_LOG").unwrap_or_else(|_| EnvFilter::new(default));
    let _ = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_writer(std::io::stderr)
        .with_ansi(colour_on_stderr())
        .with_target(false)
        .without_time()
        .try_init();
}

/// Colour codes go to standard error only when it is a terminal and `NO_COLOR`
/// is not set (<https://no-color.org>): a log file or a pipe gets plain text.
fn colour_on_stderr() -> bool {
    use std::io::IsTerminal;
    std::io::stderr().is_terminal() && std::env::var_os("NO_COLOR").map_or(true, |v| v.is_empty())
}

/// Whether `err` is, at any depth, a write to a closed pipe (`legwork … | head`):
/// the reader has what it wanted, so that is a quiet, successful end.
pub fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|cause| {
        cause
            .downcast_ref::<std::io::Error>()
            .is_some_and(|e| e.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

/// Makes a `print!` into a closed pipe end the process quietly with status 0 (the
/// standard library panics on it, which would print a panic message and a
/// backtrace); every other panic is reported as before.
pub fn quiet_on_broken_pipe() {
    let default = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        let text = info
            .payload()
            .downcast_ref::<String>()
            .map(String::as_str)
            .or_else(|| info.payload().downcast_ref::<&str>().copied())
            .unwrap_or("");
        if text.contains("Broken pipe") || text.contains("os error 32") {
            std::process::exit(0);
        }
        default(info);
    }));
}

/// The text printed for an error that ends the process: an [`Exit`] message as is,
/// anything else as `error: ...` followed by its causes.
pub fn render_error(err: &anyhow::Error) -> String {
    if let Some(exit) = err.downcast_ref::<Exit>() {
        return exit.message.clone();
    }
    let mut out = format!("error: {err}");
    for cause in err.chain().skip(1) {
        out.push_str(&format!("\n  caused by: {cause}"));
    }
    out
}
