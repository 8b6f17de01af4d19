//! State shared by the checks of one ingest: the site clock, the extract end, the ids known so far
//! (for references between tables), and counters that are not rejects.

use crate::timestamp::SiteClock;
use std::collections::HashSet;
use std::hash::{BuildHasherDefault, Hasher};

/// Set of ids, kept as 128-bit xxh3 hashes of their bytes so that 18 million ids fit in a few
/// hundred megabytes. Two different ids share a hash with probability about n²/2¹²⁹ (below 1e-24
/// for 18 million ids), so the set behaves as exact.
#[derive(Debug, Default, Clone)]
pub struct IdSet {
    hashes: HashSet<u128, BuildHasherDefault<FoldHasher>>,
}

impl IdSet {
    pub fn hash(id: &str) -> u128 {
        xxhash_rust::xxh3::xxh3_128(id.as_bytes())
    }

    pub fn contains_hash(&self, h: u128) -> bool {
        self.hashes.contains(&h)
    }

    pub fn contains(&self, id: &str) -> bool {
        self.contains_hash(IdSet::hash(id))
    }

    /// Returns false if it was already present.
    pub fn insert_hash(&mut self, h: u128) -> bool {
        self.hashes.insert(h)
    }

    pub fn len(&self) -> usize {
        self.hashes.len()
    }

    pub fn is_empty(&self) -> bool {
        self.hashes.is_empty()
    }

    pub fn reserve(&mut self, n: usize) {
        self.hashes.reserve(n);
    }
}

/// The keys are already uniform hashes (or small integers): fold them instead of hashing again.
#[derive(Default)]
pub struct FoldHasher(u64);

impl Hasher for FoldHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for chunk in bytes.chunks(8) {
            let mut b = [0u8; 8];
            b[..chunk.len()].copy_from_slice(chunk);
            self.0 ^= u64::from_le_bytes(b);
        }
    }
    fn write_u128(&mut self, v: u128) {
        self.0 = (v as u64) ^ ((v >> 64) as u64);
    }
    /// Small integer keys (e.g. hour numbers) are spread by a multiplicative (Fibonacci) hash.
    fn write_i64(&mut self, v: i64) {
        self.0 = (v as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15);
    }
}

#[derive(Debug)]
pub struct IngestContext {
    pub clock: SiteClock,
    /// Extract end (UTC µs), given or the latest timestamp of the extract: start times after it
    /// are rejected.
    pub extract_end: i64,
    /// Year of the extract end in the site time zone: the latest allowed birth year.
    pub extract_year: i32,
    /// Patients of the store and of this extract's accepted patient rows.
    pub patients: IdSet,
    /// Encounters of the store and of this extract's accepted encounter rows.
    pub encounters: IdSet,
    /// Zoneless times in a DST overlap (counted per table by the caller).
    pub ambiguous_local_times: u64,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn id_set_behaves_as_a_set() {
        let mut s = IdSet::default();
        assert!(s.insert_hash(IdSet::hash("P1")));
        assert!(!s.insert_hash(IdSet::hash("P1")));
        assert!(s.contains("P1"));
        assert!(!s.contains("P2"));
        assert!(!s.contains("p1"));
        assert_eq!(s.len(), 1);
    }
}
