/// Why a design could not be made. Each message says what was wrong and what to do.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum DesignError {
    /// The input does not have the shape or values the method needs.
    #[error("{0}")]
    Input(String),
    /// The rules cannot be met with what was allowed.
    #[error("{0}")]
    Infeasible(String),
}
