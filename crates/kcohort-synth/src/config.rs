//! What to generate: size, seed, period, time zone and every planted effect, with defaults.
//!
//! The defaults are chosen so that the bundled 3,000-patient demo shows a visible number of
//! hospital-acquired episodes every month; they are stronger than in most real hospitals
//! (said so beside each number).

use crate::error::SynthError;
use crate::network;
use crate::site_time::parse_year_month;
use serde::{Deserialize, Serialize};

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct SynthConfig {
    /// Number of patients (every one has at least one encounter).
    pub patients: u64,
    /// Seed of every random draw: same seed and settings, byte-identical files.
    pub seed: u64,
    /// IANA zone the sites' clocks run in; local times are written without offset.
    pub site_timezone: String,
    /// First simulated calendar month, `YYYY-MM`.
    pub first_month: String,
    /// Number of complete calendar months simulated.
    pub months: u32,
    /// Days of the following month simulated as well, so late results of the last month are in.
    pub tail_days: u32,

    /// Hazard of a true high-potassium episode per day at risk outside hospital for a patient
    /// with no risk factor (no factor active: every hazard ratio 1). Strong on purpose.
    pub community_hazard_per_day: f64,
    /// Same, per day at risk in hospital (from 49 h after admission).
    pub inpatient_hazard_per_day: f64,
    /// Multipliers of the hazard while a factor is present.
    pub hazard_ratios: HazardRatios,

    /// Unit whose hospital-acquired hazard is multiplied by `step_factor` from `step_month` on.
    pub step_unit: String,
    /// First month (`YYYY-MM`, local) of the step.
    pub step_month: String,
    /// Multiplier of the step; 1 turns the step off.
    pub step_factor: f64,

    /// Share of potassium specimens with a hemolysis index that are hemolysed (index ≥ 100).
    pub hemolysed_share: f64,
    /// Probability that a routine inpatient or emergency potassium draw is a spurious single
    /// high value (fist clenching, delayed processing) refuted by a normal repeat within 6 h.
    pub spurious_high_share: f64,
    /// Probability of glucose < 70 mg/dL within 6 h of insulin given for high potassium, among
    /// treatments with a glucose check in that window.
    pub hypoglycemia_after_insulin: f64,
    /// Probability of death within 30 days after a severe episode (peak ≥ 6.5 mmol/L) caused by
    /// it; deaths from other causes come on top.
    pub severe_death_30d: f64,
    /// Probability per written row of an extra, planted malformed row.
    pub defect_rate: f64,
}

/// Hazard ratios of the planted model: the hazard is the baseline times the product of the
/// ratios of every factor present at that moment.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct HazardRatios {
    /// Baseline eGFR < 45 mL/min/1.73 m² (CKD-EPI 2021 from the patient's usual creatinine).
    pub egfr_below_45: f64,
    pub diabetes: f64,
    /// Primary adrenal insufficiency or hypoaldosteronism (E27.1, E27.40).
    pub adrenal_insufficiency: f64,
    /// During an acute kidney injury in hospital.
    pub acute_kidney_injury: f64,
    /// ACE inhibitor, ARB or sacubitril/valsartan exposure.
    pub raas_inhibitor: f64,
    /// Calcium-channel blocker exposure (the active comparator of RAAS inhibitors).
    pub calcium_channel_blocker: f64,
    /// MRA exposure in patients with eGFR ≥ 45.
    pub mra: f64,
    /// MRA exposure in patients with eGFR < 45 (replaces `mra` for them).
    pub mra_egfr_below_45: f64,
    pub potassium_sparing_diuretic: f64,
    pub beta_blocker: f64,
    pub trimethoprim: f64,
    pub heparin: f64,
    pub nsaid: f64,
    pub potassium_supplement_oral: f64,
    pub potassium_iv: f64,
}

impl Default for HazardRatios {
    fn default() -> Self {
        HazardRatios {
            // Order of magnitude of published associations (from memory: CKD 2–3×, diabetes
            // 1.5×, RAAS inhibitors 1.5–2×, MRA 2× rising in CKD, trimethoprim 2–3×); exact
            // values are ours. CCB 1: no planted effect, so RAAS vs CCB initiators = 1.8.
            egfr_below_45: 2.5,
            diabetes: 1.5,
            adrenal_insufficiency: 3.0,
            acute_kidney_injury: 3.0,
            raas_inhibitor: 1.8,
            calcium_channel_blocker: 1.0,
            mra: 2.0,
            mra_egfr_below_45: 4.0,
            potassium_sparing_diuretic: 1.8,
            beta_blocker: 1.2,
            trimethoprim: 2.5,
            heparin: 1.4,
            nsaid: 1.5,
            potassium_supplement_oral: 1.8,
            potassium_iv: 3.0,
        }
    }
}

impl HazardRatios {
    /// (setting name, value) of every ratio, for validation and truth.json.
    pub fn named(&self) -> [(&'static str, f64); 15] {
        [
            ("egfr_below_45", self.egfr_below_45),
            ("diabetes", self.diabetes),
            ("adrenal_insufficiency", self.adrenal_insufficiency),
            ("acute_kidney_injury", self.acute_kidney_injury),
            ("raas_inhibitor", self.raas_inhibitor),
            ("calcium_channel_blocker", self.calcium_channel_blocker),
            ("mra", self.mra),
            ("mra_egfr_below_45", self.mra_egfr_below_45),
            (
                "potassium_sparing_diuretic",
                self.potassium_sparing_diuretic,
            ),
            ("beta_blocker", self.beta_blocker),
            ("trimethoprim", self.trimethoprim),
            ("heparin", self.heparin),
            ("nsaid", self.nsaid),
            ("potassium_supplement_oral", self.potassium_supplement_oral),
            ("potassium_iv", self.potassium_iv),
        ]
    }
}

impl Default for SynthConfig {
    fn default() -> Self {
        SynthConfig {
            patients: 3000,
            seed: 1,
            site_timezone: "Europe/Vienna".into(),
            first_month: "2024-01".into(),
            months: 24,
            tail_days: 4,
            // About 2% a year for a patient without risk factors, several times that with CKD
            // and RAAS/MRA exposure (published community incidence of K > 5.5 is a few percent
            // a year in CKD, from memory).
            community_hazard_per_day: 0.000_06,
            // 3% per day at risk for a patient without factors: very strong, so that the demo
            // has a visible monthly count of hospital-acquired episodes (real wards see roughly
            // 1–4% of admissions with hospital-acquired K > 5.5, from memory).
            inpatient_hazard_per_day: 0.03,
            hazard_ratios: HazardRatios::default(),
            step_unit: network::DEFAULT_STEP_UNIT.into(),
            step_month: "2025-04".into(),
            step_factor: 3.0,
            // 3.6% of ED potassium results excluded for hemolysis in one series (domain
            // reference §1.3); 3% across all settings.
            hemolysed_share: 0.03,
            // Common practice guess: a few in a thousand draws are falsely high without visible
            // hemolysis (fist clenching, delayed processing, EDTA carry-over).
            spurious_high_share: 0.004,
            // Published rates 6–21% (< 70 mg/dL, domain reference §3); 10% planted.
            hypoglycemia_after_insulin: 0.10,
            // From memory: 30-day mortality after K ≥ 6.5 is of the order of 10–30%.
            severe_death_30d: 0.20,
            // 0.05% of rows.
            defect_rate: 0.0005,
        }
    }
}

impl SynthConfig {
    /// Checks every setting; the error names the setting and what is accepted.
    pub fn validate(&self) -> Result<(), SynthError> {
        let bad = |field: &'static str, expected: &str, found: String| SynthError::InvalidConfig {
            field,
            expected: expected.to_string(),
            found,
        };
        if self.patients == 0 || self.patients > 50_000_000 {
            return Err(bad(
                "patients",
                "a number of patients from 1 to 50,000,000",
                self.patients.to_string(),
            ));
        }
        if parse_year_month(&self.first_month).is_none() {
            return Err(bad(
                "first_month",
                "a month like 2024-01",
                self.first_month.clone(),
            ));
        }
        if !(1..=240).contains(&self.months) {
            return Err(bad("months", "1 to 240 months", self.months.to_string()));
        }
        if self.tail_days > 27 {
            return Err(bad("tail_days", "0 to 27 days", self.tail_days.to_string()));
        }
        for (field, value) in [
            ("community_hazard_per_day", self.community_hazard_per_day),
            ("inpatient_hazard_per_day", self.inpatient_hazard_per_day),
        ] {
            if !(value.is_finite() && (0.0..0.5).contains(&value)) {
                return Err(bad(
                    field,
                    "a hazard per day from 0 to 0.5",
                    value.to_string(),
                ));
            }
        }
        for (name, value) in self.hazard_ratios.named() {
            if !(value.is_finite() && value > 0.0 && value <= 50.0) {
                return Err(SynthError::InvalidConfig {
                    field: "hazard_ratios",
                    expected: format!("`{name}` a ratio above 0 and at most 50"),
                    found: value.to_string(),
                });
            }
        }
        if !(self.step_factor.is_finite() && self.step_factor > 0.0 && self.step_factor <= 50.0) {
            return Err(bad(
                "step_factor",
                "a multiplier above 0 and at most 50 (1 = no step)",
                self.step_factor.to_string(),
            ));
        }
        if network::unit_id(&self.step_unit).is_none() {
            let names: Vec<&str> = network::UNITS.iter().map(|u| u.name).collect();
            return Err(SynthError::InvalidConfig {
                field: "step_unit",
                expected: format!("one of the network's units: {}", names.join("; ")),
                found: self.step_unit.clone(),
            });
        }
        if parse_year_month(&self.step_month).is_none() {
            return Err(bad(
                "step_month",
                "a month like 2025-04",
                self.step_month.clone(),
            ));
        }
        for (field, value, high) in [
            ("hemolysed_share", self.hemolysed_share, 0.5),
            ("spurious_high_share", self.spurious_high_share, 0.05),
            (
                "hypoglycemia_after_insulin",
                self.hypoglycemia_after_insulin,
                1.0,
            ),
            ("severe_death_30d", self.severe_death_30d, 1.0),
            ("defect_rate", self.defect_rate, 0.05),
        ] {
            if !(value.is_finite() && (0.0..=high).contains(&value)) {
                return Err(SynthError::InvalidConfig {
                    field,
                    expected: format!("a probability from 0 to {high}"),
                    found: value.to_string(),
                });
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_are_valid() {
        SynthConfig::default().validate().unwrap();
    }

    #[test]
    fn each_bad_setting_is_named() {
        type Change = Box<dyn Fn(&mut SynthConfig)>;
        let cases: Vec<(&str, Change)> = vec![
            ("patients", Box::new(|c| c.patients = 0)),
            ("first_month", Box::new(|c| c.first_month = "2024-1".into())),
            ("months", Box::new(|c| c.months = 0)),
            ("step_unit", Box::new(|c| c.step_unit = "Ward 99".into())),
            ("step_month", Box::new(|c| c.step_month = "April".into())),
            ("step_factor", Box::new(|c| c.step_factor = -1.0)),
            ("hemolysed_share", Box::new(|c| c.hemolysed_share = 1.5)),
            ("hazard_ratios", Box::new(|c| c.hazard_ratios.mra = 0.0)),
            (
                "inpatient_hazard_per_day",
                Box::new(|c| c.inpatient_hazard_per_day = f64::NAN),
            ),
        ];
        for (field, change) in cases {
            let mut c = SynthConfig::default();
            change(&mut c);
            let err = c.validate().unwrap_err().to_string();
            assert!(err.contains(field), "{field}: {err}");
        }
    }

    #[test]
    fn unknown_fields_are_refused_when_read_from_json() {
        let err = serde_json::from_str::<SynthConfig>(r#"{"patient": 5}"#).unwrap_err();
        assert!(err.to_string().contains("patient"), "{err}");
        let c: SynthConfig = serde_json::from_str(r#"{"patients": 5}"#).unwrap();
        assert_eq!(c.patients, 5);
        assert_eq!(c.seed, SynthConfig::default().seed);
    }
}
