//! The study definition: every threshold, window and code set the SQL definitions use, read from
//! a TOML study file (`kcohort init-study` writes [`DEFAULT_STUDY_TOML`], the defaults with a
//! comment on every key). A key left out of a file takes its default; an unknown key is an error
//! (so a typo never silently falls back to a default); [`Study::validate`] names the key and the
//! allowed range of every value out of range.
//!
//! Sources of the defaults: issue 3 of the project (the default episode definition) and
//! `DOMAIN.md` §1–2 (thresholds, LOINC codes, ATC classes, each tagged there with its source).

use crate::analyte::Analyte;
use crate::code::{is_valid_atc, is_valid_loinc};
pub use crate::study_rules::{Attribution, Cohort, Conditions, Exposure, Outcomes};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::fmt;

/// The whole study definition.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Study {
    pub site: Site,
    pub potassium: Potassium,
    pub episode: EpisodeParameters,
    /// Potassium-lowering treatment classes; their union is the treatment set of the
    /// pseudohyperkalemia rule.
    pub potassium_lowering: BTreeMap<String, CodeSet>,
    /// Drug classes that can raise potassium (exposure eras, cause attribution).
    pub drug_classes: BTreeMap<String, DrugClass>,
    /// LOINC codes per co-analyte (`creatinine`, `glucose`, ...) for the lab-derived
    /// conditions; an analyte left out takes every code kcohort interprets for it.
    pub lab_loinc: BTreeMap<String, Vec<String>>,
    pub exposure: Exposure,
    pub conditions: Conditions,
    pub attribution: Attribution,
    pub outcomes: Outcomes,
    pub cohort: Cohort,
}

/// Where the data come from.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Site {
    /// Site time zone (IANA name or fixed offset); empty = the one the store was ingested with.
    /// When given it must equal the store's.
    pub timezone: String,
}

/// Which results are potassium results, and which are excluded.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Potassium {
    /// LOINC codes of the potassium results used.
    pub loinc: Vec<String>,
    /// Results with hemolysis_index at or above this are excluded from every episode rule.
    pub hemolysis_cutoff: f64,
}

/// The parameters of the default high-potassium episode definition (`queries/episodes.sql`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct EpisodeParameters {
    /// A value strictly above this is high (mmol/L).
    pub high_above: f64,
    /// A value at or below this is normal (mmol/L) and closes an open episode.
    pub normal_at_or_below: f64,
    /// An open episode closes unresolved when the next result comes more than this after its
    /// latest result.
    pub max_gap_hours: f64,
    /// A high value strictly less than this after the end of the preceding resolved episode
    /// re-opens it.
    pub rebound_hours: f64,
    /// A single-high episode resolved within this (inclusive) of onset, with no
    /// potassium-lowering treatment, is flagged unconfirmed (possible pseudohyperkalemia).
    pub spurious_repeat_hours: f64,
    /// Upper limit of normal used for CTCAE v5.0 grade 1 (mmol/L).
    pub upper_normal_limit: f64,
    /// Onset at or after this long after an inpatient admission is hospital-acquired.
    pub hospital_acquired_after_hours: f64,
    /// Peak from this (inclusive) up to `severity_severe_from` is moderate; below it, mild.
    pub severity_moderate_from: f64,
    /// Peak from this (inclusive) is severe.
    pub severity_severe_from: f64,
}

/// A named set of ATC codes or prefixes (a code matches when it starts with one of them).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CodeSet {
    pub label: String,
    pub atc: Vec<String>,
}

/// The co-analytes the lab-derived definitions read, with a LOINC set each in `[lab_loinc]`.
pub const LAB_ANALYTES: &[Analyte] = &[
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
];

/// A drug class that can raise potassium: its ATC codes or prefixes, and the windows of its
/// cause attribution where they differ from the study-wide ones.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DrugClass {
    pub label: String,
    pub atc: Vec<String>,
    /// Counts as a cause when an era ended at most this many hours before onset (default:
    /// `attribution.drug_lookback_hours`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lookback_hours: Option<f64>,
    /// Counts only when the era started at most this many days before onset.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub started_within_days: Option<f64>,
    /// Counts only when the era had lasted at least this many days at onset.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub min_exposure_days: Option<f64>,
    /// An administration without end_at covers this many hours (default:
    /// `exposure.administer_default_hours`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub administer_hours: Option<f64>,
    /// False for a comparator class: it has exposure eras and new-user cohorts but is never a
    /// cause of an episode. Default true.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cause: Option<bool>,
}

impl DrugClass {
    fn new(label: &str, atc: &[&str]) -> DrugClass {
        DrugClass {
            label: label.into(),
            atc: atc.iter().map(|c| c.to_string()).collect(),
            lookback_hours: None,
            started_within_days: None,
            min_exposure_days: None,
            administer_hours: None,
            cause: None,
        }
    }

    fn comparator_only(mut self) -> DrugClass {
        self.cause = Some(false);
        self
    }

    /// Whether the class counts in cause attribution.
    pub fn is_cause(&self) -> bool {
        self.cause.unwrap_or(true)
    }

    fn started_within(mut self, days: f64) -> DrugClass {
        self.started_within_days = Some(days);
        self
    }

    fn min_exposure(mut self, days: f64) -> DrugClass {
        self.min_exposure_days = Some(days);
        self
    }

    fn lookback(mut self, hours: f64) -> DrugClass {
        self.lookback_hours = Some(hours);
        self
    }
}

impl Default for Potassium {
    fn default() -> Self {
        Potassium {
            loinc: vec!["2823-3".into(), "6298-4".into()],
            hemolysis_cutoff: 100.0,
        }
    }
}

impl Default for EpisodeParameters {
    fn default() -> Self {
        EpisodeParameters {
            high_above: 5.5,
            normal_at_or_below: 5.0,
            max_gap_hours: 168.0,
            rebound_hours: 24.0,
            spurious_repeat_hours: 6.0,
            upper_normal_limit: 5.0,
            hospital_acquired_after_hours: 48.0,
            severity_moderate_from: 6.0,
            severity_severe_from: 6.5,
        }
    }
}

fn code_set(label: &str, atc: &[&str]) -> CodeSet {
    CodeSet {
        label: label.into(),
        atc: atc.iter().map(|c| c.to_string()).collect(),
    }
}

/// Potassium-lowering treatment classes (DOMAIN.md §2.2; the set of issue 3 §3.7).
pub fn default_potassium_lowering() -> BTreeMap<String, CodeSet> {
    [
        ("calcium", code_set("IV calcium", &["A12AA03", "A12AA07"])),
        ("insulin", code_set("short-acting insulin", &["A10AB"])),
        ("beta2_agonist", code_set("salbutamol", &["R03AC02"])),
        ("bicarbonate", code_set("sodium bicarbonate", &["B05XA02"])),
        ("binder", code_set("potassium binders", &["V03AE"])),
        ("loop_diuretic", code_set("loop diuretics", &["C03CA"])),
    ]
    .into_iter()
    .map(|(k, v)| (k.to_string(), v))
    .collect()
}

/// Drug classes that can raise potassium (DOMAIN.md §2.1).
pub fn default_drug_classes() -> BTreeMap<String, DrugClass> {
    [
        (
            "ace_inhibitor",
            DrugClass::new("ACE inhibitors", &["C09A", "C09B"]),
        ),
        (
            "arb",
            DrugClass::new("angiotensin receptor blockers", &["C09C", "C09D"]),
        ),
        (
            "renin_inhibitor",
            DrugClass::new(
                "direct renin inhibitor",
                &["C09XA02", "C09XA52", "C09XA53", "C09XA54"],
            ),
        ),
        (
            "mra",
            DrugClass::new("mineralocorticoid receptor antagonists", &["C03DA"]),
        ),
        (
            "potassium_sparing",
            DrugClass::new("ENaC blockers", &["C03DB", "C03EA", "C03EB"]),
        ),
        ("beta_blocker", DrugClass::new("beta blockers", &["C07"])),
        (
            "trimethoprim",
            DrugClass::new("trimethoprim", &["J01EA01", "J01EE01"]).started_within(14.0),
        ),
        (
            "heparin",
            DrugClass::new("heparins", &["B01AB"]).min_exposure(3.0),
        ),
        (
            "calcineurin_inhibitor",
            DrugClass::new("calcineurin inhibitors", &["L04AD01", "L04AD02"]),
        ),
        ("nsaid", DrugClass::new("NSAIDs", &["M01A"])),
        (
            "digoxin",
            DrugClass::new("digitalis glycosides", &["C01AA05", "C01AA04"]),
        ),
        (
            "potassium",
            DrugClass::new(
                "potassium supplements and IV potassium",
                &["A12BA", "B05XA01", "B05XA06", "B05XA15", "B05XA17"],
            )
            .lookback(48.0),
        ),
        (
            "succinylcholine",
            DrugClass::new("suxamethonium", &["M03AB01"]).lookback(1.0),
        ),
        ("pentamidine", DrugClass::new("pentamidine", &["P01CX01"])),
        ("drospirenone", DrugClass::new("drospirenone", &["G03AA12"])),
        (
            "calcium_channel_blocker",
            DrugClass::new("dihydropyridine calcium-channel blockers", &["C08CA"])
                .comparator_only(),
        ),
    ]
    .into_iter()
    .map(|(k, v)| (k.to_string(), v))
    .collect()
}

impl Default for Study {
    fn default() -> Self {
        Study {
            site: Site::default(),
            potassium: Potassium::default(),
            episode: EpisodeParameters::default(),
            potassium_lowering: default_potassium_lowering(),
            drug_classes: default_drug_classes(),
            lab_loinc: LAB_ANALYTES
                .iter()
                .map(|a| {
                    let codes = a.loinc_codes().iter().map(|c| c.to_string()).collect();
                    (a.as_str().to_string(), codes)
                })
                .collect(),
            exposure: Exposure::default(),
            conditions: Conditions::default(),
            attribution: Attribution::default(),
            outcomes: Outcomes::default(),
            cohort: Cohort::default(),
        }
    }
}

/// The default study file, as `kcohort init-study` writes it. Parsing it gives
/// `Study::default()` (checked by a test).
pub const DEFAULT_STUDY_TOML: &str = r#"# kcohort study definition.
#
# Every key has a default; a key left out takes it. Unknown keys are errors. Times are elapsed
# hours (a window across a daylight-saving change is that many real hours); potassium values
# are mmol/L (mEq/L is the same for potassium).

[site]
# Site time zone (IANA name such as "Europe/Berlin", or a fixed offset such as "+01:00").
# Empty: the time zone the store was ingested with. When given, it must equal the store's.
timezone = ""

[potassium]
# LOINC codes of the potassium results used: 2823-3 serum/plasma, 6298-4 blood.
loinc = ["2823-3", "6298-4"]
# Results with hemolysis_index at or above this are excluded from every episode rule
# (counted in the potassium_quality table). Allowed: above 0, at most 10000.
hemolysis_cutoff = 100

[episode]
# A value strictly above this is high (mmol/L). Allowed: 1.0 to 12.0.
high_above = 5.5
# A value at or below this is normal and closes an open episode. Allowed: 1.0 to high_above.
normal_at_or_below = 5.0
# An open episode closes unresolved when the next result comes more than this many hours
# after its latest result. Allowed: above 0, at most 87600.
max_gap_hours = 168
# A high value strictly less than this many hours after the end of the preceding resolved
# episode re-opens that episode (a rebound). Allowed: 0 (no rebounds) to 8760.
rebound_hours = 24
# An episode with one high value that resolves within this many hours of onset (inclusive)
# with no potassium-lowering treatment in between is unconfirmed (possible
# pseudohyperkalemia) and left out of primary counts. Allowed: 0 to 8760.
spurious_repeat_hours = 6
# Upper limit of normal for the CTCAE v5.0 grade of the peak (grade 1: above it up to 5.5).
# Allowed: 1.0 to 12.0.
upper_normal_limit = 5.0
# Onset at least this many hours after an inpatient admission is hospital-acquired; earlier
# is present on admission. Allowed: 0 to 8760.
hospital_acquired_after_hours = 48
# Severity of the peak: mild below this, moderate from it (inclusive). Allowed: 1.0 to 12.0.
severity_moderate_from = 6.0
# Severe from this (inclusive). Allowed: above severity_moderate_from, at most 12.0.
severity_severe_from = 6.5

# Potassium-lowering treatments (DOMAIN.md section 2.2). A medication event matches a class
# when its ATC code starts with one of the codes listed. The union of all classes is the
# treatment set of the pseudohyperkalemia rule. Listing any class here replaces the whole
# default list.

[potassium_lowering.calcium]
# Calcium gluconate, calcium chloride.
label = "IV calcium"
atc = ["A12AA03", "A12AA07"]

[potassium_lowering.insulin]
# Fast-acting insulins.
label = "short-acting insulin"
atc = ["A10AB"]

[potassium_lowering.beta2_agonist]
# Inhaled salbutamol.
label = "salbutamol"
atc = ["R03AC02"]

[potassium_lowering.bicarbonate]
# Sodium bicarbonate IV additive.
label = "sodium bicarbonate"
atc = ["B05XA02"]

[potassium_lowering.binder]
# Polystyrene sulfonate, patiromer, sodium zirconium cyclosilicate.
label = "potassium binders"
atc = ["V03AE"]

[potassium_lowering.loop_diuretic]
# Furosemide, bumetanide, torasemide.
label = "loop diuretics"
atc = ["C03CA"]

# Drug classes that can raise potassium (DOMAIN.md section 2.1), for cause attribution.
# Listing any class here replaces the whole default list.

[drug_classes.ace_inhibitor]
# Plain ACE inhibitors (C09A) and combinations (C09B).
label = "ACE inhibitors"
atc = ["C09A", "C09B"]

[drug_classes.arb]
# Plain ARBs (C09C) and combinations (C09D, includes sacubitril/valsartan C09DX04).
label = "angiotensin receptor blockers"
atc = ["C09C", "C09D"]

[drug_classes.renin_inhibitor]
# Aliskiren and its combinations.
label = "direct renin inhibitor"
atc = ["C09XA02", "C09XA52", "C09XA53", "C09XA54"]

[drug_classes.mra]
# Spironolactone, potassium canrenoate, canrenone, eplerenone, finerenone.
label = "mineralocorticoid receptor antagonists"
atc = ["C03DA"]

[drug_classes.potassium_sparing]
# Amiloride, triamterene, and thiazide or loop diuretics combined with them.
label = "ENaC blockers"
atc = ["C03DB", "C03EA", "C03EB"]

[drug_classes.beta_blocker]
# All beta blockers.
label = "beta blockers"
atc = ["C07"]

[drug_classes.trimethoprim]
# Trimethoprim and co-trimoxazole.
label = "trimethoprim"
atc = ["J01EA01", "J01EE01"]
# Its effect starts within days of the first dose: counts only when the era started at most 14
# days before onset (DOMAIN.md section 2.1, from memory).
started_within_days = 14

[drug_classes.heparin]
# Heparin and low-molecular-weight heparins.
label = "heparins"
atc = ["B01AB"]
# They suppress aldosterone after some days: count only after 3 days of continuous exposure
# (DOMAIN.md section 2.1, from memory).
min_exposure_days = 3

[drug_classes.calcineurin_inhibitor]
# Ciclosporin, tacrolimus (systemic; topical tacrolimus D11AH01 is not included).
label = "calcineurin inhibitors"
atc = ["L04AD01", "L04AD02"]

[drug_classes.nsaid]
# Non-steroidal anti-inflammatory drugs (low-dose aspirin B01AC06 is not M01A).
label = "NSAIDs"
atc = ["M01A"]

[drug_classes.digoxin]
# Digoxin, digitoxin.
label = "digitalis glycosides"
atc = ["C01AA05", "C01AA04"]

[drug_classes.potassium]
# Oral potassium (A12BA) and IV potassium additives (chloride, phosphate, lactate, acetate).
# Electrolyte solutions B05BB are left out: most carry little potassium.
label = "potassium supplements and IV potassium"
atc = ["A12BA", "B05XA01", "B05XA06", "B05XA15", "B05XA17"]
# Iatrogenic: given within 48 h before onset (common practice).
lookback_hours = 48

[drug_classes.succinylcholine]
# Suxamethonium.
label = "suxamethonium"
atc = ["M03AB01"]
# Peri-anaesthetic: given within 1 h before onset (DOMAIN.md section 2.1, from memory).
lookback_hours = 1

[drug_classes.pentamidine]
# Pentamidine.
label = "pentamidine"
atc = ["P01CX01"]

[drug_classes.drospirenone]
# Drospirenone with ethinylestradiol.
label = "drospirenone"
atc = ["G03AA12"]

[drug_classes.calcium_channel_blocker]
# Dihydropyridine calcium-channel blockers (amlodipine C08CA01, ...): the usual active
# comparator of RAAS-inhibitor initiators (DOMAIN.md section 4).
label = "dihydropyridine calcium-channel blockers"
atc = ["C08CA"]
# A comparator class: exposure eras and new-user cohorts, never a cause of an episode.
cause = false

[lab_loinc]
# LOINC codes of the co-analytes the lab-derived conditions read. An analyte left out takes every
# code kcohort converts for it (docs/input-contract.md); a code listed must be one of those.
creatinine = ["2160-0", "14682-9", "38483-4", "59826-8"]
# Glucose: serum/plasma mass and moles, blood mass and moles.
glucose = ["2345-7", "2339-0", "15074-8", "14749-6"]
# Bicarbonate and total CO2.
bicarbonate = ["1963-8", "2028-9"]
# Sodium: serum/plasma, blood, arterial, venous.
sodium = ["2951-2", "2947-0", "32717-1", "39791-9"]
# Chloride: serum/plasma, blood.
chloride = ["2075-0", "2069-3"]
# Urea nitrogen: serum/plasma, blood.
urea_nitrogen = ["3094-0", "6299-2"]
# Creatine kinase.
creatine_kinase = ["2157-6"]
# Urate: mass and moles.
urate = ["3084-1", "14933-6"]
# Phosphate: mass and moles.
phosphate = ["2777-1", "14879-1"]
# Calcium: mass and moles.
calcium = ["17861-6", "2000-8"]
# Albumin (for the corrected calcium of tumour lysis).
albumin = ["1751-7"]

[exposure]
# How medication events become exposure eras (queries/exposure_eras.sql). Every event of a
# class covers an interval: a dispensing start_at + days_supply days, an administration or an
# order start_at to end_at. Intervals of one class merge into one era across gaps up to the
# grace period (the permissible-gap method, common practice; DOMAIN.md section 4).
# A dispensing without days_supply covers this many days. Allowed: 0 to 3650.
dispense_default_days = 30
# An administration without end_at covers this many hours (a class may set administer_hours).
# Allowed: 0 to 87600.
administer_default_hours = 24
# An order without end_at covers this many hours. Allowed: 0 to 87600.
order_default_hours = 24
# Gap after a dispensing that still continues the era, in days. Allowed: 0 to 3650.
dispense_grace_days = 30
# Gap after an administration or an order that still continues the era, in hours.
# Allowed: 0 to 87600.
administer_grace_hours = 24
# New user: no era of the class ended within this many days before the era starts, and the
# patient was observed (an encounter or a lab result) at least this long before it.
# Allowed: 0 to 3650.
washout_days = 365

[conditions]
# Lab-derived conditions (queries/kidney_function.sql, queries/lab_conditions.sql), in the
# store's canonical units: mg/dL for creatinine, glucose, urea nitrogen, urate, phosphate and
# calcium; mmol/L for potassium, sodium, chloride and bicarbonate; U/L for creatine kinase.
# KDIGO 2012 AKI by creatinine: a rise of at least this over the lowest creatinine in the
# window below (mg/dL). Allowed: above 0, at most 20.
aki_absolute_rise_mg_dl = 0.3
# The window of that rise, hours before the result. Allowed: above 0, at most 8760.
aki_absolute_window_hours = 48
# KDIGO 2012 AKI: creatinine at least this many times the baseline. Allowed: above 0, at most 20.
aki_ratio = 1.5
# The baseline: the lowest creatinine in this many days before the result. Allowed: above 0,
# at most 365.
aki_baseline_days = 7
# KDIGO 2012 stage 3: creatinine at or above this (mg/dL) during an AKI. Allowed: above 0,
# at most 30.
aki_stage3_creatinine_mg_dl = 4.0
# Hyperglycemia: glucose strictly above this (mg/dL; 250 = 13.9 mmol/L). Allowed: above 0, at
# most 2000.
hyperglycemia_above_mg_dl = 250
# Metabolic acidosis: bicarbonate strictly below this (mmol/L). Allowed: above 0, at most 60.
acidosis_bicarbonate_below = 22
# Hyperosmolality: calculated osmolality 2 Na + glucose/18 + urea nitrogen/2.8 strictly above
# this (mOsm/kg). Allowed: above 0, at most 500.
hyperosmolality_above = 320
# Upper limit of normal of creatine kinase (U/L; laboratory-specific). Allowed: above 0, at most
# 10000.
ck_upper_normal_limit = 200
# Rhabdomyolysis: CK at or above this many times its upper limit of normal. Allowed: above 0, at
# most 1000.
rhabdomyolysis_ck_multiple = 5
# Laboratory tumour lysis (Cairo-Bishop 2004, absolute criteria): at least two of urate, potassium,
# phosphate at or above and corrected calcium at or below these within tls_window_hours.
# Urate (mg/dL). Allowed: above 0, at most 50.
tls_urate_mg_dl = 8.0
# Potassium (mmol/L). Allowed: above 0, at most 12.
tls_potassium = 6.0
# Phosphate (mg/dL; adults). Allowed: above 0, at most 50.
tls_phosphate_mg_dl = 4.5
# Calcium corrected for albumin (mg/dL). Allowed: above 0, at most 20.
tls_calcium_mg_dl = 7.0
# Window of the two abnormalities (hours; 24 after Howard et al. 2011). Allowed: above 0, at
# most 8760.
tls_window_hours = 24

[attribution]
# Which context of an episode's onset counts as a cause (queries/episode_causes.sql).
# A drug class counts when one of its eras is active at onset or ended at most this many hours
# before it (a class may set lookback_hours). Allowed: 0 to 87600.
drug_lookback_hours = 168
# AKI counts when a creatinine result meeting the AKI criteria lies from this many hours before
# onset ... Allowed: 0 to 87600.
aki_before_hours = 168
# ... to this many hours after it. Allowed: 0 to 87600.
aki_after_hours = 24
# Hyperglycemia, acidosis, hyperosmolality, rhabdomyolysis and tumour lysis count within this
# many hours before or after onset. Allowed: 0 to 87600.
lab_window_hours = 24
# Baseline eGFR: the median CKD-EPI 2021 eGFR of the creatinine results in this many days up to
# onset. Allowed: 0 to 3650.
baseline_egfr_days = 365
# Baseline eGFR strictly below this counts as a cause (45: KDIGO G3b or worse).
# Allowed: 0 to 200.
ckd_egfr_below = 45
# ICD-10 codes or prefixes of adrenal insufficiency and hypoaldosteronism (DOMAIN.md section
# 2.8): counted when recorded before onset or on the encounter of the onset.
adrenal_icd10 = ["E27.1", "E27.2", "E27.3", "E27.4", "N25.8"]

[outcomes]
# Treatments and outcomes after onset (queries/episode_treatments.sql, episode_outcomes.sql).
# Potassium-lowering administrations from onset to this many hours after it. Allowed: above 0, at
# most 87600.
treatment_window_hours = 12
# Hypoglycemia after insulin: glucose strictly below this (mg/dL; 70 = 3.9 mmol/L). Allowed:
# above 0, at most 200.
hypoglycemia_below_mg_dl = 70
# ... within this many hours after an insulin administration. Allowed: above 0, at most 87600.
hypoglycemia_window_hours = 6
# Death within this many days of onset. Allowed: above 0, at most 3650.
death_within_days = 30
# The drug-event listing (queries/drug_event_listing.sql) reads whether the suspect drug was
# stopped or continued this many days after onset (dechallenge). Allowed: above 0, at most 3650.
dechallenge_days = 7

[cohort]
# New-user cohorts per drug class (queries/new_user_cohorts.sql; DOMAIN.md section 4).
# Intention-to-treat follow-up ends this many days after entry. Allowed: above 0, at most 3650.
horizon_days = 90
# Baseline covariates come from this many days before entry (never after it). Allowed: above 0,
# at most 3650.
baseline_days = 365
# Recent AKI: an AKI result within this many days before entry. Allowed: above 0, at most 3650.
recent_aki_days = 30
"#;

/// One value out of its allowed range.
#[derive(Debug, Clone, PartialEq)]
pub struct StudyProblem {
    /// Dotted key, as written in the file (`episode.high_above`).
    pub key: String,
    /// The value found.
    pub found: String,
    /// What is allowed.
    pub expected: String,
}

impl fmt::Display for StudyProblem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "`{}` = {}: expected {}",
            self.key, self.found, self.expected
        )
    }
}

/// Why a study file cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum StudyError {
    /// Not TOML, a value of the wrong type, or an unknown key.
    #[error("line {line}, column {column}: {message}")]
    Parse {
        line: usize,
        column: usize,
        message: String,
    },
    /// Well-formed, but values out of their allowed range.
    #[error("{} value(s) out of range:\n{}", .0.len(), list(.0))]
    Invalid(Vec<StudyProblem>),
}

fn list(problems: &[StudyProblem]) -> String {
    problems
        .iter()
        .map(|p| format!("  {p}"))
        .collect::<Vec<_>>()
        .join("\n")
}

/// Line and column (1-based) of a byte offset.
fn line_column(text: &str, offset: usize) -> (usize, usize) {
    let before = &text[..offset.min(text.len())];
    let line = before.matches('\n').count() + 1;
    let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, column)
}

/// Potassium values any threshold may take: the contract's possible range (mmol/L).
const POTASSIUM_RANGE: (f64, f64) = (1.0, 12.0);
/// Longest window: ten years of hours.
const MAX_GAP_LIMIT_HOURS: f64 = 87_600.0;
/// Longest other window: one year of hours.
const WINDOW_LIMIT_HOURS: f64 = 8_760.0;
const HEMOLYSIS_LIMIT: f64 = 10_000.0;

pub(crate) struct Checker {
    problems: Vec<StudyProblem>,
}

impl Checker {
    fn fail(&mut self, key: &str, found: impl fmt::Display, expected: impl Into<String>) {
        self.problems.push(StudyProblem {
            key: key.into(),
            found: found.to_string(),
            expected: expected.into(),
        });
    }

    /// `low <= value <= high` (or `low < value` when `low_open`).
    pub(crate) fn range(&mut self, key: &str, value: f64, low: f64, low_open: bool, high: f64) {
        let low_ok = if low_open { value > low } else { value >= low };
        if !value.is_finite() || !low_ok || value > high {
            let from = if low_open {
                format!("above {low}")
            } else {
                format!("from {low}")
            };
            self.fail(key, value, format!("a number {from} to {high}"));
        }
    }

    fn name(&mut self, key: &str, name: &str) {
        let ok = name.starts_with(|c: char| c.is_ascii_lowercase())
            && name
                .chars()
                .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_');
        if !ok {
            self.fail(
                key,
                format!("`{name}`"),
                "a class name of lowercase letters, digits and `_`, starting with a letter",
            );
        }
    }

    fn code_sets<'a>(
        &mut self,
        section: &str,
        sets: impl ExactSizeIterator<Item = (&'a String, &'a str, &'a [String])>,
    ) {
        if sets.len() == 0 {
            self.fail(section, "no classes", "at least one class");
        }
        for (name, label, atc) in sets {
            let key = format!("{section}.{name}");
            self.name(&key, name);
            if label.trim().is_empty() {
                self.fail(&format!("{key}.label"), "\"\"", "a non-empty label");
            }
            self.codes(
                &format!("{key}.atc"),
                atc,
                is_valid_atc,
                "WHO ATC code or prefix (C, C09, C09A, C09AA, C09AA02)",
            );
        }
    }

    fn drug_class_windows(&mut self, classes: &BTreeMap<String, DrugClass>) {
        for (name, class) in classes {
            for (field, value, high) in [
                ("lookback_hours", class.lookback_hours, 87_600.0),
                ("started_within_days", class.started_within_days, 3_650.0),
                ("min_exposure_days", class.min_exposure_days, 3_650.0),
                ("administer_hours", class.administer_hours, 87_600.0),
            ] {
                if let Some(v) = value {
                    self.range(&format!("drug_classes.{name}.{field}"), v, 0.0, false, high);
                }
            }
        }
    }

    pub(crate) fn codes(
        &mut self,
        key: &str,
        codes: &[String],
        valid: impl Fn(&str) -> bool,
        what: &str,
    ) {
        if codes.is_empty() {
            self.fail(key, "[]", format!("at least one {what}"));
        }
        for (i, code) in codes.iter().enumerate() {
            if !valid(code) {
                self.fail(key, format!("\"{code}\""), format!("each a {what}"));
            } else if codes[..i].contains(code) {
                self.fail(key, format!("\"{code}\""), "each code once");
            }
        }
    }
}

impl Study {
    /// Parse a study file and validate it.
    pub fn from_toml(text: &str) -> Result<Study, StudyError> {
        let study: Study = toml::from_str(text).map_err(|e| {
            let (line, column) = e
                .span()
                .map_or((1, 1), |span| line_column(text, span.start));
            StudyError::Parse {
                line,
                column,
                message: e.message().trim().to_string(),
            }
        })?;
        study.validate()?;
        Ok(study)
    }

    /// Check every value against its allowed range; all problems are reported at once.
    pub fn validate(&self) -> Result<(), StudyError> {
        let mut c = Checker {
            problems: Vec::new(),
        };
        let tz = &self.site.timezone;
        if !tz
            .chars()
            .all(|ch| ch.is_ascii_alphanumeric() || "_/+-:".contains(ch))
            || tz.len() > 64
        {
            c.fail(
                "site.timezone",
                format!("\"{tz}\""),
                "empty, an IANA time zone name (Europe/Berlin) or a fixed offset (+01:00)",
            );
        }

        c.codes(
            "potassium.loinc",
            &self.potassium.loinc,
            is_valid_loinc,
            "LOINC code with a valid check digit (2823-3)",
        );
        c.range(
            "potassium.hemolysis_cutoff",
            self.potassium.hemolysis_cutoff,
            0.0,
            true,
            HEMOLYSIS_LIMIT,
        );

        let e = &self.episode;
        let (k_low, k_high) = POTASSIUM_RANGE;
        c.range("episode.high_above", e.high_above, k_low, false, k_high);
        c.range(
            "episode.normal_at_or_below",
            e.normal_at_or_below,
            k_low,
            false,
            e.high_above.min(k_high),
        );
        c.range(
            "episode.max_gap_hours",
            e.max_gap_hours,
            0.0,
            true,
            MAX_GAP_LIMIT_HOURS,
        );
        for (key, value) in [
            ("episode.rebound_hours", e.rebound_hours),
            ("episode.spurious_repeat_hours", e.spurious_repeat_hours),
            (
                "episode.hospital_acquired_after_hours",
                e.hospital_acquired_after_hours,
            ),
        ] {
            c.range(key, value, 0.0, false, WINDOW_LIMIT_HOURS);
        }
        c.range(
            "episode.upper_normal_limit",
            e.upper_normal_limit,
            k_low,
            false,
            k_high,
        );
        c.range(
            "episode.severity_moderate_from",
            e.severity_moderate_from,
            k_low,
            false,
            k_high,
        );
        if e.severity_severe_from.is_finite()
            && e.severity_moderate_from.is_finite()
            && e.severity_severe_from <= e.severity_moderate_from
        {
            c.fail(
                "episode.severity_severe_from",
                e.severity_severe_from,
                format!(
                    "a number above episode.severity_moderate_from ({}) to {k_high}",
                    e.severity_moderate_from
                ),
            );
        } else {
            c.range(
                "episode.severity_severe_from",
                e.severity_severe_from,
                k_low,
                false,
                k_high,
            );
        }

        c.code_sets(
            "potassium_lowering",
            self.potassium_lowering
                .iter()
                .map(|(k, v)| (k, v.label.as_str(), v.atc.as_slice())),
        );
        c.code_sets(
            "drug_classes",
            self.drug_classes
                .iter()
                .map(|(k, v)| (k, v.label.as_str(), v.atc.as_slice())),
        );
        c.drug_class_windows(&self.drug_classes);
        for (name, codes) in &self.lab_loinc {
            let key = format!("lab_loinc.{name}");
            match LAB_ANALYTES.iter().find(|a| a.as_str() == name) {
                None => c.fail(
                    &key,
                    format!("`{name}`"),
                    format!(
                        "one of {}",
                        LAB_ANALYTES
                            .iter()
                            .map(|a| a.as_str())
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                ),
                Some(a) => {
                    let known = a.loinc_codes();
                    c.codes(
                        &key,
                        codes,
                        |code| known.contains(&code),
                        &format!("LOINC code kcohort reads as {name} ({})", known.join(", ")),
                    );
                }
            }
        }
        crate::study_rules::validate(
            &mut c,
            &self.exposure,
            &self.conditions,
            &self.attribution,
            &self.outcomes,
        );
        crate::study_rules::validate_cohort(&mut c, &self.cohort);

        if c.problems.is_empty() {
            Ok(())
        } else {
            Err(StudyError::Invalid(c.problems))
        }
    }

    /// The LOINC codes of each co-analyte the definitions read ([`LAB_ANALYTES`]): the study's
    /// list where it has one, else every code kcohort interprets for the analyte.
    pub fn lab_loinc_sets(&self) -> Vec<(&'static str, Vec<String>)> {
        LAB_ANALYTES
            .iter()
            .map(|a| {
                let name = a.as_str();
                let codes = self
                    .lab_loinc
                    .get(name)
                    .cloned()
                    .unwrap_or_else(|| a.loinc_codes().iter().map(|c| c.to_string()).collect());
                (name, codes)
            })
            .collect()
    }

    /// The ATC prefixes of every potassium-lowering class, sorted, each once.
    pub fn potassium_lowering_atc(&self) -> Vec<String> {
        let mut codes: Vec<String> = self
            .potassium_lowering
            .values()
            .flat_map(|s| s.atc.iter().cloned())
            .collect();
        codes.sort();
        codes.dedup();
        codes
    }

    /// A canonical text of the parsed definition (comments and layout of the file do not
    /// matter): equal studies, equal text. Used to fingerprint derived tables.
    pub fn canonical_json(&self) -> String {
        serde_json::to_string(self).expect("a study serialises")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_file_parses_to_the_defaults() {
        assert_eq!(
            Study::from_toml(DEFAULT_STUDY_TOML).unwrap(),
            Study::default()
        );
    }

    #[test]
    fn empty_file_is_the_default_study() {
        assert_eq!(Study::from_toml("").unwrap(), Study::default());
    }

    #[test]
    fn every_key_of_the_default_file_has_a_comment_above_it() {
        let lines: Vec<&str> = DEFAULT_STUDY_TOML.lines().collect();
        for (i, line) in lines.iter().enumerate() {
            let is_key = !line.starts_with('#') && !line.starts_with('[') && line.contains(" = ");
            // A key directly after another key shares its comment only in code sets (label, atc).
            if is_key && !line.starts_with("atc = ") {
                assert!(
                    lines[i - 1].starts_with('#'),
                    "line {}: `{line}` has no comment above it",
                    i + 1
                );
            }
        }
    }

    #[test]
    fn the_default_treatment_set_is_the_one_of_the_definition() {
        // Issue 3 §3.7: A10AB, R03AC02, B05XA02, A12AA03, A12AA07, V03AE, C03CA.
        let mut expected = vec![
            "A10AB", "R03AC02", "B05XA02", "A12AA03", "A12AA07", "V03AE", "C03CA",
        ];
        expected.sort();
        assert_eq!(Study::default().potassium_lowering_atc(), expected);
    }

    #[test]
    fn a_key_left_out_takes_its_default() {
        let s = Study::from_toml("[episode]\nrebound_hours = 12\n").unwrap();
        assert_eq!(s.episode.rebound_hours, 12.0);
        assert_eq!(s.episode.high_above, 5.5);
        assert_eq!(s.drug_classes, default_drug_classes());
    }

    fn check_invalid(text: &str, key: &str, expected_part: &str) {
        match Study::from_toml(text) {
            Err(StudyError::Invalid(problems)) => {
                let p = problems
                    .iter()
                    .find(|p| p.key == key)
                    .unwrap_or_else(|| panic!("no problem for {key}: {problems:?}"));
                assert!(
                    p.expected.contains(expected_part),
                    "{key}: `{}` lacks `{expected_part}`",
                    p.expected
                );
            }
            other => panic!("{text}: expected invalid {key}, got {other:?}"),
        }
    }

    #[test]
    fn out_of_range_values_name_the_key_and_the_range() {
        check_invalid(
            "[episode]\nhigh_above = 0.5",
            "episode.high_above",
            "from 1 to 12",
        );
        check_invalid(
            "[episode]\nnormal_at_or_below = 6.0",
            "episode.normal_at_or_below",
            "from 1 to 5.5",
        );
        check_invalid(
            "[episode]\nmax_gap_hours = 0",
            "episode.max_gap_hours",
            "above 0",
        );
        check_invalid(
            "[episode]\nrebound_hours = -1",
            "episode.rebound_hours",
            "from 0 to 8760",
        );
    }

    #[test]
    fn more_out_of_range_values() {
        check_invalid(
            "[episode]\nseverity_severe_from = 6.0",
            "episode.severity_severe_from",
            "above episode.severity_moderate_from (6)",
        );
        check_invalid(
            "[potassium]\nhemolysis_cutoff = 0",
            "potassium.hemolysis_cutoff",
            "above 0",
        );
        check_invalid(
            "[potassium]\nloinc = [\"2823-4\"]",
            "potassium.loinc",
            "valid check digit",
        );
        check_invalid("[potassium]\nloinc = []", "potassium.loinc", "at least one");
        check_invalid(
            "[potassium_lowering.x]\nlabel = \"x\"\natc = [\"c03ca\"]",
            "potassium_lowering.x.atc",
            "ATC",
        );
        check_invalid(
            "[drug_classes.Bad]\nlabel = \"x\"\natc = [\"C07\"]",
            "drug_classes.Bad",
            "lowercase",
        );
        check_invalid(
            "[site]\ntimezone = \"Europe/Berlin; x\"",
            "site.timezone",
            "IANA",
        );
    }

    #[test]
    fn unknown_keys_and_wrong_types_are_parse_errors_with_a_position() {
        match Study::from_toml("[episode]\nrebound_hour = 12\n") {
            Err(StudyError::Parse { line, message, .. }) => {
                assert_eq!(line, 2);
                assert!(message.contains("rebound_hour"), "{message}");
            }
            other => panic!("{other:?}"),
        }
        match Study::from_toml("[episode]\n\nhigh_above = \"5.5\"\n") {
            Err(StudyError::Parse { line, .. }) => assert_eq!(line, 3),
            other => panic!("{other:?}"),
        }
    }
}
