//! Ingest: reads an extract (one folder of CSV or Parquet tables), checks every row against the
//! input contract of `kcohort-model`, and writes the accepted rows and the rejected ones (with
//! line, column and reason) as a new generation of a Parquet store, committed atomically.
//!
//! Every input row is either accepted or rejected with a reason, and the counts reconcile:
//! rows read = rows accepted + rows rejected, per table, recorded in the store's manifest.
//! This crate never prints (progress goes through the [`Progress`] trait) and never runs SQL.

pub mod context;
mod error;
pub mod extract;
mod ingest;
pub mod lab_value;
pub mod parquet_out;
mod rejects;
pub mod row_check;
mod source;
pub mod store;
mod table;
pub mod timestamp;

pub use error::IngestError;
pub use ingest::{IngestOptions, IngestOutcome, Mode, NoProgress, Progress, ingest};
pub use store::{CommitStep, FailPoint};
