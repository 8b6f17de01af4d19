//! Shared helpers of the end-to-end tests: fixture paths, copying fixture extracts, reading
//! stored Parquet tables back.

use std::path::{Path, PathBuf};

/// The repository root (this crate lives in `tests/`).
pub fn repo_root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("tests/ has a parent")
        .to_path_buf()
}

pub fn fixtures() -> PathBuf {
    repo_root().join("tests").join("fixtures")
}

/// Copy every file of `from` into `to` (flat folders only).
pub fn copy_folder(from: &Path, to: &Path) -> std::io::Result<()> {
    std::fs::create_dir_all(to)?;
    for entry in std::fs::read_dir(from)? {
        let entry = entry?;
        if entry.path().is_file() {
            std::fs::copy(entry.path(), to.join(entry.file_name()))?;
        }
    }
    Ok(())
}
