//! The engine's integration tests, in one binary (each test binary links DataFusion):
//! golden `.slt` files per episode rule, the differential test against a plain Rust reading of
//! the definition, the store commit of `derive`, and (gated by `KCOHORT_BENCH_STORE`) the
//! throughput of the episode definition, and the planted truths of a synthetic extract recovered
//! through ingest and derive.

#[path = "engine/store.rs"]
mod store;

#[path = "engine/slt.rs"]
mod slt;

#[path = "engine/reference.rs"]
mod reference;

#[path = "engine/differential.rs"]
mod differential;

#[path = "engine/derive_store.rs"]
mod derive_store;

#[path = "engine/throughput.rs"]
mod throughput;

#[path = "engine/planted_truth.rs"]
mod planted_truth;
