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
        .with_target(false)
        .without_time()
        .try_init();
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
