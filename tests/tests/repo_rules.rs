//! House rules that a test can see (the cheap invariants of ARCHITECTURE.md).

use kcohort_model::TableName;
use std::path::{Path, PathBuf};

fn root() -> PathBuf {
    kcohort_tests::repo_root()
}

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            rust_files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

fn manifest_deps(krate: &str) -> String {
    let text =
        std::fs::read_to_string(root().join("crates").join(krate).join("Cargo.toml")).unwrap();
    // Only the [dependencies] section (dev-dependencies may use anything).
    let start = text
        .find("[dependencies]")
        .map_or(0, |i| i + "[dependencies]".len());
    let rest = &text[start..];
    rest[..rest.find("\n[").unwrap_or(rest.len())].to_string()
}

/// Invariant: the input contract page names every column of every contract table.
#[test]
fn input_contract_doc_names_every_column() {
    let doc = std::fs::read_to_string(root().join("docs/input-contract.md")).unwrap();
    for table in TableName::ALL {
        let heading = format!("### {}", table.as_str());
        let start = doc
            .find(&heading)
            .unwrap_or_else(|| panic!("docs/input-contract.md has no section {heading}"));
        let section = &doc[start..];
        let section = &section[..section[4..].find("\n### ").map_or(section.len(), |i| i + 4)];
        for column in table.columns() {
            assert!(
                section.contains(&format!("`{}`", column.name)),
                "{}.{} missing from the doc",
                table,
                column.name
            );
        }
    }
}

/// Invariant: only kcohort-cli prints; library crates report through return values.
#[test]
fn only_the_cli_prints() {
    for entry in std::fs::read_dir(root().join("crates")).unwrap() {
        let dir = entry.unwrap().path();
        if dir.ends_with("kcohort-cli") {
            continue;
        }
        let mut files = Vec::new();
        rust_files(&dir.join("src"), &mut files);
        for f in files {
            let text = std::fs::read_to_string(&f).unwrap();
            for (n, line) in text.lines().enumerate() {
                let code = line.split("//").next().unwrap_or_default();
                for mac in ["println!", "eprintln!", "print!(", "eprint!(", "dbg!("] {
                    assert!(!code.contains(mac), "{}:{} uses {mac}", f.display(), n + 1);
                }
            }
        }
    }
}

/// Invariant: the pure crates (statistics, model, report) do no I/O and know no Arrow or
/// DataFusion; ingest never depends on the SQL engine.
#[test]
fn dependency_direction() {
    let stats = manifest_deps("kcohort-stats");
    for forbidden in ["arrow", "parquet", "datafusion", "kcohort-"] {
        assert!(
            !stats.contains(forbidden),
            "kcohort-stats must not depend on {forbidden}"
        );
    }
    let model = manifest_deps("kcohort-model");
    for forbidden in ["datafusion", "parquet", "kcohort-"] {
        assert!(
            !model.contains(forbidden),
            "kcohort-model must not depend on {forbidden}"
        );
    }
    let ingest = manifest_deps("kcohort-ingest");
    for forbidden in ["datafusion", "kcohort-engine", "kcohort-stats"] {
        assert!(
            !ingest.contains(forbidden),
            "kcohort-ingest must not depend on {forbidden}"
        );
    }
    let report = manifest_deps("kcohort-report");
    for forbidden in [
        "arrow",
        "parquet",
        "datafusion",
        "kcohort-engine",
        "kcohort-ingest",
    ] {
        assert!(
            !report.contains(forbidden),
            "kcohort-report must not depend on {forbidden}"
        );
    }
    for pure in ["kcohort-stats", "kcohort-model", "kcohort-report"] {
        let mut files = Vec::new();
        rust_files(&root().join("crates").join(pure).join("src"), &mut files);
        for f in files {
            let text = std::fs::read_to_string(&f).unwrap();
            for io in [
                "std::fs",
                "std::env",
                "std::net",
                "SystemTime::now",
                "Instant::now",
            ] {
                assert!(
                    !text.contains(io),
                    "{} (a pure crate) uses {io}",
                    f.display()
                );
            }
        }
    }
}

/// Invariant: every library crate opens with a `//!` doc saying what it does.
#[test]
fn every_crate_root_has_a_doc_comment() {
    for entry in std::fs::read_dir(root().join("crates")).unwrap() {
        let dir = entry.unwrap().path();
        let lib = dir.join("src/lib.rs");
        let main = dir.join("src/main.rs");
        let file = if lib.exists() { lib } else { main };
        let text = std::fs::read_to_string(&file).unwrap();
        assert!(
            text.trim_start().starts_with("//!"),
            "{} must open with a //! doc",
            file.display()
        );
    }
}
