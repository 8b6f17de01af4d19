//! Throughput of the episode definition on a real store, gated by an environment variable (it
//! needs a large store and prints figures; it checks nothing):
//!
//! ```text
//! KCOHORT_BENCH_STORE=/path/to/store cargo test -p kcohort-engine --test engine throughput -- --nocapture
//! ```
//!
//! It runs `queries/episodes.sql` three times without writing and reports the best wall time and
//! used potassium results per second.

use futures::StreamExt;
use kcohort_engine::definition::{DEFINITIONS, plan_definition};
use kcohort_engine::derive::extract_end_micros;
use kcohort_engine::session::register_contract_tables;
use kcohort_engine::{EngineOptions, Parameters, read_manifest, session};
use kcohort_model::study::Study;
use std::path::PathBuf;
use std::time::Instant;

#[test]
fn throughput() {
    let Ok(store) = std::env::var("KCOHORT_BENCH_STORE") else {
        return;
    };
    let root = PathBuf::from(store);
    let options = EngineOptions::default();
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(options.partitions())
        .build()
        .unwrap();
    runtime.block_on(async {
        let manifest = read_manifest(&root).unwrap();
        let parameters = Parameters::from_study(&Study::default(), extract_end_micros(&root, &manifest).unwrap());
        let episodes = DEFINITIONS.iter().find(|d| d.table == "episodes").unwrap();
        let mut best = f64::INFINITY;
        let mut rows_out = 0;
        let mut used = 0i64;
        for _ in 0..3 {
            let ctx = session(&options).unwrap();
            register_contract_tables(&ctx, &root, &manifest).unwrap();
            let started = Instant::now();
            let frame = plan_definition(&ctx, episodes, &parameters).await.unwrap();
            let mut stream = frame.execute_stream().await.unwrap();
            rows_out = 0;
            while let Some(b) = stream.next().await {
                rows_out += b.unwrap().num_rows();
            }
            best = best.min(started.elapsed().as_secs_f64());
            let counts = ctx
                .sql("SELECT CAST(SUM(CASE WHEN has_value AND NOT hemolysed THEN 1 ELSE 0 END) AS BIGINT) FROM potassium_results")
                .await
                .unwrap()
                .collect()
                .await
                .unwrap();
            used = counts[0]
                .column(0)
                .as_any()
                .downcast_ref::<datafusion::arrow::array::Int64Array>()
                .unwrap()
                .value(0);
        }
        if std::env::var("KCOHORT_BENCH_EXPLAIN").is_ok() {
            let ctx = session(&options).unwrap();
            register_contract_tables(&ctx, &root, &manifest).unwrap();
            let frame = plan_definition(&ctx, episodes, &parameters).await.unwrap();
            let plan = frame.explain(false, true).unwrap().collect().await.unwrap();
            eprintln!("{}", datafusion::arrow::util::pretty::pretty_format_batches(&plan).unwrap());
        }
        eprintln!(
            "episodes: {used} used potassium results -> {rows_out} episodes; best of 3: {best:.2} s, {:.0} results/s ({} partitions, memory limit {} MiB)",
            used as f64 / best,
            options.partitions(),
            options.memory_limit_bytes >> 20
        );
    });
}
