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

/// Ids accepted from one table of an extract, for the duplicate rule and for replacing stored rows
/// on append. Extracts usually number their rows in increasing order, so the ids are kept in two
/// parts: those that arrived in increasing byte order, appended to one arena (sorted by
/// construction, searched by bisection), and a hashed set of the others. Every id of the second
/// part is at most the arena's last id, so an id above it is new without any lookup — the common
/// case costs no random memory access however many ids there are.
#[derive(Debug, Default, Clone)]
pub struct AcceptedIds {
    bytes: Vec<u8>,
    ends: Vec<usize>,
    others: IdSet,
}

impl AcceptedIds {
    fn sorted(&self, i: usize) -> &[u8] {
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        &self.bytes[start..self.ends[i]]
    }

    fn last(&self) -> Option<&[u8]> {
        self.ends.len().checked_sub(1).map(|i| self.sorted(i))
    }

    pub fn contains(&self, id: &str) -> bool {
        let id = id.as_bytes();
        match self.last() {
            None => false,
            Some(last) if id > last => false,
            Some(_) => {
                let (mut lo, mut hi) = (0, self.ends.len());
                while lo < hi {
                    let mid = (lo + hi) / 2;
                    match self.sorted(mid).cmp(id) {
                        std::cmp::Ordering::Less => lo = mid + 1,
                        std::cmp::Ordering::Greater => hi = mid,
                        std::cmp::Ordering::Equal => return true,
                    }
                }
                self.others.contains_hash(xxhash_rust::xxh3::xxh3_128(id))
            }
        }
    }

    /// Add an id (the caller has checked it is not there yet).
    pub fn insert(&mut self, id: &str) {
        if self.last().is_none_or(|last| id.as_bytes() > last) {
            self.bytes.extend_from_slice(id.as_bytes());
            self.ends.push(self.bytes.len());
        } else {
            self.others.insert_hash(IdSet::hash(id));
        }
    }

    pub fn len(&self) -> usize {
        self.ends.len() + self.others.len()
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Make room for about `n` more ids of the average length seen so far.
    pub fn reserve(&mut self, n: usize) {
        let average = if self.ends.is_empty() {
            16
        } else {
            self.bytes.len() / self.ends.len() + 1
        };
        self.bytes.reserve(n * average);
        self.ends.reserve(n);
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
    fn accepted_ids_in_and_out_of_order() {
        let mut a = AcceptedIds::default();
        for id in ["L003", "L005", "L004", "L010", "L001", "M1"] {
            assert!(!a.contains(id), "{id}");
            a.insert(id);
            assert!(a.contains(id), "{id}");
        }
        for absent in ["L002", "L006", "L0", "", "Z", "M0"] {
            assert!(!a.contains(absent), "{absent}");
        }
        assert_eq!(a.len(), 6);
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(64))]
        /// Differential: the two-part id store answers like a plain set on any id sequence.
        #[test]
        fn accepted_ids_agree_with_a_plain_set(ids in proptest::collection::vec("[A-C][0-9]{0,3}", 0..200)) {
            let mut a = AcceptedIds::default();
            let mut plain = std::collections::HashSet::new();
            for id in &ids {
                proptest::prop_assert_eq!(a.contains(id), plain.contains(id.as_str()));
                if plain.insert(id.as_str()) {
                    a.insert(id);
                }
            }
            proptest::prop_assert_eq!(a.len(), plain.len());
        }
    }

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
