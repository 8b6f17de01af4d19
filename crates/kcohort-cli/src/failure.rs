//! Exit codes: user-fixable problems are 1, bugs are 2.

use kcohort_ingest::IngestError;

pub fn exit_code(error: &anyhow::Error) -> i32 {
    match error.downcast_ref::<IngestError>() {
        Some(IngestError::ParquetOutput(m)) if m.contains("panicked") => 2,
        _ => 1,
    }
}
