//! Pure statistics for kcohort.
//!
//! Every function takes plain slices and structs and returns plain structs. This crate never reads
//! files, clocks or the environment, never prints, and knows nothing of Arrow or DataFusion, so its
//! tests build in seconds and its results can be checked against outside references
//! (`tests/reference/`). Confidence levels are explicit arguments; 95% is only a default of the
//! callers.

pub mod aalen_johansen;
mod cholesky;
pub mod control_chart;
pub mod cox;
pub mod error;
pub mod follow_up;
pub mod funnel;
pub mod interval;
pub mod kaplan_meier;
pub mod log_rank;
pub mod mantel_haenszel;
pub mod poisson_rate;
pub mod proportion;
pub mod rate_ratio;
pub mod risk_ratio;
pub mod standardize;

pub use error::StatsError;
pub use interval::{ConfidenceLevel, Interval};
