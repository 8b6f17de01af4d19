//! Specimens: the blood draws of a patient, the values their results get, hemolysis, spurious
//! single high values, and the laboratory rows each draw becomes.
//!
//! Potassium outside episodes is the patient's usual level plus draw-to-draw noise: population
//! mean 4.3 and SD 0.4 mmol/L (patient offset SD 0.25, draw SD 0.312), truncated to 2.8–5.34 so
//! that every result ≥ 5.5 in the extract belongs to a planted episode, a planted spurious value
//! or a hemolysed specimen. Hemolysed specimens read 0.5–2.5 mmol/L higher (0.25 + 0.25 per 100
//! index units; Goyal & Schmotzer 2015, domain reference §1.3, report ≥ 0.5 at high grades).

use crate::episode::{DrawRole, POTASSIUM_UPPER_LIMIT};
use crate::network::{CreatinineReporting, SITES};
use crate::profile::Profile;
use crate::random::Rng;
use crate::record::{LabRec, Reported, Test};
use crate::site_time::{SECONDS_PER_DAY, SECONDS_PER_HOUR, SiteTime, TimeForm};

pub const K: u8 = 1;
pub const SODIUM: u8 = 2;
pub const CHLORIDE: u8 = 4;
pub const BICARBONATE: u8 = 8;
pub const CREATININE: u8 = 16;
pub const UREA: u8 = 32;
pub const GLUCOSE: u8 = 64;
pub const CK: u8 = 128;

/// Basic chemistry: potassium, sodium, creatinine.
pub const BASIC: u8 = K | SODIUM | CREATININE;
/// Extended electrolytes: chloride, bicarbonate, urea nitrogen.
pub const EXTENDED: u8 = CHLORIDE | BICARBONATE | UREA;

/// Hemolysis index from which a specimen counts as hemolysed (the common limit of 90–100 for
/// potassium before 2020, domain reference §1.3).
pub const HEMOLYSED_INDEX: u16 = 100;

/// Window before an onset and after an episode's end in which no spurious value is planted and
/// hemolysed results are capped below 5.5, so that episode boundaries stay unambiguous.
const QUIET_SECONDS: i64 = 8 * SECONDS_PER_DAY;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Setting {
    Inpatient,
    Emergency,
    Outpatient,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Role {
    Routine,
    Planned(DrawRole),
    SpuriousHigh,
    SpuriousRepeat,
    HemolysedRepeat,
    GlucoseCheck,
}

impl Role {
    /// Draws whose value carries a planted fact; they are drawn as clean specimens.
    fn is_structural(self) -> bool {
        match self {
            Role::Routine | Role::GlucoseCheck | Role::Planned(DrawRole::Recheck) => false,
            Role::Planned(_)
            | Role::SpuriousHigh
            | Role::SpuriousRepeat
            | Role::HemolysedRepeat => true,
        }
    }
}

#[derive(Debug, Clone, Copy)]
pub struct Draw {
    pub at: i64,
    pub encounter: u32,
    /// End of the encounter (or the extract end): repeats must fit before it.
    pub encounter_end: i64,
    pub site: usize,
    pub setting: Setting,
    pub role: Role,
    pub panel: u8,
    pub blood_gas: bool,
    pub planned_potassium: Option<f64>,
    pub planned_glucose: Option<f64>,
    // Assigned by `assign_values`.
    pub potassium: f64,
    pub hemolysis_index: Option<u16>,
    /// Whether the specimen could have been hemolysed (it has an index and carries no planted fact).
    pub hemolysis_eligible: bool,
    pub low_comparator: bool,
}

impl Draw {
    pub fn new(
        at: i64,
        encounter: u32,
        encounter_end: i64,
        site: usize,
        setting: Setting,
        role: Role,
        panel: u8,
    ) -> Draw {
        Draw {
            at,
            encounter,
            encounter_end,
            site,
            setting,
            role,
            panel,
            blood_gas: false,
            planned_potassium: None,
            planned_glucose: None,
            potassium: 0.0,
            hemolysis_index: None,
            hemolysis_eligible: false,
            low_comparator: false,
        }
    }

    pub fn has_potassium(&self) -> bool {
        self.panel & K != 0
    }

    pub fn is_hemolysed(&self) -> bool {
        self.hemolysis_index.is_some_and(|h| h >= HEMOLYSED_INDEX)
    }

    /// Potassium as it will read in the file (one decimal, `>9.0` read as 9.0).
    pub fn reported_potassium(&self) -> f64 {
        (self.potassium.min(POTASSIUM_UPPER_LIMIT) * 10.0).round() / 10.0
    }
}

/// What an episode means for the values of other draws.
#[derive(Debug, Clone, Copy)]
pub struct EpisodeWindow {
    pub onset_at: i64,
    pub peak: f64,
    /// Planned normalisation (or, unobserved, the end).
    pub normalised_at: i64,
    pub rebound: Option<(i64, f64)>,
    pub end_at: i64,
}

impl EpisodeWindow {
    fn contains(&self, t: i64) -> bool {
        t >= self.onset_at && t <= self.end_at
    }

    fn is_quiet(&self, t: i64) -> bool {
        t >= self.onset_at - QUIET_SECONDS && t <= self.end_at + QUIET_SECONDS
    }
}

/// Acute kidney injury: creatinine rises to `peak_factor` × usual at 40% of the duration and
/// falls back by its end.
#[derive(Debug, Clone, Copy)]
pub struct AkiWindow {
    pub start: i64,
    pub end: i64,
    pub peak_factor: f64,
}

impl AkiWindow {
    pub fn factor(&self, t: i64) -> f64 {
        if t < self.start || t >= self.end {
            return 1.0;
        }
        let x = (t - self.start) as f64 / (self.end - self.start) as f64;
        let shape = if x < 0.4 { x / 0.4 } else { (1.0 - x) / 0.6 };
        1.0 + (self.peak_factor - 1.0) * shape
    }
}

/// Counts the truth file takes from a patient's final draws.
#[derive(Debug, Default, Clone)]
pub struct SpecimenCounts {
    pub serum_potassium: u64,
    pub blood_gas_potassium: u64,
    pub with_index: u64,
    pub eligible_with_index: u64,
    pub eligible_hemolysed: u64,
    pub hemolysed: u64,
    pub hemolysed_high: u64,
    pub hemolysed_high_refuted: u64,
    pub spurious_planted: u64,
    pub spurious_refuted: u64,
    pub baseline_n: u64,
    pub baseline_sum: f64,
    pub baseline_sum_squares: f64,
    pub above_upper_limit: u64,
    pub below_lower_limit: u64,
    pub glucose_above_600: u64,
}

/// Gives every potassium draw its value and hemolysis index, plants spurious values and repeats,
/// and sorts the draws. `stop_at` is the earlier of death and the extract end.
pub fn assign_values(
    rng: &mut Rng,
    profile: &Profile,
    hemolysed_share: f64,
    spurious_share: f64,
    episodes: &[EpisodeWindow],
    stop_at: i64,
    draws: &mut Vec<Draw>,
) {
    let n = draws.len();
    for i in 0..n {
        let d = &mut draws[i];
        if !d.has_potassium() {
            continue;
        }
        let window = episodes.iter().find(|e| e.contains(d.at));
        let quiet = episodes.iter().any(|e| e.is_quiet(d.at));
        d.potassium = match (d.planned_potassium, window) {
            (Some(v), _) => v,
            (None, Some(e)) => trajectory(rng, e, d.at, profile),
            (None, None) => {
                // Severe hypokalemia below the reportable range in 1 of 10 000 draws (ours).
                if d.role == Role::Routine && rng.bernoulli(0.0001) {
                    d.low_comparator = true;
                    1.5
                } else {
                    baseline(rng, profile)
                }
            }
        };
        let site = &SITES[d.site];
        if rng.bernoulli(site.hemolysis_index_share) {
            let eligible = !d.role.is_structural() && !d.low_comparator;
            d.hemolysis_eligible = eligible;
            if eligible && rng.bernoulli(hemolysed_share) {
                let index = (100.0 + rng.exponential(1.0 / 150.0)).min(1500.0) as u16;
                let raise = (0.25 + 0.25 * f64::from(index) / 100.0).min(2.5);
                let mut v = d.potassium + raise;
                if quiet && window.is_none() {
                    // Near an episode a hemolysed result stays below 5.5 (capped at a random
                    // 5.0–5.4, so the cap leaves no tell-tale single value).
                    v = v.min(rng.range(5.0, 5.44));
                }
                d.potassium = v;
                d.hemolysis_index = Some(index);
            } else {
                d.hemolysis_index = Some(rng.lognormal(8.0, 0.9).min(99.0) as u16);
            }
        }
        // Spurious single high values: routine inpatient or emergency draws away from episodes,
        // with room for a repeat in the same encounter.
        let d = draws[i];
        if d.role == Role::Routine
            && d.setting != Setting::Outpatient
            && !quiet
            && !d.is_hemolysed()
            && !d.low_comparator
            && rng.bernoulli(spurious_share)
        {
            let repeat_at = d.at + (rng.range(1.0, 4.0) * SECONDS_PER_HOUR as f64) as i64;
            if repeat_at < d.encounter_end && repeat_at < stop_at {
                draws[i].role = Role::SpuriousHigh;
                draws[i].potassium = (rng.range(5.6, 6.8) * 10.0).round() / 10.0;
                draws.push(repeat_draw(rng, &d, repeat_at, Role::SpuriousRepeat));
            }
        } else if d.role != Role::SpuriousHigh
            && window.is_none()
            && d.is_hemolysed()
            && d.reported_potassium() >= 5.5
            && d.setting != Setting::Outpatient
            && rng.bernoulli(0.6)
        {
            let repeat_at = d.at + (rng.range(0.5, 3.0) * SECONDS_PER_HOUR as f64) as i64;
            if repeat_at < d.encounter_end && repeat_at < stop_at {
                draws.push(repeat_draw(rng, &d, repeat_at, Role::HemolysedRepeat));
            }
        }
    }
    draws.sort_by_key(|d| d.at);
    isolate_single_highs(draws, episodes);
}

fn repeat_draw(rng: &mut Rng, of: &Draw, at: i64, role: Role) -> Draw {
    let mut r = Draw::new(
        at,
        of.encounter,
        of.encounter_end,
        of.site,
        of.setting,
        role,
        K,
    );
    r.potassium = (rng.range(3.8, 4.94) * 10.0).round() / 10.0;
    r.planned_potassium = Some(r.potassium);
    if rng.bernoulli(SITES[of.site].hemolysis_index_share) {
        r.hemolysis_index = Some(rng.lognormal(8.0, 0.9).min(99.0) as u16);
    }
    r
}

/// A high value outside episodes must stay a single unconfirmed high: a second high within 6 h
/// would confirm it, so a later one within 7.5 h (6 h plus a margin for the clock change and
/// minute rounding) is capped at 5.4 (only hemolysed results can be affected).
fn isolate_single_highs(draws: &mut [Draw], episodes: &[EpisodeWindow]) {
    let mut last_high: Option<i64> = None;
    for d in draws.iter_mut() {
        if !d.has_potassium()
            || d.reported_potassium() < 5.5
            || episodes.iter().any(|e| e.contains(d.at))
        {
            continue;
        }
        if last_high.is_some_and(|t| d.at - t <= 7 * SECONDS_PER_HOUR + 1800) {
            d.potassium = 5.4;
            if d.role == Role::SpuriousHigh {
                d.role = Role::Routine;
            }
        } else {
            last_high = Some(d.at);
        }
    }
}

fn baseline(rng: &mut Rng, profile: &Profile) -> f64 {
    rng.truncated_normal(4.3 + profile.potassium_offset, 0.312, 2.8, 5.34)
}

/// Value of an unplanned draw inside an episode: falling from the peak towards 5.1 by
/// normalisation, and likewise after a rebound; between normalisation and rebound the usual level.
fn trajectory(rng: &mut Rng, e: &EpisodeWindow, t: i64, profile: &Profile) -> f64 {
    let fall = |rng: &mut Rng, from: i64, to: i64, top: f64| -> f64 {
        let x = ((t - from) as f64 / (to - from).max(1) as f64).clamp(0.0, 1.0);
        (5.1 + (top - 5.1) * (1.0 - x).powf(0.8) * rng.range(0.85, 1.0)).max(5.1)
    };
    if t < e.normalised_at {
        return fall(rng, e.onset_at, e.normalised_at, e.peak);
    }
    match e.rebound {
        Some((at, v)) if t >= at => fall(rng, at, e.end_at, v),
        _ => baseline(rng, profile).min(4.9),
    }
}

/// Counts for truth.json from the final, sorted draws; the same plain reading a test applies
/// to the files (refuted = a serum/plasma result < 5.0 within 6 h after the high one, with
/// times as read back from the local-time files).
pub fn count(
    time: &SiteTime,
    draws: &[Draw],
    episodes: &[EpisodeWindow],
    counts: &mut SpecimenCounts,
) {
    let read = |d: &Draw| {
        let form = if SITES[d.site].collection_seconds {
            TimeForm::Seconds
        } else {
            TimeForm::Minutes
        };
        time.instant_of_local(time.written_local(d.at, form))
    };
    for (i, d) in draws.iter().enumerate() {
        if !d.has_potassium() {
            continue;
        }
        counts.serum_potassium += 1;
        counts.blood_gas_potassium += u64::from(d.blood_gas);
        counts.above_upper_limit += u64::from(d.potassium > POTASSIUM_UPPER_LIMIT);
        counts.below_lower_limit += u64::from(d.low_comparator);
        if let Some(h) = d.hemolysis_index {
            counts.with_index += 1;
            let eligible = d.hemolysis_eligible;
            counts.eligible_with_index += u64::from(eligible);
            let hemolysed = h >= HEMOLYSED_INDEX;
            counts.hemolysed += u64::from(hemolysed);
            counts.eligible_hemolysed += u64::from(eligible && hemolysed);
        }
        let in_episode = episodes.iter().any(|e| e.contains(d.at));
        let v = d.reported_potassium();
        if !in_episode && v >= 5.5 {
            let at = read(d);
            let refuted = draws[i + 1..]
                .iter()
                .take_while(|r| r.at - d.at <= 8 * SECONDS_PER_HOUR)
                .any(|r| {
                    r.has_potassium()
                        && read(r) - at <= 6 * SECONDS_PER_HOUR
                        && r.reported_potassium() < 5.0
                });
            if d.is_hemolysed() {
                counts.hemolysed_high += 1;
                counts.hemolysed_high_refuted += u64::from(refuted);
            } else {
                counts.spurious_planted += u64::from(d.role == Role::SpuriousHigh);
                counts.spurious_refuted += u64::from(refuted);
            }
        }
        if d.role == Role::Routine && !in_episode && !d.is_hemolysed() && !d.low_comparator {
            counts.baseline_n += 1;
            counts.baseline_sum += v;
            counts.baseline_sum_squares += v * v;
        }
    }
}

/// Laboratory rows of the draws, in draw order.
pub fn lab_rows(
    rng: &mut Rng,
    profile: &Profile,
    draws: &[Draw],
    aki: &[AkiWindow],
    extract_end: i64,
    counts: &mut SpecimenCounts,
    rows: &mut Vec<LabRec>,
) {
    for d in draws {
        let site = &SITES[d.site];
        // Turnaround: lognormal, emergency median 40 min, ward 60 min, clinic 4 h (common
        // practice); at least 10 minutes. 3% of results have no release time in the extract.
        let (median, sigma) = match d.setting {
            Setting::Emergency => (40.0, 0.4),
            Setting::Inpatient => (60.0, 0.5),
            Setting::Outpatient => (240.0, 0.5),
        };
        let delay = (rng.lognormal(median * 60.0, sigma) as i64).max(600);
        let resulted = d.at + delay;
        let resulted_at = (resulted < extract_end && !rng.bernoulli(0.03)).then_some(resulted);
        let row = |test: Test, value: Reported, unit_spelling: u8| LabRec {
            encounter: d.encounter,
            site: d.site,
            test,
            value,
            unit_spelling,
            collected_at: d.at,
            resulted_at,
            hemolysis_index: None,
        };
        let aki_factor = aki.iter().map(|w| w.factor(d.at)).fold(1.0, f64::max);
        if d.has_potassium() {
            let mut r = row(
                Test::Potassium,
                potassium_value(d.potassium, d.low_comparator),
                0,
            );
            r.hemolysis_index = d.hemolysis_index;
            rows.push(r);
        }
        if d.panel & SODIUM != 0 {
            rows.push(row(
                Test::Sodium,
                Reported::new(rng.normal(139.0, 2.8), 0),
                0,
            ));
        }
        if d.panel & CHLORIDE != 0 {
            rows.push(row(
                Test::Chloride,
                Reported::new(rng.normal(103.0, 3.0), 0),
                0,
            ));
        }
        if d.panel & BICARBONATE != 0 {
            let mean = if profile.egfr < 30.0 { 22.0 } else { 25.0 };
            rows.push(row(
                Test::Bicarbonate,
                Reported::new(rng.normal(mean, 2.5).clamp(12.0, 38.0), 0),
                0,
            ));
        }
        if d.panel & CREATININE != 0 {
            // Analytic and biological variation CV ≈ 5% (from memory).
            let mg = (profile.creatinine * (0.05 * rng.standard_normal()).exp() * aki_factor)
                .clamp(0.1, 20.0);
            let (value, spelling) = match site.creatinine {
                CreatinineReporting::MassPerVolume => (Reported::new(mg, 2), 0),
                CreatinineReporting::MolesPerVolume => {
                    (Reported::new(mg * 88.4, 0), u8::from(rng.bernoulli(0.2)))
                }
            };
            rows.push(row(Test::Creatinine, value, spelling));
        }
        if d.panel & UREA != 0 {
            let egfr = profile.egfr / aki_factor;
            let bun = ((7.0 + 500.0 / egfr) * rng.lognormal(1.0, 0.2)).clamp(3.0, 200.0);
            rows.push(row(Test::UreaNitrogen, Reported::new(bun, 0), 0));
        }
        if d.panel & GLUCOSE != 0 {
            let value = match d.planned_glucose {
                Some(g) => Reported::new(g, 0),
                None if profile.diabetes
                    && d.setting != Setting::Outpatient
                    && rng.bernoulli(0.002) =>
                {
                    counts.glucose_above_600 += 1;
                    Reported::with_comparator(600.0, 0, ">")
                }
                None => Reported::new(glucose(rng, profile.diabetes), 0),
            };
            rows.push(row(Test::Glucose, value, 0));
        }
        if d.panel & CK != 0 {
            let ck = if rng.bernoulli(0.01) {
                rng.range(2000.0, 40_000.0)
            } else {
                rng.lognormal(110.0, 0.6).clamp(20.0, 5000.0)
            };
            rows.push(row(Test::CreatineKinase, Reported::new(ck, 0), 0));
        }
        if d.blood_gas && d.has_potassium() {
            // Whole-blood potassium on the blood gas analyser reads 0.1–0.3 lower (domain
            // reference §1.2); resulted within minutes; no hemolysis index.
            let v = (d.potassium - rng.range(0.1, 0.3)).max(1.5);
            let mut r = row(
                Test::PotassiumBloodGas,
                potassium_value(v, d.low_comparator),
                0,
            );
            let gas_result = d.at + rng.int_between(300, 900);
            r.resulted_at = (gas_result < extract_end).then_some(gas_result);
            rows.push(r);
        }
    }
}

fn potassium_value(v: f64, low: bool) -> Reported {
    if low {
        Reported::with_comparator(1.5, 1, "<")
    } else if v > POTASSIUM_UPPER_LIMIT {
        Reported::with_comparator(POTASSIUM_UPPER_LIMIT, 1, ">")
    } else {
        Reported::new(v, 1)
    }
}

/// Glucose mg/dL outside planted checks: lognormal, median 97 (σ 0.12) without diabetes, 150
/// (σ 0.3) with, kept within 72–590 so that no value below 70 exists outside the planted
/// post-insulin checks (no other hypoglycemia is modelled).
fn glucose(rng: &mut Rng, diabetes: bool) -> f64 {
    let (median, sigma) = if diabetes { (150.0, 0.3) } else { (97.0, 0.12) };
    for _ in 0..16 {
        let g = rng.lognormal(median, sigma);
        if (72.0..=590.0).contains(&g) {
            return g;
        }
    }
    median
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn aki_factor_shape() {
        let w = AkiWindow {
            start: 0,
            end: 1000,
            peak_factor: 2.0,
        };
        assert_eq!(w.factor(-1), 1.0);
        assert!((w.factor(400) - 2.0).abs() < 1e-12);
        assert!((w.factor(700) - 1.5).abs() < 1e-12);
        assert_eq!(w.factor(1000), 1.0);
    }

    #[test]
    fn potassium_comparators() {
        assert_eq!(
            potassium_value(9.4, false),
            Reported::with_comparator(9.0, 1, ">")
        );
        assert_eq!(potassium_value(9.0, false), Reported::new(9.0, 1));
        assert_eq!(
            potassium_value(3.0, true),
            Reported::with_comparator(1.5, 1, "<")
        );
    }
}
