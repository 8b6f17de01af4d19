//! What was planted and what came of it: the running counters of a generation ([`Tally`]) and
//! the `truth.json` they become ([`Truth`]). Every planted effect is recorded twice: the stated
//! parameter (from the configuration) and the realised counts in the files, so tests and users
//! can compare estimates with the truth within sampling error.

use crate::config::{HazardRatios, SynthConfig};
use crate::episode::EpisodePlan;
use crate::exposure::Tracked;
use crate::hazard::{BACKGROUND, FACTORS, Factor};
use crate::network::{self, CreatinineReporting, NETWORK_NAME, SITES, UNITS};
use crate::profile::{AGE_BANDS, Sex};
use crate::record::EncounterClass;
use crate::scenario::Scenario;
use crate::site_time::{SECONDS_PER_DAY, SiteTime};
use crate::specimen::SpecimenCounts;
use crate::timeline::PatientRows;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

pub const FORMAT_VERSION: u32 = 1;

/// Where a stretch of time at risk was spent.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum TimeSetting {
    Community = 0,
    Hospital = 1,
}

const SETTING_NAMES: [&str; 2] = ["community", "hospital"];

#[derive(Debug, Clone, Copy, Default)]
struct Cell {
    days: f64,
    episodes: u64,
    /// Expected episodes without the rate step: Σ baseline × HR(factors) × days.
    expected: f64,
}

impl Cell {
    fn add_days(&mut self, d: f64) {
        self.days += d;
    }
}

#[derive(Debug, Clone, Copy, Default)]
struct MonthTally {
    hospital_acquired: u64,
    present_on_admission: u64,
    hospital_days: f64,
    step_unit_hospital_acquired: u64,
    step_unit_days: f64,
}

/// Running counters of one generation.
#[derive(Debug, Clone)]
pub(crate) struct Tally {
    pub patients: u64,
    sex: [u64; 3],
    age_bands: [u64; 6],
    diabetes: u64,
    heart_failure: u64,
    hypertension: u64,
    egfr_below_45: u64,
    adrenal: u64,
    deaths: u64,
    pub deaths_in_hospital: u64,
    encounters: [u64; 3],
    pub stays: u64,
    pub transfers: u64,
    pub open_admissions: u64,
    inpatient_days: f64,
    specimens: SpecimenCounts,
    // Episodes.
    setting: [Cell; 2],
    factor_exposed: [[Cell; 14]; 2],
    factor_unexposed: [[Cell; 14]; 2],
    /// [setting][eGFR < 45][MRA]
    mra_cells: [[[Cell; 2]; 2]; 2],
    /// [setting][0 = RAAS without CCB, 1 = CCB without RAAS]
    comparator_cells: [[Cell; 2]; 2],
    by_label: [u64; 15],
    with_factor: [u64; 14],
    severity: [u64; 3],
    peak_above_7: u64,
    treated: u64,
    treated_with_insulin: u64,
    pub episodes_rebound: u64,
    severe_episodes: u64,
    severe_deaths_30d: u64,
    severe_deaths_planted: u64,
    insulin_treatments: u64,
    insulin_checked: u64,
    insulin_hypoglycemia: u64,
    /// [before, after] the step month, in the step unit.
    step: [Cell; 2],
    months: Vec<MonthTally>,
    /// Time at risk and onsets by (setting, exact factor mask).
    strata: BTreeMap<(usize, u32), Cell>,
    initiators: [u64; 3],
    initiators_after_washout: [u64; 3],
}

impl Tally {
    pub(crate) fn new(sc: &Scenario) -> Tally {
        Tally {
            patients: 0,
            sex: [0; 3],
            age_bands: [0; 6],
            diabetes: 0,
            heart_failure: 0,
            hypertension: 0,
            egfr_below_45: 0,
            adrenal: 0,
            deaths: 0,
            deaths_in_hospital: 0,
            encounters: [0; 3],
            stays: 0,
            transfers: 0,
            open_admissions: 0,
            inpatient_days: 0.0,
            specimens: SpecimenCounts::default(),
            setting: [Cell::default(); 2],
            factor_exposed: [[Cell::default(); 14]; 2],
            factor_unexposed: [[Cell::default(); 14]; 2],
            mra_cells: [[[Cell::default(); 2]; 2]; 2],
            comparator_cells: [[Cell::default(); 2]; 2],
            by_label: [0; 15],
            with_factor: [0; 14],
            severity: [0; 3],
            peak_above_7: 0,
            treated: 0,
            treated_with_insulin: 0,
            episodes_rebound: 0,
            severe_episodes: 0,
            severe_deaths_30d: 0,
            severe_deaths_planted: 0,
            insulin_treatments: 0,
            insulin_checked: 0,
            insulin_hypoglycemia: 0,
            step: [Cell::default(); 2],
            months: vec![MonthTally::default(); sc.month_starts.len()],
            strata: BTreeMap::new(),
            initiators: [0; 3],
            initiators_after_washout: [0; 3],
        }
    }

    /// The cells a stretch of time (or an onset) with factors `mask` belongs to.
    fn cells(&mut self, setting: TimeSetting, mask: u32, mut f: impl FnMut(&mut Cell)) {
        let s = setting as usize;
        f(&mut self.setting[s]);
        f(self.strata.entry((s, mask)).or_default());
        for factor in FACTORS {
            if factor.is_active(mask) {
                f(&mut self.factor_exposed[s][factor.index()]);
            } else {
                f(&mut self.factor_unexposed[s][factor.index()]);
            }
        }
        let egfr = usize::from(Factor::EgfrBelow45.is_active(mask));
        let mra = usize::from(Factor::Mra.is_active(mask));
        f(&mut self.mra_cells[s][egfr][mra]);
        let raas = Factor::RaasInhibitor.is_active(mask);
        let ccb = Factor::CalciumChannelBlocker.is_active(mask);
        if raas && !ccb {
            f(&mut self.comparator_cells[s][0]);
        } else if ccb && !raas {
            f(&mut self.comparator_cells[s][1]);
        }
    }

    /// Time at risk: `days` with factors `mask` and hazard `rate_per_day` before any rate step;
    /// `step_side` is Some(after the step month) when the time is in the step unit.
    pub(crate) fn at_risk(
        &mut self,
        setting: TimeSetting,
        mask: u32,
        days: f64,
        rate_per_day: f64,
        step_side: Option<bool>,
        month: usize,
    ) {
        self.cells(setting, mask, |c| c.add_days(days));
        if setting == TimeSetting::Hospital {
            self.months[month].hospital_days += days;
            if let Some(after) = step_side {
                self.step[usize::from(after)].days += days;
                self.step[usize::from(after)].expected += days * rate_per_day;
                self.months[month].step_unit_days += days;
            }
        }
    }

    /// A planted onset.
    pub(crate) fn episode(
        &mut self,
        plan: &EpisodePlan,
        setting: TimeSetting,
        mask: u32,
        label: Option<Factor>,
        step_side: Option<bool>,
        month: usize,
    ) {
        self.cells(setting, mask, |c| c.episodes += 1);
        self.by_label[label.map_or(14, |f| f.index())] += 1;
        for f in FACTORS {
            if f.is_active(mask) {
                self.with_factor[f.index()] += 1;
            }
        }
        self.severity[plan.severity() as usize] += 1;
        self.peak_above_7 += u64::from(plan.peak > 7.0);
        self.treated += u64::from(plan.treated);
        self.treated_with_insulin += u64::from(plan.insulin_at.is_some());
        self.severe_deaths_planted += u64::from(plan.death_at.is_some());
        match setting {
            TimeSetting::Hospital => {
                self.months[month].hospital_acquired += 1;
                if let Some(after) = step_side {
                    self.step[usize::from(after)].episodes += 1;
                    self.months[month].step_unit_hospital_acquired += 1;
                }
            }
            TimeSetting::Community => self.months[month].present_on_admission += 1,
        }
    }

    pub(crate) fn specimens(&mut self, c: &SpecimenCounts) {
        let s = &mut self.specimens;
        s.serum_potassium += c.serum_potassium;
        s.blood_gas_potassium += c.blood_gas_potassium;
        s.with_index += c.with_index;
        s.eligible_with_index += c.eligible_with_index;
        s.eligible_hemolysed += c.eligible_hemolysed;
        s.hemolysed += c.hemolysed;
        s.hemolysed_high += c.hemolysed_high;
        s.hemolysed_high_refuted += c.hemolysed_high_refuted;
        s.spurious_planted += c.spurious_planted;
        s.spurious_refuted += c.spurious_refuted;
        s.baseline_n += c.baseline_n;
        s.baseline_sum += c.baseline_sum;
        s.baseline_sum_squares += c.baseline_sum_squares;
        s.above_upper_limit += c.above_upper_limit;
        s.below_lower_limit += c.below_lower_limit;
        s.glucose_above_600 += c.glucose_above_600;
    }

    pub(crate) fn severe_death(&mut self, died_within_30_days: bool) {
        self.severe_episodes += 1;
        self.severe_deaths_30d += u64::from(died_within_30_days);
    }

    pub(crate) fn insulin(&mut self, checked: bool, low: bool) {
        self.insulin_treatments += 1;
        self.insulin_checked += u64::from(checked);
        self.insulin_hypoglycemia += u64::from(low);
    }

    /// Population, encounter and new-user counts of a finished patient.
    pub(crate) fn patient(
        &mut self,
        p: &crate::profile::Profile,
        rows: &PatientRows,
        sc: &Scenario,
    ) {
        self.patients += 1;
        self.sex[match p.sex {
            Sex::Female => 0,
            Sex::Male => 1,
            Sex::Unknown => 2,
        }] += 1;
        self.age_bands[p.age_band] += 1;
        self.diabetes += u64::from(p.diabetes);
        self.heart_failure += u64::from(p.heart_failure);
        self.hypertension += u64::from(p.hypertension);
        self.egfr_below_45 += u64::from(p.egfr < 45.0);
        self.adrenal += u64::from(p.adrenal.is_some());
        self.deaths += u64::from(rows.death_at.is_some());
        for e in &rows.encounters {
            self.encounters[e.class as usize] += 1;
            if e.class == EncounterClass::Inpatient {
                let to = e.discharged_at.unwrap_or(sc.extract_end);
                self.inpatient_days += (to - e.admitted_at) as f64 / SECONDS_PER_DAY as f64;
            }
        }
        let stop = rows.death_at.unwrap_or(sc.extract_end);
        let washout_end = sc.period_start + 365 * SECONDS_PER_DAY;
        for tracked in [Tracked::Raas, Tracked::Ccb, Tracked::Mra] {
            let first = rows.drugs.first_use[tracked as usize];
            if let Some(at) = first.at.filter(|at| *at < stop)
                && first.initiated
            {
                self.initiators[tracked as usize] += 1;
                self.initiators_after_washout[tracked as usize] += u64::from(at >= washout_end);
            }
        }
    }
}

// ---- truth.json ------------------------------------------------------------------------------

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Truth {
    pub format_version: u32,
    /// `kcohort-synth <version>`.
    pub generator: String,
    pub network: NetworkTruth,
    /// The configuration the extract was generated with (seed and every planted parameter).
    pub config: SynthConfig,
    pub site_timezone: String,
    /// First instant of the period, RFC 3339 UTC, and as local time.
    pub period_start: String,
    pub period_start_local: String,
    /// End of the simulated period (every start time is before it), RFC 3339 UTC and local.
    pub extract_end: String,
    pub extract_end_local: String,
    pub last_complete_month: String,
    /// Per table: data rows in the file, rows without a planted defect, planted defects by
    /// reject reason code.
    pub files: BTreeMap<String, FileTruth>,
    pub population: PopulationTruth,
    pub encounters: EncounterTruth,
    pub potassium: PotassiumTruth,
    pub episodes: EpisodeTruth,
    pub hazard: HazardTruth,
    pub rate_step: StepTruth,
    pub hypoglycemia: HypoglycemiaTruth,
    pub severe_death_30d: SevereDeathTruth,
    /// Onsets by local calendar month of the onset draw.
    pub monthly: Vec<MonthTruth>,
    /// Modelling choices an analyst comparing estimates with this file needs to know.
    pub notes: Vec<String>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NetworkTruth {
    pub name: String,
    pub sites: Vec<SiteTruth>,
    pub units: Vec<UnitTruth>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SiteTruth {
    pub name: String,
    pub code: String,
    pub patient_share: f64,
    pub potassium_unit: String,
    pub creatinine_unit: String,
    pub creatinine_loinc: String,
    pub hemolysis_index_share: f64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UnitTruth {
    pub name: String,
    pub site: String,
    pub kind: String,
}

#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FileTruth {
    pub file: String,
    pub rows: u64,
    pub clean_rows: u64,
    pub planted_defects: BTreeMap<String, u64>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PopulationTruth {
    pub patients: u64,
    pub female: u64,
    pub male: u64,
    pub unknown_sex: u64,
    /// Stated sex shares F / M / U.
    pub stated_sex_shares: [f64; 3],
    /// Age at the period start.
    pub age_bands: BTreeMap<String, u64>,
    pub hypertension: u64,
    pub diabetes: u64,
    pub heart_failure: u64,
    pub adrenal_insufficiency: u64,
    /// Usual eGFR (CKD-EPI 2021 of the patient's usual creatinine) below 45.
    pub egfr_below_45: u64,
    pub deaths: u64,
    pub deaths_in_hospital: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EncounterTruth {
    pub inpatient: u64,
    pub emergency: u64,
    pub outpatient: u64,
    /// Stays: consecutive inpatient encounters joined by transfers count once.
    pub hospital_stays: u64,
    pub transfers: u64,
    /// Still admitted at the extract end (discharged_at empty).
    pub open_admissions: u64,
    pub inpatient_days: f64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PotassiumTruth {
    /// Serum/plasma results (LOINC 2823-3) and blood gas results (6298-4).
    pub serum_plasma_results: u64,
    pub blood_gas_results: u64,
    pub with_hemolysis_index: u64,
    pub hemolysis: HemolysisTruth,
    pub baseline: BaselineTruth,
    pub spurious: SpuriousTruth,
    /// Results written `>9.0` and `<1.5`.
    pub reported_above_9: u64,
    pub reported_below_1_5: u64,
    pub glucose_reported_above_600: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HemolysisTruth {
    pub stated_share: f64,
    pub index_threshold: u16,
    /// Specimens with an index that could be hemolysed (all but the clean draws that carry
    /// planted facts: episode onset, confirmation, normalisation, rebound, refuting repeats).
    pub eligible_specimens: u64,
    pub eligible_hemolysed: u64,
    pub realised_share: f64,
    /// All results with index ≥ threshold in the file.
    pub hemolysed_results: u64,
    /// Hemolysed results outside episodes reading ≥ 5.5, and those with a result < 5.0 in the
    /// next 6 h.
    pub hemolysed_high: u64,
    pub hemolysed_high_refuted: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BaselineTruth {
    pub stated_mean: f64,
    pub stated_sd: f64,
    /// Routine results outside episodes, not hemolysed, as reported.
    pub results: u64,
    pub mean: f64,
    pub sd: f64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SpuriousTruth {
    pub stated_share: f64,
    pub planted: u64,
    /// Non-hemolysed single highs outside episodes with a result < 5.0 within 6 h.
    pub refuted_by_normal_repeat: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EpisodeTruth {
    pub definition: String,
    pub total: u64,
    pub hospital_acquired: u64,
    pub present_on_admission: u64,
    /// mild 5.5–5.9, moderate 6.0–6.4, severe ≥ 6.5 (peak as reported).
    pub by_severity: BTreeMap<String, u64>,
    pub peak_above_7: u64,
    pub treated: u64,
    pub treated_with_insulin: u64,
    pub rebounds: u64,
    /// One planted cause label per episode (see notes for the attribution rule).
    pub by_cause: BTreeMap<String, u64>,
    /// Episodes with each factor present at onset (several per episode).
    pub with_factor_at_onset: BTreeMap<String, u64>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HazardTruth {
    pub community_per_day: f64,
    pub inpatient_per_day: f64,
    pub hazard_ratios: HazardRatios,
    /// Stated HR of RAAS inhibitor vs calcium-channel blocker exposure.
    pub raas_vs_ccb: f64,
    pub hospital_at_risk_from_hours: u32,
    pub at_risk_gap_days: f64,
    pub at_risk: Vec<RiskCell>,
    pub factors: Vec<FactorStratum>,
    pub mra_by_egfr: Vec<MraCell>,
    pub raas_vs_ccb_exposure: Vec<ComparatorCell>,
    /// Time at risk and onsets for every combination of factors that occurred: the exact
    /// strata of the planted model (a Mantel–Haenszel rate ratio over them recovers each HR).
    pub strata: Vec<Stratum>,
    pub initiators: BTreeMap<String, InitiatorTruth>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Stratum {
    pub setting: String,
    /// Names of the factors present (empty: none).
    pub factors: Vec<String>,
    pub person_days: f64,
    pub episodes: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RiskCell {
    pub setting: String,
    pub person_days: f64,
    pub episodes: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FactorStratum {
    pub factor: String,
    pub setting: String,
    pub exposed_person_days: f64,
    pub exposed_episodes: u64,
    pub unexposed_person_days: f64,
    pub unexposed_episodes: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MraCell {
    pub setting: String,
    pub egfr_below_45: bool,
    pub mra: bool,
    pub person_days: f64,
    pub episodes: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ComparatorCell {
    pub setting: String,
    /// `raas_without_ccb` or `ccb_without_raas`.
    pub exposure: String,
    pub person_days: f64,
    pub episodes: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InitiatorTruth {
    /// Courses started during the period (not continuing from before it) with a dispensing in
    /// the extract.
    pub planted_initiators: u64,
    /// Of those, first dispensing at least 365 days after the period start (new users a
    /// 365-day washout can identify).
    pub first_dispensing_after_365_days: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StepTruth {
    pub unit: String,
    pub month: String,
    pub factor: f64,
    pub before: StepSide,
    pub after: StepSide,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StepSide {
    pub hospital_acquired: u64,
    pub at_risk_days: f64,
    /// Episodes expected in that time without the step (Σ baseline × HR × days): the ratio
    /// (observed/expected after) / (observed/expected before) estimates the step factor without
    /// the dilution a crude rate ratio suffers when high-risk patients leave the risk set early.
    pub expected_without_step: f64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HypoglycemiaTruth {
    pub stated_share: f64,
    pub threshold_mg_dl: f64,
    pub window_hours: f64,
    /// Administrations of soluble insulin (A10AB01) for high potassium.
    pub insulin_treatments: u64,
    pub with_glucose_check: u64,
    pub hypoglycemic: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SevereDeathTruth {
    pub stated: f64,
    pub severe_episodes: u64,
    /// Severe episodes given a planted death (Binomial(severe_episodes, stated)); the death is
    /// at a uniform time 0.5–30 days after onset, unless the extract ends or the patient dies
    /// earlier.
    pub planted_deaths: u64,
    /// Deaths from any cause within 30 days after the onset of a severe episode.
    pub deaths_within_30_days: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MonthTruth {
    pub month: String,
    pub hospital_acquired: u64,
    pub present_on_admission: u64,
    pub hospital_at_risk_days: f64,
    pub step_unit_hospital_acquired: u64,
    pub step_unit_at_risk_days: f64,
}

fn mean_sd(n: u64, sum: f64, squares: f64) -> (f64, f64) {
    if n == 0 {
        return (0.0, 0.0);
    }
    let nf = n as f64;
    let mean = sum / nf;
    let var = if n > 1 {
        ((squares - nf * mean * mean) / (nf - 1.0)).max(0.0)
    } else {
        0.0
    };
    (mean, var.sqrt())
}

fn share(x: u64, n: u64) -> f64 {
    if n == 0 {
        0.0
    } else {
        round(x as f64 / n as f64, 6)
    }
}

/// Rounded to `decimals` places, so that the value is written with few digits and reads back
/// exactly (short decimals parse without rounding error).
fn round(x: f64, decimals: i32) -> f64 {
    let scale = 10f64.powi(decimals);
    (x * scale).round() / scale
}

/// Person-days to 4 decimals (about 9 seconds).
fn days(x: f64) -> f64 {
    round(x, 4)
}

impl Truth {
    pub(crate) fn build(sc: &Scenario, t: &Tally, files: BTreeMap<String, FileTruth>) -> Truth {
        let c = &sc.config;
        let time = &sc.time;
        let sp = &t.specimens;
        let (mean, sd) = mean_sd(sp.baseline_n, sp.baseline_sum, sp.baseline_sum_squares);
        let (mean, sd) = (round(mean, 6), round(sd, 6));
        let kind_name = |k: network::UnitKind| format!("{k:?}").to_lowercase();
        let network = NetworkTruth {
            name: NETWORK_NAME.into(),
            sites: SITES
                .iter()
                .map(|s| SiteTruth {
                    name: s.name.into(),
                    code: s.code.into(),
                    patient_share: s.patient_share,
                    potassium_unit: s.electrolyte_unit.into(),
                    creatinine_unit: match s.creatinine {
                        CreatinineReporting::MassPerVolume => "mg/dL".into(),
                        CreatinineReporting::MolesPerVolume => "µmol/L (20% written umol/L)".into(),
                    },
                    creatinine_loinc: match s.creatinine {
                        CreatinineReporting::MassPerVolume => "2160-0".into(),
                        CreatinineReporting::MolesPerVolume => "14682-9".into(),
                    },
                    hemolysis_index_share: s.hemolysis_index_share,
                })
                .collect(),
            units: UNITS
                .iter()
                .map(|u| UnitTruth {
                    name: u.name.into(),
                    site: SITES[u.site].name.into(),
                    kind: kind_name(u.kind),
                })
                .collect(),
        };
        let by_severity = [("mild", 0), ("moderate", 1), ("severe", 2)]
            .into_iter()
            .map(|(name, i)| (name.to_string(), t.severity[i]))
            .collect();
        let mut by_cause: BTreeMap<String, u64> = BTreeMap::new();
        for f in FACTORS {
            by_cause.insert(f.name().into(), t.by_label[f.index()]);
        }
        by_cause.insert(BACKGROUND.into(), t.by_label[14]);
        let with_factor_at_onset = FACTORS
            .iter()
            .map(|f| (f.name().to_string(), t.with_factor[f.index()]))
            .collect();
        let mut factors = Vec::new();
        let mut mra_by_egfr = Vec::new();
        let mut comparator = Vec::new();
        let mut at_risk = Vec::new();
        for (s, name) in SETTING_NAMES.iter().enumerate() {
            let setting = name.to_string();
            at_risk.push(RiskCell {
                setting: setting.clone(),
                person_days: days(t.setting[s].days),
                episodes: t.setting[s].episodes,
            });
            for f in FACTORS {
                let e = t.factor_exposed[s][f.index()];
                let u = t.factor_unexposed[s][f.index()];
                factors.push(FactorStratum {
                    factor: f.name().into(),
                    setting: setting.clone(),
                    exposed_person_days: days(e.days),
                    exposed_episodes: e.episodes,
                    unexposed_person_days: days(u.days),
                    unexposed_episodes: u.episodes,
                });
            }
            for egfr in 0..2 {
                for mra in 0..2 {
                    let cell = t.mra_cells[s][egfr][mra];
                    mra_by_egfr.push(MraCell {
                        setting: setting.clone(),
                        egfr_below_45: egfr == 1,
                        mra: mra == 1,
                        person_days: days(cell.days),
                        episodes: cell.episodes,
                    });
                }
            }
            for (i, name) in ["raas_without_ccb", "ccb_without_raas"]
                .into_iter()
                .enumerate()
            {
                let cell = t.comparator_cells[s][i];
                comparator.push(ComparatorCell {
                    setting: setting.clone(),
                    exposure: name.into(),
                    person_days: days(cell.days),
                    episodes: cell.episodes,
                });
            }
        }
        let initiators = [
            ("raas_inhibitor", Tracked::Raas),
            ("calcium_channel_blocker", Tracked::Ccb),
            ("mra", Tracked::Mra),
        ]
        .into_iter()
        .map(|(name, tr)| {
            (
                name.to_string(),
                InitiatorTruth {
                    planted_initiators: t.initiators[tr as usize],
                    first_dispensing_after_365_days: t.initiators_after_washout[tr as usize],
                },
            )
        })
        .collect();
        let monthly = sc
            .month_labels
            .iter()
            .zip(&t.months)
            .map(|(label, m)| MonthTruth {
                month: label.clone(),
                hospital_acquired: m.hospital_acquired,
                present_on_admission: m.present_on_admission,
                hospital_at_risk_days: days(m.hospital_days),
                step_unit_hospital_acquired: m.step_unit_hospital_acquired,
                step_unit_at_risk_days: days(m.step_unit_days),
            })
            .collect();
        let total = t.setting[0].episodes + t.setting[1].episodes;
        Truth {
            format_version: FORMAT_VERSION,
            generator: format!("kcohort-synth {}", env!("CARGO_PKG_VERSION")),
            network,
            config: c.clone(),
            site_timezone: c.site_timezone.clone(),
            period_start: SiteTime::rfc3339_utc(sc.period_start),
            period_start_local: time.local_string(sc.period_start),
            extract_end: SiteTime::rfc3339_utc(sc.extract_end),
            extract_end_local: time.local_string(sc.extract_end),
            last_complete_month: sc.month_labels[c.months as usize - 1].clone(),
            files,
            population: PopulationTruth {
                patients: t.patients,
                female: t.sex[0],
                male: t.sex[1],
                unknown_sex: t.sex[2],
                stated_sex_shares: [0.51, 0.488, 0.002],
                age_bands: AGE_BANDS
                    .iter()
                    .zip(t.age_bands)
                    .map(|((name, _, _), n)| (name.to_string(), n))
                    .collect(),
                hypertension: t.hypertension,
                diabetes: t.diabetes,
                heart_failure: t.heart_failure,
                adrenal_insufficiency: t.adrenal,
                egfr_below_45: t.egfr_below_45,
                deaths: t.deaths,
                deaths_in_hospital: t.deaths_in_hospital,
            },
            encounters: EncounterTruth {
                inpatient: t.encounters[EncounterClass::Inpatient as usize],
                emergency: t.encounters[EncounterClass::Emergency as usize],
                outpatient: t.encounters[EncounterClass::Outpatient as usize],
                hospital_stays: t.stays,
                transfers: t.transfers,
                open_admissions: t.open_admissions,
                inpatient_days: days(t.inpatient_days),
            },
            potassium: PotassiumTruth {
                serum_plasma_results: sp.serum_potassium,
                blood_gas_results: sp.blood_gas_potassium,
                with_hemolysis_index: sp.with_index,
                hemolysis: HemolysisTruth {
                    stated_share: c.hemolysed_share,
                    index_threshold: crate::specimen::HEMOLYSED_INDEX,
                    eligible_specimens: sp.eligible_with_index,
                    eligible_hemolysed: sp.eligible_hemolysed,
                    realised_share: share(sp.eligible_hemolysed, sp.eligible_with_index),
                    hemolysed_results: sp.hemolysed,
                    hemolysed_high: sp.hemolysed_high,
                    hemolysed_high_refuted: sp.hemolysed_high_refuted,
                },
                baseline: BaselineTruth {
                    stated_mean: 4.3,
                    stated_sd: 0.4,
                    results: sp.baseline_n,
                    mean,
                    sd,
                },
                spurious: SpuriousTruth {
                    stated_share: c.spurious_high_share,
                    planted: sp.spurious_planted,
                    refuted_by_normal_repeat: sp.spurious_refuted,
                },
                reported_above_9: sp.above_upper_limit,
                reported_below_1_5: sp.below_lower_limit,
                glucose_reported_above_600: sp.glucose_above_600,
            },
            episodes: EpisodeTruth {
                definition: EPISODE_READING.into(),
                total,
                hospital_acquired: t.setting[TimeSetting::Hospital as usize].episodes,
                present_on_admission: t.setting[TimeSetting::Community as usize].episodes,
                by_severity,
                peak_above_7: t.peak_above_7,
                treated: t.treated,
                treated_with_insulin: t.treated_with_insulin,
                rebounds: t.episodes_rebound,
                by_cause,
                with_factor_at_onset,
            },
            hazard: HazardTruth {
                community_per_day: c.community_hazard_per_day,
                inpatient_per_day: c.inpatient_hazard_per_day,
                hazard_ratios: c.hazard_ratios.clone(),
                raas_vs_ccb: c.hazard_ratios.raas_inhibitor
                    / c.hazard_ratios.calcium_channel_blocker,
                hospital_at_risk_from_hours: crate::timeline::HOSPITAL_AT_RISK_FROM_HOURS as u32,
                at_risk_gap_days: 7.5,
                at_risk,
                factors,
                mra_by_egfr,
                raas_vs_ccb_exposure: comparator,
                strata: t
                    .strata
                    .iter()
                    .map(|((s, mask), cell)| Stratum {
                        setting: SETTING_NAMES[*s].into(),
                        factors: FACTORS
                            .iter()
                            .filter(|f| f.is_active(*mask))
                            .map(|f| f.name().to_string())
                            .collect(),
                        person_days: days(cell.days),
                        episodes: cell.episodes,
                    })
                    .collect(),
                initiators,
            },
            rate_step: StepTruth {
                unit: c.step_unit.clone(),
                month: c.step_month.clone(),
                factor: c.step_factor,
                before: StepSide {
                    hospital_acquired: t.step[0].episodes,
                    at_risk_days: days(t.step[0].days),
                    expected_without_step: round(t.step[0].expected, 4),
                },
                after: StepSide {
                    hospital_acquired: t.step[1].episodes,
                    at_risk_days: days(t.step[1].days),
                    expected_without_step: round(t.step[1].expected, 4),
                },
            },
            hypoglycemia: HypoglycemiaTruth {
                stated_share: c.hypoglycemia_after_insulin,
                threshold_mg_dl: 70.0,
                window_hours: 6.0,
                insulin_treatments: t.insulin_treatments,
                with_glucose_check: t.insulin_checked,
                hypoglycemic: t.insulin_hypoglycemia,
            },
            severe_death_30d: SevereDeathTruth {
                stated: c.severe_death_30d,
                severe_episodes: t.severe_episodes,
                planted_deaths: t.severe_deaths_planted,
                deaths_within_30_days: t.severe_deaths_30d,
            },
            monthly,
            notes: NOTES.iter().map(|s| s.to_string()).collect(),
        }
    }
}

/// How the planted episodes read in the files (the reading the counts follow).
pub const EPISODE_READING: &str = "Serum/plasma potassium (LOINC 2823-3), hemolysed results kept. A high is a result >= 5.5 \
mmol/L (a `>9.0` result counts as 9.0). A high is confirmed when another serum/plasma result >= 5.5 follows within 6 h \
or a K-lowering drug is administered (kind administer; ATC A12AA03, A10AB01, R03AC02, B05XA02, V03AE01, V03AE09, \
V03AE10, C03CA01) within 6 h after it. An episode starts at a confirmed high; it normalises at the first result < 5.0 \
after onset; highs within 7 days of the normalisation (or of the last high, when no normalisation is seen) belong to the \
same episode. Hospital-acquired: the onset draw is in an inpatient encounter at least 48 h after the start of its stay \
(inpatient encounters joined by a transfer form one stay); present on admission: every other onset (all of them in an \
emergency encounter). A rebound is a high within 24 h after normalisation.";

const NOTES: &[&str] = &[
    "Every patient is observed from the period start to death or the extract end (members of an integrated network whose hospital care and outpatient dispensings are all in the extract).",
    "Hazard of a true episode = baseline per day at risk x product of the hazard ratios of the factors present. Community time and hospital time from 49 h after admission are at risk (one hour beyond the 48 h of the reading, so no onset sits on its edge); emergency-department time, the first 49 h of a stay, stays that began with a present-on-admission episode, and the time from an onset to 7.5 days after the episode's end are not.",
    "eGFR < 45 is the patient's usual kidney function: CKD-EPI 2021 of the usual creatinine. Measured creatinine scatters around it (CV 5%) and rises during acute kidney injury, so a reading from one measured value misclassifies some patients near the cut-off.",
    "Outpatient drug exposure runs from a dispensing for its days' supply; refills up to 12 days late are bridged; stopped courses leave gaps of at least 180 days. Inpatient heparin counts from the first dose to discharge, IV potassium and co-trimoxazole from the first dose to 24 h after the last. Home medicines continue during stays without administration rows.",
    "Cause label: with probability 1/HR(total) no factor (background), otherwise one present factor with HR > 1, chosen with probability proportional to ln HR. with_factor_at_onset counts every factor present.",
    "Background potassium is truncated to 2.8-5.34 mmol/L: every result >= 5.5 belongs to a planted episode, a planted spurious value or a hemolysed specimen. No spurious value and no hemolysed result >= 5.5 lies within 8 days of an episode; a non-episode high is never followed by another high within 6 h, and no K-lowering drug is given outside episodes.",
    "Clean draws carrying planted facts (onset, confirmation, normalisation, rebound, refuting repeats) are never hemolysed; the stated hemolysed share applies to the other specimens with an index (eligible_specimens).",
    "Glucose outside the post-insulin checks is kept at 72 mg/dL or above, so every glucose < 70 within 6 h after insulin is a planted hypoglycemia.",
    "Planted malformed rows are extra rows (copies of a real row with exactly one defect, or exact duplicates); every other row is valid, so a validator's rejects equal planted_defects.",
    "Times are written in the site zone without offset. In the hour repeated when clocks go back, a reader takes the first occurrence, so there the order of two events can look up to an hour off (as in any zoneless extract); planted windows keep at least an hour of margin (onsets from 49 h after admission, confirmations within 4 h 10 min, refuting repeats within 4 h).",
    "Encounter boundaries are whole minutes. Person-days and other real numbers in this file are rounded (person-days to 4 decimals).",
];
