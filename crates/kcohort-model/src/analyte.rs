//! Analytes: which LOINC codes measure what, the one canonical unit of each, the conversion of
//! every accepted reported unit into it, and the limits beyond which a value is physiologically
//! impossible (a data error, not an extreme result).
//!
//! Units are matched case-insensitively after trimming; `µ` (micro sign), `μ` (Greek mu) and `u`
//! are the same prefix. A unit that is not listed for the analyte is rejected (never guessed).
//! Results with a LOINC code that is not listed here are kept unconverted (canonical value empty)
//! and counted as unlisted.

/// A laboratory analyte that kcohort interprets.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Analyte {
    Potassium,
    Creatinine,
    Glucose,
    Bicarbonate,
    Sodium,
    Chloride,
    UreaNitrogen,
    CreatineKinase,
    Urate,
    Phosphate,
    Calcium,
    Albumin,
    Ph,
    Platelets,
    Leukocytes,
}

/// How one reported unit turns into the canonical unit: canonical = reported × factor.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct UnitConversion {
    /// The reported unit in its usual spelling (matching ignores case and the µ/μ/u variants).
    pub unit: &'static str,
    pub factor: f64,
    /// Where the factor comes from.
    pub source: &'static str,
}

const IDENTITY: &str = "same unit";

/// Struct literal (not a `const fn` call) so that the tables below are promoted to `'static`.
macro_rules! conv {
    ($unit:expr, $factor:expr, $source:expr) => {
        UnitConversion {
            unit: $unit,
            factor: $factor,
            source: $source,
        }
    };
}

impl Analyte {
    pub const ALL: [Analyte; 15] = [
        Analyte::Potassium,
        Analyte::Creatinine,
        Analyte::Glucose,
        Analyte::Bicarbonate,
        Analyte::Sodium,
        Analyte::Chloride,
        Analyte::UreaNitrogen,
        Analyte::CreatineKinase,
        Analyte::Urate,
        Analyte::Phosphate,
        Analyte::Calcium,
        Analyte::Albumin,
        Analyte::Ph,
        Analyte::Platelets,
        Analyte::Leukocytes,
    ];

    /// Name used in the store's `analyte` column and in study files.
    pub fn as_str(self) -> &'static str {
        match self {
            Analyte::Potassium => "potassium",
            Analyte::Creatinine => "creatinine",
            Analyte::Glucose => "glucose",
            Analyte::Bicarbonate => "bicarbonate",
            Analyte::Sodium => "sodium",
            Analyte::Chloride => "chloride",
            Analyte::UreaNitrogen => "urea_nitrogen",
            Analyte::CreatineKinase => "creatine_kinase",
            Analyte::Urate => "urate",
            Analyte::Phosphate => "phosphate",
            Analyte::Calcium => "calcium",
            Analyte::Albumin => "albumin",
            Analyte::Ph => "ph",
            Analyte::Platelets => "platelets",
            Analyte::Leukocytes => "leukocytes",
        }
    }

    /// LOINC codes mapped to this analyte. Sources: LOINC table as summarised in the project's
    /// domain reference (potassium 2823-3 serum/plasma, 6298-4 blood, 32713-0 arterial, 39789-3
    /// venous, 39790-1 capillary; co-analytes as listed there).
    pub fn loinc_codes(self) -> &'static [&'static str] {
        match self {
            Analyte::Potassium => &["2823-3", "6298-4", "32713-0", "39789-3", "39790-1"],
            Analyte::Creatinine => &["2160-0", "14682-9", "38483-4", "59826-8"],
            Analyte::Glucose => &["2345-7", "2339-0", "15074-8", "14749-6"],
            Analyte::Bicarbonate => &["1963-8", "2028-9"],
            Analyte::Sodium => &["2951-2", "2947-0", "32717-1", "39791-9"],
            Analyte::Chloride => &["2075-0", "2069-3"],
            Analyte::UreaNitrogen => &["3094-0", "6299-2"],
            Analyte::CreatineKinase => &["2157-6"],
            Analyte::Urate => &["3084-1", "14933-6"],
            Analyte::Phosphate => &["2777-1", "14879-1"],
            Analyte::Calcium => &["17861-6", "2000-8"],
            Analyte::Albumin => &["1751-7"],
            Analyte::Ph => &["2744-1", "11558-4", "2746-6"],
            Analyte::Platelets => &["777-3"],
            Analyte::Leukocytes => &["6690-2"],
        }
    }

    pub fn from_loinc(loinc: &str) -> Option<Analyte> {
        Analyte::ALL
            .into_iter()
            .find(|a| a.loinc_codes().contains(&loinc))
    }

    /// The one unit values of this analyte are stored in (UCUM-style spelling).
    pub fn canonical_unit(self) -> &'static str {
        match self {
            Analyte::Potassium | Analyte::Bicarbonate | Analyte::Sodium | Analyte::Chloride => {
                "mmol/L"
            }
            Analyte::Creatinine
            | Analyte::Glucose
            | Analyte::UreaNitrogen
            | Analyte::Urate
            | Analyte::Phosphate
            | Analyte::Calcium => "mg/dL",
            Analyte::CreatineKinase => "U/L",
            Analyte::Albumin => "g/dL",
            Analyte::Ph => "[pH]",
            Analyte::Platelets | Analyte::Leukocytes => "10*9/L",
        }
    }

    /// Every reported unit accepted for this analyte with its factor into the canonical unit.
    pub fn conversions(self) -> &'static [UnitConversion] {
        const MONOVALENT: &str = "monovalent ion: 1 mEq = 1 mmol (standard chemistry)";
        match self {
            Analyte::Potassium | Analyte::Sodium | Analyte::Chloride | Analyte::Bicarbonate => &[
                conv!("mmol/L", 1.0, IDENTITY),
                conv!("mEq/L", 1.0, MONOVALENT),
            ],
            // Creatinine molar mass 113.12 g/mol: 1 mg/dL = 88.4 µmol/L (KDIGO 2012 CKD guideline
            // unit table; IDMS-traceable creatinine).
            Analyte::Creatinine => &[
                conv!("mg/dL", 1.0, IDENTITY),
                conv!(
                    "µmol/L",
                    1.0 / 88.4,
                    "1 mg/dL = 88.4 µmol/L (KDIGO 2012; molar mass 113.12 g/mol)"
                ),
            ],
            // Glucose molar mass 180.16 g/mol: 1 mmol/L = 18.0 mg/dL (ADA Standards of Care
            // conversion, 18.0 rounded from 18.016).
            Analyte::Glucose => &[
                conv!("mg/dL", 1.0, IDENTITY),
                conv!(
                    "mmol/L",
                    18.0,
                    "1 mmol/L = 18.0 mg/dL (ADA; molar mass 180.16 g/mol)"
                ),
            ],
            // Urea nitrogen: 1 mmol/L urea = 2.8 mg/dL urea nitrogen (2 N × 14.007 g/mol; from memory,
            // consistent with the molar mass).
            Analyte::UreaNitrogen => &[
                conv!("mg/dL", 1.0, IDENTITY),
                conv!(
                    "mmol/L",
                    2.8,
                    "1 mmol/L urea = 2.8 mg/dL N (2 × 14.007 g/mol; from memory)"
                ),
            ],
            Analyte::CreatineKinase => &[
                conv!("U/L", 1.0, IDENTITY),
                conv!(
                    "IU/L",
                    1.0,
                    "IU and U are the same enzyme unit (common practice)"
                ),
            ],
            // Uric acid molar mass 168.11 g/mol: 1 mg/dL = 59.48 µmol/L (from memory; molar mass).
            Analyte::Urate => &[
                conv!("mg/dL", 1.0, IDENTITY),
                conv!(
                    "µmol/L",
                    1.0 / 59.48,
                    "1 mg/dL = 59.48 µmol/L (molar mass 168.11 g/mol; from memory)"
                ),
            ],
            // Phosphorus 30.97 g/mol: 1 mmol/L = 3.097 mg/dL (molar mass; from memory).
            Analyte::Phosphate => &[
                conv!("mg/dL", 1.0, IDENTITY),
                conv!(
                    "mmol/L",
                    3.097,
                    "1 mmol/L = 3.097 mg/dL (P 30.97 g/mol; from memory)"
                ),
            ],
            // Calcium 40.08 g/mol: 1 mmol/L = 4.008 mg/dL (molar mass; from memory).
            Analyte::Calcium => &[
                conv!("mg/dL", 1.0, IDENTITY),
                conv!(
                    "mmol/L",
                    4.008,
                    "1 mmol/L = 4.008 mg/dL (Ca 40.08 g/mol; from memory)"
                ),
            ],
            Analyte::Albumin => &[
                conv!("g/dL", 1.0, IDENTITY),
                conv!("g/L", 0.1, "1 g/dL = 10 g/L (SI prefix)"),
            ],
            Analyte::Ph => &[
                conv!("[pH]", 1.0, IDENTITY),
                conv!("pH", 1.0, "same scale (common practice)"),
            ],
            Analyte::Platelets | Analyte::Leukocytes => &[
                conv!("10*9/L", 1.0, IDENTITY),
                conv!("10^9/L", 1.0, "same unit, other spelling"),
                conv!("10*3/uL", 1.0, "10³/µL = 10⁹/L (SI prefixes)"),
                conv!("K/uL", 1.0, "10³/µL = 10⁹/L (SI prefixes)"),
            ],
        }
    }

    /// The conversion for a reported unit, matched case-insensitively with µ/μ/u folded.
    pub fn conversion_for(self, reported_unit: &str) -> Option<&'static UnitConversion> {
        let wanted = fold_unit(reported_unit);
        self.conversions()
            .iter()
            .find(|c| fold_unit(c.unit) == wanted)
    }

    /// Values outside [low, high] in the canonical unit are physiologically impossible and
    /// rejected as data errors. Potassium 1.0–12.0 mmol/L is the limit set by the input contract;
    /// the others are wide plausibility limits (common practice), far outside any survivable
    /// value, so that only data errors fall outside them.
    pub fn plausible_range(self) -> (f64, f64) {
        match self {
            Analyte::Potassium => (1.0, 12.0),
            Analyte::Creatinine => (0.05, 40.0),
            Analyte::Glucose => (5.0, 3000.0),
            Analyte::Bicarbonate => (1.0, 70.0),
            Analyte::Sodium => (80.0, 220.0),
            Analyte::Chloride => (40.0, 180.0),
            Analyte::UreaNitrogen => (0.5, 400.0),
            Analyte::CreatineKinase => (0.0, 1_000_000.0),
            Analyte::Urate => (0.05, 40.0),
            Analyte::Phosphate => (0.1, 30.0),
            Analyte::Calcium => (1.0, 25.0),
            Analyte::Albumin => (0.3, 8.0),
            Analyte::Ph => (6.3, 8.2),
            Analyte::Platelets => (0.0, 5000.0),
            Analyte::Leukocytes => (0.0, 2000.0),
        }
    }
}

/// Unit matching key: trimmed, lower case, micro sign and Greek mu written as `u`.
pub fn fold_unit(unit: &str) -> String {
    unit.trim()
        .chars()
        .map(|c| match c {
            'µ' | 'μ' => 'u',
            c => c.to_ascii_lowercase(),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_loinc_code_maps_to_exactly_one_analyte() {
        let mut seen = std::collections::HashSet::new();
        for a in Analyte::ALL {
            for code in a.loinc_codes() {
                assert!(seen.insert(*code), "{code} listed twice");
                assert_eq!(Analyte::from_loinc(code), Some(a));
                assert!(
                    crate::code::is_valid_loinc(code),
                    "{code} fails the LOINC check digit"
                );
            }
        }
    }

    #[test]
    fn canonical_unit_is_an_accepted_unit_with_factor_one() {
        for a in Analyte::ALL {
            let c = a
                .conversion_for(a.canonical_unit())
                .expect("canonical unit listed");
            assert_eq!(c.factor, 1.0, "{a:?}");
        }
    }

    #[test]
    fn unit_matching_ignores_case_and_micro_spelling() {
        let a = Analyte::Creatinine;
        for spelling in ["µmol/L", "μmol/L", "umol/L", "UMOL/L", " umol/l "] {
            assert!(a.conversion_for(spelling).is_some(), "{spelling}");
        }
        assert!(Analyte::Potassium.conversion_for("meq/l").is_some());
        assert!(Analyte::Potassium.conversion_for("mg/dL").is_none());
    }
}
