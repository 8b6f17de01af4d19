//! Small-cell suppression for outputs that leave the team.
//!
//! With a threshold K, a count from 1 to K−1 is shown as `<K` (primary suppression); zero and
//! counts of K or more are shown. Any rate, share or interval computed from a suppressed count
//! is withheld with it. Where counts are published together with their total (units and the
//! network, severity bands, grades, the months of a year and their sum), a suppressed cell could
//! be recovered by subtraction; complementary suppression withholds further cells (smallest
//! first, then the total) until no withheld cell is determined by the published numbers: its
//! feasible range, given the sum and what the marks say (`<K`: 1..K−1; `withheld`: at least 1),
//! must hold more than one value.

use serde::Serialize;

/// A published count.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case", tag = "kind", content = "value")]
pub enum Count {
    /// Shown as is.
    Shown(u64),
    /// Primary suppression: between 1 and K−1.
    Small,
    /// Complementary suppression: withheld so that a small cell cannot be recovered.
    Withheld,
}

impl Count {
    pub fn shown(self) -> Option<u64> {
        match self {
            Count::Shown(n) => Some(n),
            _ => None,
        }
    }

    /// The text of the cell, `<K` for a small count, `withheld` for a complementary one.
    pub fn text(self, k: Option<u64>) -> String {
        match self {
            Count::Shown(n) => n.to_string(),
            Count::Small => format!("<{}", k.unwrap_or(0)),
            Count::Withheld => "withheld".to_string(),
        }
    }
}

/// The suppression rule of one report.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Suppression {
    /// K: counts 1..K−1 are suppressed; `None` = nothing is.
    pub below: Option<u64>,
}

impl Suppression {
    pub const NONE: Suppression = Suppression { below: None };

    /// Primary suppression of one count.
    pub fn count(&self, n: u64) -> Count {
        match self.below {
            Some(k) if n >= 1 && n < k => Count::Small,
            _ => Count::Shown(n),
        }
    }

    /// Cells of a line that sums to `total` (true counts), suppressed together: primary
    /// suppression of each, then complementary suppression until no withheld cell is determined.
    /// Returns the cells and the total as published.
    pub fn line(&self, cells: &[u64], total: u64) -> (Vec<Count>, Count) {
        let mut out: Vec<Count> = cells.iter().map(|&n| self.count(n)).collect();
        let mut total_out = self.count(total);
        let Some(k) = self.below else {
            return (out, total_out);
        };
        loop {
            if matches!(total_out, Count::Small | Count::Withheld) {
                // The total is not published: no sum to solve. Everything else stays as marked.
                return (out, total_out);
            }
            if determined_cells(&out, cells, total, k).is_empty() {
                return (out, total_out);
            }
            // Withhold the smallest shown non-zero cell; when none is left, the total.
            let next = (0..cells.len())
                .filter(|&i| matches!(out[i], Count::Shown(n) if n > 0))
                .min_by_key(|&i| (cells[i], i));
            match next {
                Some(i) => out[i] = Count::Withheld,
                None => total_out = Count::Withheld,
            }
        }
    }
}

/// Cells whose value the published line determines (the feasible range of the cell, given the
/// sum and the other cells' ranges, holds one value). `truth` gives the true values, only to
/// know the sum of the shown cells.
fn determined_cells(published: &[Count], truth: &[u64], total: u64, k: u64) -> Vec<usize> {
    let known: u64 = published
        .iter()
        .zip(truth)
        .filter_map(|(c, &t)| matches!(c, Count::Shown(_)).then_some(t))
        .sum();
    let rest = total.saturating_sub(known);
    let range = |c: &Count| match c {
        Count::Small => (1, k - 1),
        Count::Withheld => (1, total),
        Count::Shown(n) => (*n, *n),
    };
    let hidden: Vec<usize> = (0..published.len())
        .filter(|&i| !matches!(published[i], Count::Shown(_)))
        .collect();
    let mut determined = Vec::new();
    for &i in &hidden {
        let (others_low, others_high) = hidden
            .iter()
            .filter(|&&j| j != i)
            .map(|&j| range(&published[j]))
            .fold((0u64, 0u64), |(a, b), (lo, hi)| {
                (a + lo, b.saturating_add(hi))
            });
        let (lo, hi) = range(&published[i]);
        let low = lo.max(rest.saturating_sub(others_high));
        let high = hi.min(rest.saturating_sub(others_low));
        if low >= high {
            determined.push(i);
        }
    }
    determined
}

#[cfg(test)]
mod tests {
    use super::*;

    /// An independent auditor: enumerate every assignment of the hidden cells within what their
    /// marks say and keep those that meet the published total; a hidden cell with one feasible
    /// value is disclosed.
    fn disclosed(published: &[Count], total: Count, shown_sum: u64, k: u64) -> Vec<usize> {
        let Count::Shown(total) = total else {
            return Vec::new();
        };
        let hidden: Vec<usize> = (0..published.len())
            .filter(|&i| !matches!(published[i], Count::Shown(_)))
            .collect();
        let rest = total - shown_sum;
        let ranges: Vec<(u64, u64)> = hidden
            .iter()
            .map(|&i| match published[i] {
                Count::Small => (1, k - 1),
                _ => (1, rest),
            })
            .collect();
        let mut values: Vec<std::collections::BTreeSet<u64>> =
            vec![Default::default(); hidden.len()];
        let mut current = vec![0u64; hidden.len()];
        fn walk(
            depth: usize,
            left: u64,
            ranges: &[(u64, u64)],
            current: &mut Vec<u64>,
            values: &mut Vec<std::collections::BTreeSet<u64>>,
        ) {
            if depth == ranges.len() {
                if left == 0 {
                    for (d, v) in current.iter().enumerate() {
                        values[d].insert(*v);
                    }
                }
                return;
            }
            let (lo, hi) = ranges[depth];
            for v in lo..=hi.min(left) {
                current[depth] = v;
                walk(depth + 1, left - v, ranges, current, values);
            }
        }
        walk(0, rest, &ranges, &mut current, &mut values);
        hidden
            .iter()
            .zip(&values)
            .filter(|(_, v)| v.len() == 1)
            .map(|(&i, _)| i)
            .collect()
    }

    #[test]
    fn no_suppressed_cell_can_be_solved_from_the_published_line() {
        let k = 11;
        let s = Suppression { below: Some(k) };
        // Lines of unit counts with their total, including awkward ones: one small cell, two
        // small cells summing to 2, a small cell beside zeros, all small.
        let lines: &[&[u64]] = &[
            &[3, 40, 25, 12],
            &[1, 1, 30, 14],
            &[5, 0, 0, 20],
            &[2, 3, 4],
            &[10, 10, 11],
            &[0, 0, 0, 15],
            &[1, 0, 12],
            &[9, 11, 13, 100, 2],
        ];
        for cells in lines {
            let total: u64 = cells.iter().sum();
            let (published, total_out) = s.line(cells, total);
            let shown_sum: u64 = published.iter().filter_map(|c| c.shown()).sum();
            assert!(
                disclosed(&published, total_out, shown_sum, k).is_empty(),
                "{cells:?} -> {published:?} total {total_out:?}"
            );
            // Every small count is suppressed; nothing shown differs from the truth.
            for (c, &n) in published.iter().zip(cells.iter()) {
                if (1..k).contains(&n) {
                    assert_ne!(*c, Count::Shown(n), "{cells:?}");
                }
                if let Count::Shown(v) = c {
                    assert_eq!(*v, n);
                }
            }
        }
    }

    #[test]
    fn the_auditor_finds_what_primary_suppression_alone_leaves_open() {
        // Without complementary suppression, one small cell beside a published total is solved.
        let k = 11;
        let published = [Count::Small, Count::Shown(40), Count::Shown(25)];
        assert_eq!(disclosed(&published, Count::Shown(68), 65, k), vec![0]);
    }

    #[test]
    fn without_a_threshold_everything_is_shown() {
        let (cells, total) = Suppression::NONE.line(&[1, 2, 3], 6);
        assert_eq!(
            cells,
            vec![Count::Shown(1), Count::Shown(2), Count::Shown(3)]
        );
        assert_eq!(total, Count::Shown(6));
        assert_eq!(Count::Small.text(Some(11)), "<11");
    }
}
