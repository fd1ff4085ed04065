//! What can go wrong in the estimators.

/// An estimate could not be made from these samples.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum EstimateError {
    /// The samples cannot support the estimate asked for.
    #[error("{0}")]
    Insufficient(String),
    /// An iterative solver did not reach its tolerance.
    #[error("{0}")]
    NotConverged(String),
}
