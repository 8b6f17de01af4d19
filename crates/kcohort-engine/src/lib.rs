//! The SQL engine of kcohort: a DataFusion session over the Parquet store that runs the
//! definitions in `queries/*.sql` with the study's parameters bound as typed literals, and
//! writes each result into the store as a derived table, committed atomically.
//!
//! It reads only Parquet files the store's manifest lists (registered as listing tables, never
//! in-memory tables), registers its UDFs from one list ([`udf::udfs`]), and runs under a memory
//! pool that spills to disk. It never prints, never reads the environment, and never depends on
//! `kcohort-ingest`: the store layout and manifest are data in `kcohort-model`.
//!
//! - [`session`]: the one function that builds the session; table registration.
//! - [`definition`]: the embedded definitions and how one runs; the time-window lint.
//! - [`parameter`]: the typed parameter layer.
//! - [`derive`]: `kcohort derive` — fingerprint, run, commit.
//! - `udf`, `kidney_udf`: the SQL functions (CTCAE grade, ATC prefix match, CKD-EPI 2021 eGFR,
//!   KDIGO GFR category and AKI stage).

pub mod catalog;
pub mod definition;
pub mod derive;
mod derived_output;
mod episode_window;
mod error;
mod kidney_udf;
pub mod parameter;
pub mod read_only;
pub mod session;
pub mod udf;

pub use definition::{DEFINITIONS, Definition};
pub use derive::{DeriveOutcome, DerivedTableReport, derive, derive_async, read_manifest};
pub use error::EngineError;
pub use parameter::{ParamValue, Parameters};
pub use read_only::{QueryLimits, QueryResult, check_read_only, query};
pub use session::{EngineOptions, register_store, session};
