//! Exit codes: user-fixable problems are 1, bugs are 2.

use kcohort_engine::EngineError;
use kcohort_ingest::IngestError;

pub fn exit_code(error: &anyhow::Error) -> i32 {
    for cause in error.chain() {
        if let Some(IngestError::ParquetOutput(m)) = cause.downcast_ref::<IngestError>()
            && m.contains("panicked")
        {
            return 2;
        }
        // The definitions run by `derive` ship with kcohort: when one of them fails to bind,
        // plan or run, the fault is ours, not the user's (out of memory is the user's limit).
        if let Some(
            EngineError::Parameter { .. }
            | EngineError::Definition { .. }
            | EngineError::Query { .. },
        ) = cause.downcast_ref::<EngineError>()
        {
            return 2;
        }
    }
    1
}
