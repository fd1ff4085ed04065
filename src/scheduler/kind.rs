//! Which schedulers exist: each scheduler's file declares one [`KindSpec`]
//! (its `scheduler.kind` name, display name, built-in batch template, defaults
//! and constructor), and [`KINDS`] lists them. Everything else — the campaign's
//! accepted kinds, the did-you-mean, the built-in template, the display name —
//! is derived from that list.

use super::runner::Runner;
use super::{Scheduler, SchedulerConfig};
use serde::{Deserialize, Deserializer, Serialize, Serializer};
use std::path::Path;

/// Every scheduler legwork knows. Adding one: its file, one line here.
pub const KINDS: &[&KindSpec] = &[
    &super::local::KIND,
    &super::slurm::KIND,
    &super::pbs::KIND,
    &super::sge::KIND,
    &super::lsf::KIND,
];

/// The `scheduler.kind` names, in [`KINDS`] order (for error messages and
/// did-you-mean suggestions).
pub fn kind_names() -> Vec<&'static str> {
    KINDS.iter().map(|k| k.name).collect()
}

/// The same names as a `'static` array (serde's "expected one of" wants one).
const NAMES: [&str; KINDS.len()] = {
    let mut names = [""; KINDS.len()];
    let mut i = 0;
    while i < KINDS.len() {
        names[i] = KINDS[i].name;
        i += 1;
    }
    names
};

/// What a scheduler needs to be built.
pub struct BuildContext<'a> {
    /// The campaign's `scheduler:` section.
    pub config: &'a SchedulerConfig,
    /// The campaign root.
    pub root: &'a Path,
    /// The campaign name.
    pub campaign: &'a str,
    /// The command runner (with `scheduler.commands_dir` applied).
    pub runner: Runner,
}

/// One scheduler's description, a `const KIND` in its own file.
pub struct KindSpec {
    /// The `scheduler.kind` value in a campaign file (lower case).
    pub name: &'static str,
    /// How messages name it ("Slurm", "Grid Engine").
    pub display: &'static str,
    /// The built-in batch template (`include_str!` of `templates/batch/<name>.sh.tera`).
    pub template: &'static str,
    /// Default seconds to wait for a late exit marker
    /// (`scheduler.marker_grace_seconds`).
    pub marker_grace_s: u64,
    /// Whether its tasks run on this machine as children of legwork's executor
    /// (Ctrl-C during `run` stops them; nothing waits in a cluster queue).
    pub runs_here: bool,
    /// Builds the scheduler.
    pub build: fn(BuildContext<'_>) -> Box<dyn Scheduler>,
}

/// Which scheduler runs the tasks: one of [`KINDS`]. Compared, hashed and
/// (de)serialised by name.
#[derive(Clone, Copy)]
pub struct SchedulerKind(&'static KindSpec);

impl SchedulerKind {
    /// The kind of this spec.
    pub const fn of(spec: &'static KindSpec) -> Self {
        SchedulerKind(spec)
    }

    /// The kind called `name` in a campaign file.
    pub fn named(name: &str) -> Option<Self> {
        KINDS
            .iter()
            .find(|k| k.name == name)
            .map(|k| SchedulerKind(k))
    }

    /// Its description.
    pub fn spec(self) -> &'static KindSpec {
        self.0
    }

    /// The `scheduler.kind` name.
    pub fn name(self) -> &'static str {
        self.0.name
    }

    /// How messages name it.
    pub fn display_name(self) -> &'static str {
        self.0.display
    }

    /// Whether its tasks run on this machine (the local executor).
    pub fn runs_here(self) -> bool {
        self.0.runs_here
    }
}

impl Default for SchedulerKind {
    fn default() -> Self {
        SchedulerKind(KINDS[0])
    }
}

impl PartialEq for SchedulerKind {
    fn eq(&self, other: &Self) -> bool {
        self.0.name == other.0.name
    }
}
impl Eq for SchedulerKind {}

impl std::hash::Hash for SchedulerKind {
    fn hash<H: std::hash::Hasher>(&self, state: &mut H) {
        self.0.name.hash(state);
    }
}

impl std::fmt::Debug for SchedulerKind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "SchedulerKind({})", self.0.name)
    }
}

impl std::fmt::Display for SchedulerKind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.0.name)
    }
}

impl Serialize for SchedulerKind {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.0.name)
    }
}

impl<'de> Deserialize<'de> for SchedulerKind {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let name = String::deserialize(d)?;
        SchedulerKind::named(&name).ok_or_else(|| serde::de::Error::unknown_variant(&name, &NAMES))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_unique_lower_case_and_round_trip() {
        let names = kind_names();
        assert_eq!(names, NAMES.to_vec());
        let mut sorted = names.clone();
        sorted.sort();
        sorted.dedup();
        assert_eq!(sorted.len(), names.len(), "duplicate kind names: {names:?}");
        for n in names {
            assert_eq!(n, n.to_lowercase());
            let k = SchedulerKind::named(n).unwrap();
            let json = serde_json::to_string(&k).unwrap();
            assert_eq!(json, format!("\"{n}\""));
            assert_eq!(serde_json::from_str::<SchedulerKind>(&json).unwrap(), k);
            assert!(k.spec().template.contains("{{"), "{n}: template");
        }
    }

    #[test]
    fn an_unknown_kind_names_the_known_ones() {
        let e = serde_json::from_str::<SchedulerKind>("\"slurmm\"").unwrap_err();
        let msg = e.to_string();
        assert!(msg.contains("unknown variant `slurmm`"), "{msg}");
        for n in kind_names() {
            assert!(msg.contains(n), "{msg}");
        }
    }

    #[test]
    fn only_the_local_executor_runs_here_and_it_is_the_default() {
        let here: Vec<_> = KINDS
            .iter()
            .filter(|k| k.runs_here)
            .map(|k| k.name)
            .collect();
        assert_eq!(here, ["local"]);
        assert_eq!(SchedulerKind::default().name(), "local");
    }
}
