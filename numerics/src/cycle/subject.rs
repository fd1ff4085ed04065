//! What a cycle closes: an edge between two ligands, or one ligand.

use serde::{Deserialize, Serialize};

/// What a task's leg belongs to: an edge of a relative campaign, or one ligand of
/// an absolute or solvation campaign.
#[derive(Debug, Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub enum Subject {
    /// A relative transformation from ligand `a` to ligand `b`.
    Edge {
        /// first ligand id (λ = 0)
        a: String,
        /// second ligand id (λ = 1)
        b: String,
    },
    /// A single ligand (absolute binding or solvation).
    Ligand {
        /// ligand id
        id: String,
    },
}

impl Subject {
    /// The id: `a+b` for an edge, the ligand id otherwise.
    ///
    /// ```
    /// use legwork_numerics::cycle::Subject;
    /// let e = Subject::Edge { a: "x1".into(), b: "x2".into() };
    /// assert_eq!(e.id(), "x1+x2");
    /// ```
    pub fn id(&self) -> String {
        match self {
            Subject::Edge { a, b } => format!("{a}+{b}"),
            Subject::Ligand { id } => id.clone(),
        }
    }
}
