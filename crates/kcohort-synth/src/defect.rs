//! Planted malformed rows for the rejects machinery. Each is an extra row with exactly one
//! defect, so its expected reject reason is unambiguous; the rows it copies stay valid.
//!
//! Which rows get one: every written row draws a Bernoulli with the configured rate, and on top
//! one row of every (table, defect) pair is forced at evenly spaced patients, so any extract of a
//! few hundred patients or more holds at least one of each kind.

use crate::random::{Rng, Stream};
use kcohort_model::{RejectReason, TableName};

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Defect {
    BadNumber,
    BadTimestamp,
    ImpossibleValue,
    UnknownUnit,
    DuplicateId,
    UnknownPatient,
    EndBeforeStart,
}

impl Defect {
    pub fn reason(self) -> RejectReason {
        match self {
            Defect::BadNumber => RejectReason::BadNumber,
            Defect::BadTimestamp => RejectReason::BadTimestamp,
            Defect::ImpossibleValue => RejectReason::ImpossibleValue,
            Defect::UnknownUnit => RejectReason::UnknownUnit,
            Defect::DuplicateId => RejectReason::DuplicateId,
            Defect::UnknownPatient => RejectReason::UnknownPatient,
            Defect::EndBeforeStart => RejectReason::EndBeforeStart,
        }
    }

    pub fn index(self) -> usize {
        self as usize
    }
}

/// The defects a table can carry.
pub fn applicable(table: TableName) -> &'static [Defect] {
    use Defect::*;
    match table {
        // A patient row's own defects come as phantom patients (fresh ids with no other rows)
        // so that no real patient, and none of its rows, is rejected.
        TableName::Patients => &[BadNumber, BadTimestamp, DuplicateId],
        TableName::Encounters => &[BadTimestamp, EndBeforeStart, DuplicateId, UnknownPatient],
        TableName::LabResults => &[
            BadNumber,
            BadTimestamp,
            ImpossibleValue,
            UnknownUnit,
            DuplicateId,
            UnknownPatient,
            EndBeforeStart,
        ],
        TableName::MedicationEvents => &[
            BadNumber,
            BadTimestamp,
            EndBeforeStart,
            DuplicateId,
            UnknownPatient,
        ],
        TableName::Diagnoses => &[BadTimestamp, UnknownPatient],
    }
}

fn table_index(table: TableName) -> usize {
    TableName::ALL
        .iter()
        .position(|t| *t == table)
        .expect("listed")
}

#[derive(Debug)]
pub struct DefectPlanner {
    seed: u64,
    rate: f64,
    /// (patient index, table, defect), sorted by patient.
    forced: Vec<(u64, TableName, Defect)>,
    next_forced: usize,
    pending: Vec<(TableName, Defect)>,
    pub rng: Rng,
    /// Planted defects by table and defect.
    pub counts: [[u64; 7]; 5],
}

impl DefectPlanner {
    pub fn new(seed: u64, rate: f64, patients: u64) -> DefectPlanner {
        let mut pairs = Vec::new();
        if rate > 0.0 {
            for table in TableName::ALL {
                for d in applicable(table) {
                    pairs.push((table, *d));
                }
            }
        }
        let n = pairs.len() as u64;
        let forced = pairs
            .into_iter()
            .enumerate()
            .map(|(j, (t, d))| ((2 * j as u64 + 1) * patients / (2 * n.max(1)), t, d))
            .collect();
        DefectPlanner {
            seed,
            rate,
            forced,
            next_forced: 0,
            pending: Vec::new(),
            rng: Rng::seeded(seed),
            counts: [[0; 7]; 5],
        }
    }

    /// Called before a patient's rows: its own random stream, and forced defects now due.
    pub fn start_patient(&mut self, index: u64) {
        self.rng = Rng::for_item(self.seed, Stream::Defect, index);
        while let Some(&(at, table, defect)) = self.forced.get(self.next_forced) {
            if at > index {
                break;
            }
            self.pending.push((table, defect));
            self.next_forced += 1;
        }
    }

    /// The defects to plant after one clean row of `table` (usually none).
    pub fn after_row(&mut self, table: TableName, out: &mut Vec<Defect>) {
        out.clear();
        if self.rate <= 0.0 {
            return;
        }
        let mut i = 0;
        while i < self.pending.len() {
            if self.pending[i].0 == table {
                out.push(self.pending.swap_remove(i).1);
            } else {
                i += 1;
            }
        }
        if self.rng.bernoulli(self.rate) {
            let kinds = applicable(table);
            out.push(*self.rng.pick(kinds));
        }
        for d in out.iter() {
            self.counts[table_index(table)][d.index()] += 1;
        }
    }

    /// Planted counts of one table by reject reason code (reasons with none planted left out,
    /// as a reconciliation lists only reasons that occurred).
    pub fn counts_of(&self, table: TableName) -> std::collections::BTreeMap<String, u64> {
        let row = &self.counts[table_index(table)];
        applicable(table)
            .iter()
            .filter(|d| row[d.index()] > 0)
            .map(|d| (d.reason().code().to_string(), row[d.index()]))
            .collect()
    }
}

/// Unparseable numbers planted as `bad_number` (a doubled point, a letter O for a zero, a sign
/// pair, a stray letter).
pub const BAD_LAB_VALUES: [&str; 4] = ["5..1", "4.3.2", "1O.2", "+-4.8"];
pub const BAD_YEARS: [&str; 3] = ["19S4", "l962", "197 3"];
pub const BAD_COUNTS: [&str; 3] = ["3O", "9O", "thirty"];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn forced_defects_cover_every_pair_once() {
        let mut p = DefectPlanner::new(1, 0.0005, 2000);
        let mut out = Vec::new();
        for i in 0..2000 {
            p.start_patient(i);
            for table in TableName::ALL {
                p.after_row(table, &mut out);
            }
        }
        for table in TableName::ALL {
            for d in applicable(table) {
                assert!(
                    p.counts[table_index(table)][d.index()] >= 1,
                    "{table} {d:?}"
                );
            }
        }
        let total: u64 = p.counts.iter().flatten().sum();
        // 21 forced plus about 0.0005 × 10 000 rows = 5 random ones.
        assert!((21..60).contains(&total), "{total}");
    }

    #[test]
    fn zero_rate_plants_nothing() {
        let mut p = DefectPlanner::new(1, 0.0, 2000);
        let mut out = Vec::new();
        for i in 0..2000 {
            p.start_patient(i);
            p.after_row(TableName::LabResults, &mut out);
            assert!(out.is_empty());
        }
    }

    #[test]
    fn bad_tokens_do_not_parse() {
        for v in BAD_LAB_VALUES.iter().chain(&BAD_YEARS).chain(&BAD_COUNTS) {
            assert!(v.parse::<f64>().is_err(), "{v}");
            assert!(!v.is_empty());
        }
    }
}
