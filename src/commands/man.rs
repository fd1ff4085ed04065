//! `legwork man`: the manual pages in roff. `legwork man > legwork.1` prints the
//! main page, `legwork man VERB` the page of one verb, and `legwork man --out-dir
//! DIR` writes the main page and one page per verb (`legwork-check.1`, …), the
//! pages the main page's SUBCOMMANDS section refers to.

use crate::cli::{Cli, Global};
use crate::exit::Exit;
use anyhow::Context;
use clap::CommandFactory;
use std::path::PathBuf;

/// Options of `legwork man`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Print the page of this verb (e.g. `check`) instead of the main page.
    #[arg(value_name = "VERB", conflicts_with = "out_dir")]
    pub verb: Option<String>,
    /// Write every page (`legwork.1` and `legwork-<verb>.1`) into this folder.
    #[arg(long, value_name = "DIR")]
    pub out_dir: Option<PathBuf>,
}

/// Prints or writes the man pages.
pub fn run(args: Args, _global: &Global) -> anyhow::Result<()> {
    let cmd = Cli::command();
    if let Some(dir) = &args.out_dir {
        std::fs::create_dir_all(dir).with_context(|| format!("cannot create {}", dir.display()))?;
        clap_mangen::generate_to(cmd, dir)
            .with_context(|| format!("cannot write the man pages into {}", dir.display()))?;
        return Ok(());
    }
    let page = match &args.verb {
        None => cmd,
        Some(verb) => {
            let known: Vec<String> = cmd
                .get_subcommands()
                .filter(|s| !s.is_hide_set())
                .map(|s| s.get_name().to_string())
                .collect();
            let Some(sub) = cmd.find_subcommand(verb) else {
                return Err(Exit::bad_input(format!(
                    "error: there is no verb '{verb}'\nhint: legwork man takes one of: {}",
                    known.join(", ")
                ))
                .into());
            };
            // The page's title names the full command (`legwork-check`), as the
            // main page's SUBCOMMANDS section refers to it.
            let name = format!("legwork-{}", sub.get_name());
            sub.clone()
                .name(name.clone())
                .display_name(name)
                .bin_name(format!("legwork {verb}"))
        }
    };
    clap_mangen::Man::new(page).render(&mut std::io::stdout())?;
    Ok(())
}
