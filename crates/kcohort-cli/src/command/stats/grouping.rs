//! The distinct values of a label column (groups, strata, units) in a fixed order, and the level of
//! each row.
//!
//! Order: numeric when every value reads as a number (so 2 comes before 10), otherwise by text.
//! The order does not depend on the order of the rows, so the default reference group of a
//! comparison (the first level) is the same however the file is sorted.

use std::collections::HashMap;

#[derive(Debug, Clone)]
pub struct Grouping {
    pub levels: Vec<String>,
    /// Index into `levels` for each row.
    pub of_row: Vec<usize>,
}

impl Grouping {
    pub fn new(labels: &[String]) -> Self {
        let mut levels: Vec<String> = Vec::new();
        let mut seen: HashMap<&str, ()> = HashMap::new();
        for label in labels {
            if seen.insert(label.as_str(), ()).is_none() {
                levels.push(label.clone());
            }
        }
        let numeric: Option<Vec<f64>> = levels.iter().map(|l| l.parse::<f64>().ok()).collect();
        match numeric {
            Some(values) if values.iter().all(|v| v.is_finite()) => {
                let mut order: Vec<usize> = (0..levels.len()).collect();
                order.sort_by(|&a, &b| values[a].total_cmp(&values[b]));
                levels = order.into_iter().map(|i| levels[i].clone()).collect();
            }
            _ => levels.sort(),
        }
        let position: HashMap<&str, usize> = levels
            .iter()
            .enumerate()
            .map(|(i, l)| (l.as_str(), i))
            .collect();
        let of_row = labels.iter().map(|l| position[l.as_str()]).collect();
        Grouping { levels, of_row }
    }

    /// All rows in one unnamed level.
    pub fn single(rows: usize) -> Self {
        Grouping {
            levels: vec![String::new()],
            of_row: vec![0; rows],
        }
    }

    /// Sums `values` over the rows of each level.
    pub fn sum<T: Copy + Default + std::ops::AddAssign>(&self, values: &[T]) -> Vec<T> {
        let mut sums = vec![T::default(); self.levels.len()];
        for (&level, &value) in self.of_row.iter().zip(values) {
            sums[level] += value;
        }
        sums
    }

    /// Row indices of each level.
    pub fn rows(&self) -> Vec<Vec<usize>> {
        let mut rows = vec![Vec::new(); self.levels.len()];
        for (row, &level) in self.of_row.iter().enumerate() {
            rows[level].push(row);
        }
        rows
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn labels(values: &[&str]) -> Vec<String> {
        values.iter().map(|v| v.to_string()).collect()
    }

    #[test]
    fn numeric_levels_sort_as_numbers_and_text_as_text() {
        let g = Grouping::new(&labels(&["10", "2", "10", "1"]));
        assert_eq!(g.levels, ["1", "2", "10"]);
        assert_eq!(g.of_row, [2, 1, 2, 0]);
        let g = Grouping::new(&labels(&["placebo", "drug", "placebo"]));
        assert_eq!(g.levels, ["drug", "placebo"]);
        assert_eq!(g.sum(&[1u64, 2, 3]), [2, 4]);
        assert_eq!(g.rows(), [vec![1], vec![0, 2]]);
    }
}
