//! Who a patient is: sex, age, chronic conditions, kidney function, home site and how often they
//! use care. All prevalences are from memory of hospital populations in Europe (said once here
//! rather than beside each number); what matters for the planted truths is only that they are
//! recorded, not that they match a particular country.

use crate::hazard::Factor;
use crate::kidney;
use crate::network::SITES;
use crate::random::Rng;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sex {
    Female,
    Male,
    Unknown,
}

impl Sex {
    pub fn code(self) -> &'static str {
        match self {
            Sex::Female => "F",
            Sex::Male => "M",
            Sex::Unknown => "U",
        }
    }
}

/// Age bands of truth.json (years at the period start).
pub const AGE_BANDS: [(&str, f64, f64); 6] = [
    ("18-29", 18.0, 30.0),
    ("30-44", 30.0, 45.0),
    ("45-59", 45.0, 60.0),
    ("60-74", 60.0, 75.0),
    ("75-89", 75.0, 90.0),
    ("90+", 90.0, 103.0),
];

/// Weights of the age bands: a hospital population is older than the general one; adults only
/// (the network's extract covers adult services, 18 and over at the period start).
const AGE_WEIGHTS: [f64; 6] = [0.12, 0.15, 0.22, 0.26, 0.21, 0.04];

#[derive(Debug, Clone)]
pub struct Profile {
    pub sex: Sex,
    /// Sex used in the CKD-EPI equation (for sex `U`, drawn 50:50 and never written).
    pub female: bool,
    pub birth_year: i32,
    /// Age in years at the period start.
    pub age: f64,
    pub age_band: usize,
    pub hypertension: bool,
    pub diabetes: bool,
    pub heart_failure: bool,
    pub lung_disease: bool,
    /// E27.1 primary adrenal insufficiency or E27.40 hypoaldosteronism (rare).
    pub adrenal: Option<&'static str>,
    /// The patient's usual eGFR (CKD-EPI 2021 of `creatinine`).
    pub egfr: f64,
    /// Usual serum creatinine, mg/dL; measured values scatter around it.
    pub creatinine: f64,
    /// Patient's own offset of usual potassium from the population mean, mmol/L.
    pub potassium_offset: f64,
    pub home_site: usize,
    /// Per year: unplanned admissions, elective admissions, emergency visits without admission,
    /// outpatient visits.
    pub unplanned_admissions_per_year: f64,
    pub elective_admissions_per_year: f64,
    pub emergency_visits_per_year: f64,
    pub outpatient_visits_per_year: f64,
    /// Background mortality per year (other causes than planted hyperkalemia deaths).
    pub deaths_per_year: f64,
    /// Probability that a hospital stay ends in death.
    pub stay_death_probability: f64,
}

impl Profile {
    pub fn draw(rng: &mut Rng, first_year: i32) -> Profile {
        let sex = match rng.categorical(&[0.51, 0.488, 0.002]) {
            0 => Sex::Female,
            1 => Sex::Male,
            _ => Sex::Unknown,
        };
        let female = match sex {
            Sex::Female => true,
            Sex::Male => false,
            Sex::Unknown => rng.bernoulli(0.5),
        };
        let age_band = rng.categorical(&AGE_WEIGHTS);
        let (_, low, high) = AGE_BANDS[age_band];
        let age = rng.range(low, high);
        let birth_year = (f64::from(first_year) - age).floor() as i32;

        // Prevalence by age: below 45, 45–59, 60–74, 75 and over.
        let by_age = |p: [f64; 4]| -> f64 {
            match age {
                a if a < 45.0 => p[0],
                a if a < 60.0 => p[1],
                a if a < 75.0 => p[2],
                _ => p[3],
            }
        };
        let hypertension = rng.bernoulli(by_age([0.10, 0.32, 0.55, 0.70]));
        let diabetes = rng.bernoulli(by_age([0.04, 0.12, 0.20, 0.22]));
        let heart_failure = rng.bernoulli(by_age([0.005, 0.025, 0.07, 0.14]));
        let lung_disease = rng.bernoulli(0.07);
        let adrenal = match rng.uniform() {
            u if u < 0.0008 => Some("E27.1"),
            u if u < 0.0020 => Some("E27.40"),
            _ => None,
        };

        // Kidney function: chronic kidney disease with an age-, diabetes- and heart-failure-
        // dependent probability, its GFR category drawn G3a 50%, G3b 28%, G4 15%, G5 7%;
        // otherwise an eGFR falling about 0.8 per year of age after 30.
        let mut ckd = by_age([0.03, 0.08, 0.20, 0.38]);
        if diabetes {
            ckd *= 1.6;
        }
        if heart_failure {
            ckd *= 1.5;
        }
        let egfr = if rng.bernoulli(ckd.min(0.8)) {
            let (lo, hi) = [(45.0, 60.0), (30.0, 45.0), (15.0, 30.0), (8.0, 15.0)]
                [rng.categorical(&[0.50, 0.28, 0.15, 0.07])];
            rng.range(lo, hi)
        } else {
            let typical = 118.0 - 0.8 * (age - 30.0).max(0.0);
            (typical * rng.lognormal(1.0, 0.10)).clamp(60.5, 135.0)
        };
        let creatinine = kidney::creatinine_for_egfr(egfr, age, female);

        // Patient-level offset of usual potassium: SD 0.25; with the draw-to-draw SD of 0.312 in
        // the specimen model the population SD of a single result is √(0.25² + 0.312²) = 0.40.
        let potassium_offset = rng.normal(0.0, 0.25);
        let home_site = rng.categorical(&[
            SITES[0].patient_share,
            SITES[1].patient_share,
            SITES[2].patient_share,
        ]);

        // Care use: a frailty multiplier (lognormal, median 1, σ 0.6) times condition factors.
        let frailty = rng.lognormal(1.0, 0.6);
        let mut admissions = 0.13 * frailty;
        if age >= 75.0 {
            admissions *= 1.4;
        }
        if egfr < 45.0 {
            admissions *= 1.8;
        }
        if heart_failure {
            admissions *= 1.8;
        }
        if diabetes {
            admissions *= 1.3;
        }
        let mut outpatient = 0.8 + if egfr < 60.0 { 1.5 } else { 0.0 };
        outpatient += if diabetes { 1.0 } else { 0.0 } + if heart_failure { 1.0 } else { 0.0 };
        outpatient *= frailty.sqrt();

        let mut deaths = by_age([0.002, 0.006, 0.02, 0.06]);
        if age >= 90.0 {
            deaths = 0.18;
        }
        if egfr < 45.0 {
            deaths *= 1.5;
        }
        if heart_failure {
            deaths *= 1.5;
        }
        let stay_death_probability = if age >= 75.0 { 0.05 } else { 0.015 };

        Profile {
            sex,
            female,
            birth_year,
            age,
            age_band,
            hypertension,
            diabetes,
            heart_failure,
            lung_disease,
            adrenal,
            egfr,
            creatinine,
            potassium_offset,
            home_site,
            unplanned_admissions_per_year: admissions,
            elective_admissions_per_year: 0.04,
            emergency_visits_per_year: 0.18 * frailty,
            outpatient_visits_per_year: outpatient,
            deaths_per_year: deaths,
            stay_death_probability,
        }
    }

    /// Hazard factors that hold for the whole period.
    pub fn static_mask(&self) -> u32 {
        let mut mask = 0;
        if self.egfr < 45.0 {
            mask |= Factor::EgfrBelow45.bit();
        }
        if self.diabetes {
            mask |= Factor::Diabetes.bit();
        }
        if self.adrenal.is_some() {
            mask |= Factor::AdrenalInsufficiency.bit();
        }
        mask
    }

    /// ICD-10 code of the patient's CKD stage, if any (N18.31 3a, N18.32 3b, N18.4, N18.5).
    pub fn ckd_code(&self) -> Option<&'static str> {
        match kcohort_model::kidney::kdigo_gfr_category(self.egfr).unwrap_or("G5") {
            "G3a" => Some("N18.31"),
            "G3b" => Some("N18.32"),
            "G4" => Some("N18.4"),
            "G5" => Some("N18.5"),
            _ => None,
        }
    }

    pub fn diabetes_code(&self) -> &'static str {
        if self.egfr < 60.0 { "E11.22" } else { "E11.9" }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn creatinine_reproduces_the_drawn_egfr() {
        let mut rng = Rng::seeded(5);
        for _ in 0..2000 {
            let p = Profile::draw(&mut rng, 2024);
            let e = kidney::egfr_ckd_epi_2021(p.creatinine, p.age, p.female);
            assert!((e - p.egfr).abs() < 1e-6);
            assert!(p.age >= 18.0 && p.birth_year <= 2024 - 18 && p.birth_year >= 1900);
            assert!(p.creatinine > 0.05 && p.creatinine < 40.0);
        }
    }
}
