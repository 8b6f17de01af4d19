//! File mechanics of a kcohort store, shared by ingest and the engine so both write files the
//! same way: a writer that computes SHA-256 of the bytes as they go out, SHA-256 of a file on
//! disk, syncing a folder after renames, and removing files a manifest no longer lists.
//!
//! It knows nothing of tables, Parquet or manifests (the layout is data in `kcohort-model`), and
//! it never prints.

use sha2::{Digest, Sha256};
use std::collections::HashSet;
use std::fs::File;
use std::io::{Read, Write};
use std::path::{Path, PathBuf};

/// Passes bytes on to `inner` and hashes them, so a file's SHA-256 is known when it is written.
pub struct HashingWriter<W> {
    inner: W,
    hasher: Sha256,
    bytes: u64,
}

impl<W: Write> HashingWriter<W> {
    pub fn new(inner: W) -> HashingWriter<W> {
        HashingWriter {
            inner,
            hasher: Sha256::new(),
            bytes: 0,
        }
    }

    /// The inner writer, the number of bytes written and their SHA-256 (lower-case hex).
    pub fn finish(self) -> (W, u64, String) {
        (self.inner, self.bytes, hex(&self.hasher.finalize()))
    }
}

impl<W: Write> Write for HashingWriter<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        let n = self.inner.write(buf)?;
        self.hasher.update(&buf[..n]);
        self.bytes += n as u64;
        Ok(n)
    }
    fn flush(&mut self) -> std::io::Result<()> {
        self.inner.flush()
    }
}

/// Lower-case hex, as `sha256sum` prints digests.
pub fn hex(bytes: &[u8]) -> String {
    const DIGITS: &[u8; 16] = b"0123456789abcdef";
    let mut s = String::with_capacity(bytes.len() * 2);
    for b in bytes {
        s.push(DIGITS[(b >> 4) as usize] as char);
        s.push(DIGITS[(b & 15) as usize] as char);
    }
    s
}

/// Size and SHA-256 (lower-case hex) of a file.
pub fn sha256_file(path: &Path) -> std::io::Result<(u64, String)> {
    let mut file = File::open(path)?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    let mut total = 0u64;
    loop {
        let n = file.read(&mut buf)?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
        total += n as u64;
    }
    Ok((total, hex(&h.finalize())))
}

/// Make renames inside `dir` durable.
pub fn sync_dir(dir: &Path) -> std::io::Result<()> {
    File::open(dir)?.sync_all()
}

/// Remove every file under the folders `tops` (relative to `root`, searched recursively) that is
/// not in `listed`. A missing folder is skipped. On failure, returns the path that could not be
/// removed.
pub fn remove_unlisted(
    root: &Path,
    tops: &[&str],
    listed: &HashSet<PathBuf>,
) -> Result<(), (PathBuf, std::io::Error)> {
    for top in tops {
        let mut stack = vec![root.join(top)];
        while let Some(dir) = stack.pop() {
            let Ok(entries) = std::fs::read_dir(&dir) else {
                continue;
            };
            for entry in entries.flatten() {
                let path = entry.path();
                if path.is_dir() {
                    stack.push(path);
                } else if !listed.contains(&path) {
                    std::fs::remove_file(&path).map_err(|e| (path.clone(), e))?;
                }
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_of_abc_matches_fips_180_2_example() {
        // FIPS 180-2, appendix B.1: SHA-256("abc").
        const ABC: &str = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad";
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("abc");
        std::fs::write(&p, b"abc").unwrap();
        assert_eq!(sha256_file(&p).unwrap(), (3, ABC.to_string()));
        let mut w = HashingWriter::new(Vec::new());
        w.write_all(b"abc").unwrap();
        let (inner, bytes, sha) = w.finish();
        assert_eq!((inner, bytes, sha), (b"abc".to_vec(), 3, ABC.to_string()));
    }

    #[test]
    fn only_unlisted_files_are_removed() {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path();
        std::fs::create_dir_all(root.join("tables/a")).unwrap();
        for f in ["tables/a/keep", "tables/a/old", "other"] {
            std::fs::write(root.join(f), b"x").unwrap();
        }
        let listed: HashSet<PathBuf> = [root.join("tables/a/keep")].into_iter().collect();
        remove_unlisted(root, &["tables", "missing"], &listed).unwrap();
        assert!(root.join("tables/a/keep").exists());
        assert!(!root.join("tables/a/old").exists());
        assert!(
            root.join("other").exists(),
            "only the named folders are swept"
        );
    }
}
