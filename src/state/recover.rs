//! The tree is the truth of last resort. The journal can be lost (deleted with
//! the snapshot), cut short (a restored backup, a truncated copy) or damaged
//! (one unreadable line); the task directories still hold what ran: the
//! wrapper's attempt claims, start and exit markers. Before a task is
//! submitted its directory is checked for work of the attempt about to be
//! submitted; if there is some, or the journal was found damaged or shorter
//! than its snapshot, the state is rebuilt from the tree and the scheduler
//! ([`super::rescan`]) with a one-line notice, instead of running the attempt
//! again.

use super::{markers, CampaignState};
use std::path::Path;

/// The attempt claim the wrapper creates exclusively in a task directory.
pub fn claim_path(dir: &Path, attempt: u32) -> std::path::PathBuf {
    dir.join(format!(".attempt-{attempt}.claim"))
}

/// The highest attempt the task directory shows work of (its markers and the
/// wrapper's claims), 0 if none.
pub fn tree_attempt(dir: &Path) -> u32 {
    let mut a = markers::started_any(dir)
        .map(|s| s.attempt)
        .unwrap_or(0)
        .max(markers::exited_any(dir).map(|e| e.attempt).unwrap_or(0));
    while claim_path(dir, a + 1).exists() {
        a += 1;
    }
    a
}

/// Whether task `ti`'s directory already shows work of the attempt a
/// submission would carry (the journal's attempt + 1).
pub fn tree_knows_more(state: &CampaignState, ti: usize) -> bool {
    let next = state.record(ti).attempt + 1;
    tree_attempt(&state.task_dir(&state.plan.tasks[ti])) >= next
}
