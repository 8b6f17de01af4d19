//! The one error type of the statistics crate.

/// What went wrong, said so that the caller can tell the user what to fix.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum StatsError {
    /// An argument is outside its allowed range (`what` names it, `expected` says the range).
    #[error("{what}: expected {expected}, found {found}")]
    InvalidInput {
        what: String,
        expected: String,
        found: String,
    },
    /// The data cannot support the estimate (e.g. no events, a zero cell where a ratio needs one).
    #[error("{0}")]
    NotEstimable(String),
    /// One covariate of a model cannot be estimated (separation or collinearity); a caller may
    /// leave it out and fit again.
    #[error("{detail}")]
    NotEstimableCovariate { covariate: String, detail: String },
    /// An iterative fit did not converge.
    #[error("the fit did not converge after {iterations} iterations: {detail}")]
    NoConvergence { iterations: usize, detail: String },
}

impl StatsError {
    pub fn invalid(
        what: impl Into<String>,
        expected: impl Into<String>,
        found: impl ToString,
    ) -> Self {
        StatsError::InvalidInput {
            what: what.into(),
            expected: expected.into(),
            found: found.to_string(),
        }
    }
}
