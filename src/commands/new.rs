//! `legwork new`: scaffold a runnable campaign from the built-in example.

use crate::cli::Global;
use crate::exit::Exit;
use std::path::{Path, PathBuf};

/// Options of `legwork new`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The folder to create (it must not exist, or be empty).
    #[arg(value_name = "DIR")]
    pub dir: PathBuf,
}

const CAMPAIGN: &str = include_str!("../../campaigns/demo.yaml");

/// The example's files: path in the new folder → content.
const FILES: &[(&str, &str)] = &[
    (
        "templates/prepare.sh.tera",
        include_str!("../../templates/demo/prepare.sh.tera"),
    ),
    (
        "templates/production.sh.tera",
        include_str!("../../templates/demo/production.sh.tera"),
    ),
    ("ligands.csv", include_str!("../../demo-data/ligands.csv")),
    ("measured.csv", include_str!("../../demo-data/measured.csv")),
];

/// The demo campaign with its paths pointing into the new folder.
pub fn scaffold_campaign() -> String {
    CAMPAIGN
        .replace("templates: ../templates/demo", "templates: templates")
        .replace("ligands: ../demo-data/ligands.csv", "ligands: ligands.csv")
        .replace(
            "experiment: ../demo-data/measured.csv",
            "experiment: measured.csv",
        )
}

fn write_all(dir: &Path) -> std::io::Result<()> {
    std::fs::create_dir_all(dir.join("templates"))?;
    std::fs::write(dir.join("campaign.yaml"), scaffold_campaign())?;
    for (rel, text) in FILES {
        std::fs::write(dir.join(rel), text)?;
    }
    Ok(())
}

/// Runs `legwork new`.
pub fn run(args: Args, global: &Global) -> anyhow::Result<()> {
    let dir = &args.dir;
    if dir.exists() {
        let empty = std::fs::read_dir(dir)
            .map(|mut d| d.next().is_none())
            .unwrap_or(false);
        if !dir.is_dir() || !empty {
            return Err(Exit::bad_input(format!(
                "error: {} exists and is not an empty folder; nothing was written\n  hint: give a new folder name",
                dir.display()
            ))
            .into());
        }
    }
    if let Err(e) = write_all(dir) {
        return Err(anyhow::anyhow!(
            "cannot write the new campaign in {}: {e}",
            dir.display()
        ));
    }
    if !global.quiet {
        let f = dir.join("campaign.yaml");
        println!("wrote a demo campaign (invented data) in {}", dir.display());
        println!("next:");
        println!("  legwork check {}", f.display());
        println!("  legwork expand {}", f.display());
        println!("  legwork run {}", f.display());
    }
    Ok(())
}
