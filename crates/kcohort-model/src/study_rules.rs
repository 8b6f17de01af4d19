//! The study parameters of the definitions that give episodes their context: exposure eras
//! (`queries/exposure_eras.sql`), lab-derived conditions (`kidney_function.sql`,
//! `lab_conditions.sql`), cause attribution (`episode_causes.sql`) and treatments and outcomes
//! (`episode_treatments.sql`, `episode_outcomes.sql`). Part of [`crate::study::Study`]; the
//! defaults and their sources are in the comments of the default study file.

use crate::study::Checker;
use serde::{Deserialize, Serialize};

/// How medication events become exposure eras.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Exposure {
    /// A dispensing without days_supply covers this many days.
    pub dispense_default_days: f64,
    /// An administration without end_at covers this many hours (a class may set its own).
    pub administer_default_hours: f64,
    /// An order without end_at covers this many hours.
    pub order_default_hours: f64,
    /// After a dispensing, a gap of at most this many days keeps the era going.
    pub dispense_grace_days: f64,
    /// After an administration or an order, a gap of at most this many hours keeps the era going.
    pub administer_grace_hours: f64,
    /// New user: no exposure to the class in this many days before the era, and the patient
    /// observed at least that long before it.
    pub washout_days: f64,
}

impl Default for Exposure {
    fn default() -> Self {
        Exposure {
            dispense_default_days: 30.0,
            administer_default_hours: 24.0,
            order_default_hours: 24.0,
            dispense_grace_days: 30.0,
            administer_grace_hours: 24.0,
            washout_days: 365.0,
        }
    }
}

/// Lab-derived conditions: thresholds in the store's canonical units (mg/dL for creatinine,
/// glucose, urea nitrogen, urate, phosphate, calcium; mmol/L for electrolytes; U/L for CK).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Conditions {
    /// AKI: a rise of at least this (mg/dL) over the lowest creatinine in the prior window.
    pub aki_absolute_rise_mg_dl: f64,
    /// The window of the absolute rise (hours before the result).
    pub aki_absolute_window_hours: f64,
    /// AKI: creatinine at least this many times the baseline.
    pub aki_ratio: f64,
    /// Baseline of the ratio: lowest creatinine in this many days before the result.
    pub aki_baseline_days: f64,
    /// Creatinine at or above this (mg/dL) in an AKI is stage 3.
    pub aki_stage3_creatinine_mg_dl: f64,
    /// Glucose strictly above this (mg/dL) is hyperglycemia.
    pub hyperglycemia_above_mg_dl: f64,
    /// Bicarbonate strictly below this (mmol/L) is metabolic acidosis.
    pub acidosis_bicarbonate_below: f64,
    /// Calculated osmolality strictly above this (mOsm/kg) is hyperosmolality.
    pub hyperosmolality_above: f64,
    /// Upper limit of normal of creatine kinase (U/L).
    pub ck_upper_normal_limit: f64,
    /// Rhabdomyolysis: CK at or above this many times its upper limit of normal.
    pub rhabdomyolysis_ck_multiple: f64,
    /// Laboratory tumour lysis: urate at or above this (mg/dL).
    pub tls_urate_mg_dl: f64,
    /// Laboratory tumour lysis: potassium at or above this (mmol/L).
    pub tls_potassium: f64,
    /// Laboratory tumour lysis: phosphate at or above this (mg/dL).
    pub tls_phosphate_mg_dl: f64,
    /// Laboratory tumour lysis: corrected calcium at or below this (mg/dL).
    pub tls_calcium_mg_dl: f64,
    /// Laboratory tumour lysis: at least two abnormalities within this many hours.
    pub tls_window_hours: f64,
}

impl Default for Conditions {
    fn default() -> Self {
        Conditions {
            aki_absolute_rise_mg_dl: 0.3,
            aki_absolute_window_hours: 48.0,
            aki_ratio: 1.5,
            aki_baseline_days: 7.0,
            aki_stage3_creatinine_mg_dl: 4.0,
            hyperglycemia_above_mg_dl: 250.0,
            acidosis_bicarbonate_below: 22.0,
            hyperosmolality_above: 320.0,
            ck_upper_normal_limit: 200.0,
            rhabdomyolysis_ck_multiple: 5.0,
            tls_urate_mg_dl: 8.0,
            tls_potassium: 6.0,
            tls_phosphate_mg_dl: 4.5,
            tls_calcium_mg_dl: 7.0,
            tls_window_hours: 24.0,
        }
    }
}

/// Which context around an episode's onset counts as a cause.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Attribution {
    /// A drug class counts when an era is active at onset or ended at most this many hours
    /// before it (a class may set its own `lookback_hours`).
    pub drug_lookback_hours: f64,
    /// AKI counts when an AKI result lies from this many hours before onset ...
    pub aki_before_hours: f64,
    /// ... to this many hours after it.
    pub aki_after_hours: f64,
    /// Hyperglycemia, acidosis, hyperosmolality, rhabdomyolysis and tumour lysis count within
    /// this many hours before or after onset.
    pub lab_window_hours: f64,
    /// Baseline eGFR: median of the eGFRs in this many days up to onset.
    pub baseline_egfr_days: f64,
    /// Baseline eGFR strictly below this (mL/min/1.73 m²) is a cause (45: KDIGO G3b or worse).
    pub ckd_egfr_below: f64,
    /// ICD-10 codes or prefixes of adrenal insufficiency and hypoaldosteronism.
    pub adrenal_icd10: Vec<String>,
}

impl Default for Attribution {
    fn default() -> Self {
        Attribution {
            drug_lookback_hours: 168.0,
            aki_before_hours: 168.0,
            aki_after_hours: 24.0,
            lab_window_hours: 24.0,
            baseline_egfr_days: 365.0,
            ckd_egfr_below: 45.0,
            adrenal_icd10: ["E27.1", "E27.2", "E27.3", "E27.4", "N25.8"]
                .iter()
                .map(|c| c.to_string())
                .collect(),
        }
    }
}

/// Treatments and outcomes after an episode's onset.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Outcomes {
    /// Potassium-lowering administrations from onset to this many hours after it.
    pub treatment_window_hours: f64,
    /// Glucose strictly below this (mg/dL) after insulin is hypoglycemia.
    pub hypoglycemia_below_mg_dl: f64,
    /// Hypoglycemia counts up to this many hours after an insulin administration.
    pub hypoglycemia_window_hours: f64,
    /// Death within this many days of onset.
    pub death_within_days: f64,
    /// The drug-event listing's dechallenge looks this many days after onset.
    pub dechallenge_days: f64,
}

impl Default for Outcomes {
    fn default() -> Self {
        Outcomes {
            treatment_window_hours: 12.0,
            hypoglycemia_below_mg_dl: 70.0,
            hypoglycemia_window_hours: 6.0,
            death_within_days: 30.0,
            dechallenge_days: 7.0,
        }
    }
}

/// New-user cohorts (`queries/new_user_cohorts.sql`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Cohort {
    /// Intention-to-treat follow-up: this many days from entry.
    pub horizon_days: f64,
    /// Baseline covariates come from this many days before entry.
    pub baseline_days: f64,
    /// Recent AKI: an AKI result this many days before entry.
    pub recent_aki_days: f64,
}

impl Default for Cohort {
    fn default() -> Self {
        Cohort {
            horizon_days: 90.0,
            baseline_days: 365.0,
            recent_aki_days: 30.0,
        }
    }
}

pub(crate) fn validate_cohort(c: &mut Checker, cohort: &Cohort) {
    for (key, value) in [
        ("cohort.horizon_days", cohort.horizon_days),
        ("cohort.baseline_days", cohort.baseline_days),
        ("cohort.recent_aki_days", cohort.recent_aki_days),
    ] {
        c.range(key, value, 0.0, true, 3650.0);
    }
}

/// Longest window of these rules, in hours (ten years).
const LONGEST_HOURS: f64 = 87_600.0;

pub(crate) fn validate(
    c: &mut Checker,
    exposure: &Exposure,
    conditions: &Conditions,
    attribution: &Attribution,
    outcomes: &Outcomes,
) {
    let days = LONGEST_HOURS / 24.0;
    let x = exposure;
    for (key, value, high) in [
        (
            "exposure.dispense_default_days",
            x.dispense_default_days,
            days,
        ),
        (
            "exposure.administer_default_hours",
            x.administer_default_hours,
            LONGEST_HOURS,
        ),
        (
            "exposure.order_default_hours",
            x.order_default_hours,
            LONGEST_HOURS,
        ),
        ("exposure.dispense_grace_days", x.dispense_grace_days, days),
        (
            "exposure.administer_grace_hours",
            x.administer_grace_hours,
            LONGEST_HOURS,
        ),
        ("exposure.washout_days", x.washout_days, days),
    ] {
        c.range(key, value, 0.0, false, high);
    }
    let k = conditions;
    for (key, value, low_open, high) in [
        (
            "conditions.aki_absolute_rise_mg_dl",
            k.aki_absolute_rise_mg_dl,
            true,
            20.0,
        ),
        (
            "conditions.aki_absolute_window_hours",
            k.aki_absolute_window_hours,
            true,
            8760.0,
        ),
        ("conditions.aki_ratio", k.aki_ratio, true, 20.0),
        (
            "conditions.aki_baseline_days",
            k.aki_baseline_days,
            true,
            365.0,
        ),
        (
            "conditions.aki_stage3_creatinine_mg_dl",
            k.aki_stage3_creatinine_mg_dl,
            true,
            30.0,
        ),
        (
            "conditions.hyperglycemia_above_mg_dl",
            k.hyperglycemia_above_mg_dl,
            true,
            2000.0,
        ),
        (
            "conditions.acidosis_bicarbonate_below",
            k.acidosis_bicarbonate_below,
            true,
            60.0,
        ),
        (
            "conditions.hyperosmolality_above",
            k.hyperosmolality_above,
            true,
            500.0,
        ),
        (
            "conditions.ck_upper_normal_limit",
            k.ck_upper_normal_limit,
            true,
            10_000.0,
        ),
        (
            "conditions.rhabdomyolysis_ck_multiple",
            k.rhabdomyolysis_ck_multiple,
            true,
            1000.0,
        ),
        ("conditions.tls_urate_mg_dl", k.tls_urate_mg_dl, true, 50.0),
        ("conditions.tls_potassium", k.tls_potassium, true, 12.0),
        (
            "conditions.tls_phosphate_mg_dl",
            k.tls_phosphate_mg_dl,
            true,
            50.0,
        ),
        (
            "conditions.tls_calcium_mg_dl",
            k.tls_calcium_mg_dl,
            true,
            20.0,
        ),
        (
            "conditions.tls_window_hours",
            k.tls_window_hours,
            true,
            8760.0,
        ),
    ] {
        c.range(key, value, 0.0, low_open, high);
    }
    let a = attribution;
    for (key, value, high) in [
        (
            "attribution.drug_lookback_hours",
            a.drug_lookback_hours,
            LONGEST_HOURS,
        ),
        (
            "attribution.aki_before_hours",
            a.aki_before_hours,
            LONGEST_HOURS,
        ),
        (
            "attribution.aki_after_hours",
            a.aki_after_hours,
            LONGEST_HOURS,
        ),
        (
            "attribution.lab_window_hours",
            a.lab_window_hours,
            LONGEST_HOURS,
        ),
        ("attribution.baseline_egfr_days", a.baseline_egfr_days, days),
        ("attribution.ckd_egfr_below", a.ckd_egfr_below, 200.0),
    ] {
        c.range(key, value, 0.0, false, high);
    }
    c.codes(
        "attribution.adrenal_icd10",
        &a.adrenal_icd10,
        crate::code::is_valid_icd10,
        "ICD-10 code or prefix (E27, E27.1, E27.40)",
    );
    let o = outcomes;
    for (key, value, high) in [
        (
            "outcomes.treatment_window_hours",
            o.treatment_window_hours,
            LONGEST_HOURS,
        ),
        (
            "outcomes.hypoglycemia_below_mg_dl",
            o.hypoglycemia_below_mg_dl,
            200.0,
        ),
        (
            "outcomes.hypoglycemia_window_hours",
            o.hypoglycemia_window_hours,
            LONGEST_HOURS,
        ),
        ("outcomes.death_within_days", o.death_within_days, days),
        ("outcomes.dechallenge_days", o.dechallenge_days, days),
    ] {
        c.range(key, value, 0.0, true, high);
    }
}
