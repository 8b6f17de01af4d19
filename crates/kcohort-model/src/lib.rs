//! Plain types of kcohort, shared by every other crate.
//!
//! This crate holds the input contract (which tables and columns an extract has), the analytes
//! with their LOINC codes, canonical units, conversion factors and plausibility limits, the reject
//! reasons in their documented order, the code-shape checks (LOINC, ATC, ICD-10), and the store
//! layout with its manifest. It never touches files, clocks or the environment: it is data and
//! pure functions, so ingest, the engine and the reports agree on one definition of each.

pub mod analyte;
pub mod code;
pub mod contract;
pub mod kidney;
pub mod manifest;
pub mod reject;
pub mod site_zone;
pub mod store_layout;
pub mod store_schema;
pub mod study;
pub mod study_rules;

pub use analyte::{Analyte, UnitConversion};
pub use contract::{ColumnKind, ColumnSpec, TableName, TimeRole};
pub use manifest::Manifest;
pub use reject::RejectReason;
