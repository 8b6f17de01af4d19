//! The rows of one patient before they are written: plain structs holding instants (UTC seconds)
//! and references into the network and formulary tables. Encounter references are indexes into
//! the patient's encounter list until the writer gives encounters their ids.

use crate::formulary::Drug;

/// "No encounter" in an encounter index.
pub const NO_ENCOUNTER: u32 = u32::MAX;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EncounterClass {
    Inpatient,
    Emergency,
    Outpatient,
}

impl EncounterClass {
    pub fn code(self) -> &'static str {
        match self {
            EncounterClass::Inpatient => "inpatient",
            EncounterClass::Emergency => "emergency",
            EncounterClass::Outpatient => "outpatient",
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DischargeStatus {
    Home,
    Transfer,
    Died,
    Other,
}

impl DischargeStatus {
    pub fn code(self) -> &'static str {
        match self {
            DischargeStatus::Home => "home",
            DischargeStatus::Transfer => "transfer",
            DischargeStatus::Died => "died",
            DischargeStatus::Other => "other",
        }
    }
}

#[derive(Debug, Clone, Copy)]
pub struct EncounterRec {
    pub class: EncounterClass,
    pub unit: usize,
    pub admitted_at: i64,
    /// None: still admitted at the extract end.
    pub discharged_at: Option<i64>,
    pub status: Option<DischargeStatus>,
}

/// What a laboratory row measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Test {
    Potassium,
    PotassiumBloodGas,
    Sodium,
    Chloride,
    Bicarbonate,
    Creatinine,
    UreaNitrogen,
    Glucose,
    CreatineKinase,
}

/// A reported value: a number with a fixed number of decimals, optionally with a comparator
/// (a result beyond the analyser's reportable range).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Reported {
    /// Value × 10^decimals, rounded.
    pub scaled: i64,
    pub decimals: u8,
    pub comparator: Option<&'static str>,
}

impl Reported {
    pub fn new(value: f64, decimals: u8) -> Reported {
        let scale = 10f64.powi(i32::from(decimals));
        Reported {
            scaled: (value * scale).round() as i64,
            decimals,
            comparator: None,
        }
    }

    pub fn with_comparator(value: f64, decimals: u8, comparator: &'static str) -> Reported {
        Reported {
            comparator: Some(comparator),
            ..Reported::new(value, decimals)
        }
    }

    /// The numeric value as a reader parses it (the comparator dropped).
    pub fn value(&self) -> f64 {
        self.scaled as f64 / 10f64.powi(i32::from(self.decimals))
    }
}

#[derive(Debug, Clone, Copy)]
pub struct LabRec {
    pub encounter: u32,
    pub site: usize,
    pub test: Test,
    pub value: Reported,
    /// Index into the unit spellings of the test at the site (µmol/L vs umol/L).
    pub unit_spelling: u8,
    pub collected_at: i64,
    pub resulted_at: Option<i64>,
    pub hemolysis_index: Option<u16>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MedKind {
    Dispense,
    Administer,
    Order,
}

impl MedKind {
    pub fn code(self) -> &'static str {
        match self {
            MedKind::Dispense => "dispense",
            MedKind::Administer => "administer",
            MedKind::Order => "order",
        }
    }
}

#[derive(Debug, Clone, Copy)]
pub struct MedRec {
    pub encounter: u32,
    pub drug: &'static Drug,
    pub kind: MedKind,
    pub start_at: i64,
    pub end_at: Option<i64>,
    pub days_supply: Option<u16>,
}

#[derive(Debug, Clone, Copy)]
pub struct DiagRec {
    pub encounter: u32,
    pub code: &'static str,
    pub recorded_at: i64,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reported_values_round_half_away_from_zero() {
        assert_eq!(Reported::new(5.649, 1).scaled, 56);
        assert_eq!(Reported::new(5.65, 1).scaled, 57);
        assert_eq!(Reported::new(1.234, 2).value(), 1.23);
        assert_eq!(Reported::new(108.6, 0).scaled, 109);
    }
}
