//! The campaign file: serde schema, validation with file:line:column, λ schedules.
//!
//! [`load`] reads a campaign file and everything it refers to (ligand and edge
//! tables, templates), reports every problem at once, and returns a [`Campaign`]
//! with every path absolute and every default filled in.

pub mod de;
pub mod diagnostic;
pub mod fields;
pub mod frames;
pub mod ids;
pub mod lambdas;
mod legs;
mod members;
pub mod model;
pub mod parse;
pub mod paths;
pub mod quantity;
mod quoting;
mod resources;
mod settings;
mod stages;
pub mod tables;
pub mod templates;
pub mod yaml;

pub use diagnostic::{CampaignError, Diagnostic, Severity};
pub use lambdas::{LambdaSchedule, Spacing};
pub use model::{
    BoreschRestraint, Campaign, CampaignKind, Edge, Leg, Ligand, Resources, Stage, StagePer,
    Subject, Vars,
};

use std::path::{Path, PathBuf};

/// Options of [`load`].
#[derive(Debug, Clone, Default)]
pub struct LoadOptions {
    /// Put the tree here instead of the file's `root:` (relative paths are taken
    /// from the current directory).
    pub root_override: Option<PathBuf>,
}

/// A loaded campaign and the warnings found on the way.
#[derive(Debug, Clone)]
pub struct Loaded {
    /// The validated campaign.
    pub campaign: Campaign,
    /// Problems that do not stop it (reversed edge, disconnected network, …).
    pub warnings: Vec<Diagnostic>,
}

/// Reads and validates a campaign file. Errors hold every diagnostic found.
pub fn load(path: &Path, opts: &LoadOptions) -> Result<Loaded, CampaignError> {
    let cwd = std::env::current_dir().unwrap_or_else(|_| PathBuf::from("/"));
    let file = paths::resolve(&cwd, path);
    let text = std::fs::read_to_string(&file).map_err(|e| CampaignError {
        diagnostics: vec![Diagnostic {
            severity: Severity::Error,
            file: file.clone(),
            line: 0,
            col: 0,
            message: format!("cannot read the campaign file: {e}"),
            hint: Some("check the path; `legwork new DIR` writes a starting campaign".into()),
        }],
    })?;
    let root = opts.root_override.as_ref().map(|r| paths::resolve(&cwd, r));
    let input = parse::Input {
        file: &file,
        text: &text,
        root_override: root.as_deref(),
    };
    match parse::parse(&input) {
        Ok((campaign, warnings)) => Ok(Loaded { campaign, warnings }),
        Err(diagnostics) => Err(CampaignError { diagnostics }),
    }
}

/// Whether `id` is a safe id; if not, an error at `pos` saying why.
fn safe_id(ctx: &mut fields::Ctx, id: &str, pos: yaml::Pos, what: &str) -> bool {
    match ids::unsafe_reason(id) {
        Some(why) => {
            ctx.error(
                pos,
                format!("{what} '{id}' is not a safe id: {why}"),
                Some(ids::ID_HINT.to_string()),
            );
            false
        }
        None => true,
    }
}
