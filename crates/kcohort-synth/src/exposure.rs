//! Outpatient drug exposure: which chronic drugs a patient takes, when each course starts and
//! stops, the dispensings that record it, and the resulting exposure eras.
//!
//! Exposure in the planted model is the era of a course: from its first dispensing to the end of
//! the last dispensing's supply, refills up to 12 days late bridged (refills come at 85–100% of
//! the supply, or 1–9 days late, so every refill of a course is bridged). A stopped course
//! leaves a gap of at least 180 days before any restart, so eras form and end clearly. Home
//! medicines continue during hospital stays and are not recorded again as administrations.

use crate::formulary::{self, Drug};
use crate::hazard::Factor;
use crate::profile::Profile;
use crate::random::Rng;
use crate::site_time::{SECONDS_PER_DAY, SiteTime};

/// Refill gap (days) still counted as continuous exposure.
pub const BRIDGED_GAP_DAYS: i64 = 12;

#[derive(Debug, Clone, Copy)]
pub struct Dispensing {
    pub at: i64,
    pub drug: &'static Drug,
    pub days_supply: u16,
}

/// Drug classes whose initiators truth.json counts (the new-user comparisons).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Tracked {
    Raas = 0,
    Ccb = 1,
    Mra = 2,
}

/// First use of a tracked class in the extract.
#[derive(Debug, Clone, Copy, Default)]
pub struct FirstUse {
    pub at: Option<i64>,
    /// The course started during the period (a planted new user), rather than continuing from
    /// before it.
    pub initiated: bool,
}

#[derive(Debug, Default)]
pub struct OutpatientDrugs {
    pub dispensings: Vec<Dispensing>,
    /// (from, mask of outpatient drug factors), sorted; the mask holds until the next point.
    pub timeline: Vec<(i64, u32)>,
    pub first_use: [FirstUse; 3],
    /// (time, +1/−1 · factor index + 1) edges while building, reused between patients.
    edges: Vec<(i64, i32)>,
}

impl OutpatientDrugs {
    pub fn clear(&mut self) {
        self.dispensings.clear();
        self.timeline.clear();
        self.first_use = [FirstUse::default(); 3];
        self.edges.clear();
    }

    /// Outpatient factors active at `t`.
    pub fn mask_at(&self, t: i64) -> u32 {
        let i = self.timeline.partition_point(|p| p.0 <= t);
        if i == 0 { 0 } else { self.timeline[i - 1].1 }
    }

    /// Times in (a, b) at which the outpatient mask may change.
    pub fn change_points(&self, a: i64, b: i64, out: &mut Vec<i64>) {
        let i = self.timeline.partition_point(|p| p.0 <= a);
        for p in &self.timeline[i..] {
            if p.0 >= b {
                break;
            }
            out.push(p.0);
        }
    }

    /// Draws the patient's courses over [start, end) and builds dispensings and eras.
    pub fn plan(
        &mut self,
        profile: &Profile,
        rng: &mut Rng,
        time: &SiteTime,
        start: i64,
        end: i64,
    ) {
        self.clear();
        let mut plan = Planner {
            out: self,
            rng,
            time,
            start,
            end,
            supply: 0,
        };
        // Patient's habitual supply: 90 days (60%) or 30 days (40%) (common practice).
        plan.supply = if plan.rng.bernoulli(0.6) { 90 } else { 30 };
        let p = profile;

        // RAAS inhibitors: hypertension, heart failure, diabetic kidney disease or CKD.
        if p.hypertension || p.heart_failure || p.egfr < 45.0 || (p.diabetes && p.egfr < 60.0) {
            let prevalent = if p.heart_failure {
                0.7
            } else if p.diabetes {
                0.55
            } else {
                0.5
            };
            let rate = if p.heart_failure { 0.20 } else { 0.10 };
            let drug = if p.heart_failure && plan.rng.bernoulli(0.2) {
                &formulary::SACUBITRIL_VALSARTAN
            } else if plan.rng.bernoulli(0.55) {
                plan.rng.pick(formulary::ACE_INHIBITORS)
            } else {
                plan.rng.pick(formulary::ARBS)
            };
            plan.chronic(
                drug,
                prevalent,
                rate,
                0.25,
                Some(Factor::RaasInhibitor),
                Some(Tracked::Raas),
            );
        }
        // Dihydropyridine calcium-channel blockers: hypertension.
        if p.hypertension {
            // Amlodipine is by far the most used (from memory): 70%, the others 15% each.
            let drug =
                &formulary::CALCIUM_CHANNEL_BLOCKERS[plan.rng.categorical(&[0.7, 0.15, 0.15])];
            plan.chronic(
                drug,
                0.28,
                0.07,
                0.25,
                Some(Factor::CalciumChannelBlocker),
                Some(Tracked::Ccb),
            );
        }
        // MRAs: heart failure; a few resistant hypertensives.
        let (mra_prevalent, mra_rate) = if p.heart_failure {
            (0.30, 0.15)
        } else if p.hypertension && p.age >= 55.0 {
            (0.02, 0.008)
        } else {
            (0.0, 0.0)
        };
        if mra_rate > 0.0 {
            let drug = if plan.rng.bernoulli(0.8) {
                &formulary::MRAS[0]
            } else {
                &formulary::MRAS[1]
            };
            plan.chronic(
                drug,
                mra_prevalent,
                mra_rate,
                0.35,
                Some(Factor::Mra),
                Some(Tracked::Mra),
            );
        }
        // Beta-blockers: heart failure, hypertension, arrhythmia.
        let (bb_prevalent, bb_rate) = if p.heart_failure {
            (0.70, 0.15)
        } else if p.hypertension {
            (0.15, 0.02)
        } else {
            (0.03, 0.005)
        };
        let drug = if p.heart_failure {
            &formulary::BETA_BLOCKERS[0]
        } else {
            plan.rng.pick(formulary::BETA_BLOCKERS)
        };
        plan.chronic(
            drug,
            bb_prevalent,
            bb_rate,
            0.2,
            Some(Factor::BetaBlocker),
            None,
        );
        // Loop diuretics (no planted effect): heart failure, advanced CKD.
        let loop_prevalent = if p.heart_failure {
            0.6
        } else if p.egfr < 30.0 {
            0.3
        } else {
            0.01
        };
        let on_loop = plan.rng.bernoulli(loop_prevalent);
        if on_loop {
            let drug = plan.rng.pick(formulary::LOOP_DIURETICS);
            plan.chronic(drug, 1.0, 0.0, 0.2, None, None);
        }
        if p.hypertension {
            plan.chronic(
                &formulary::AMILORIDE,
                0.015,
                0.0,
                0.2,
                Some(Factor::PotassiumSparingDiuretic),
                None,
            );
        }
        let k_prevalent = if on_loop { 0.15 } else { 0.004 };
        plan.chronic(
            &formulary::POTASSIUM_CHLORIDE_ORAL,
            k_prevalent,
            0.0,
            0.4,
            Some(Factor::PotassiumSupplementOral),
            None,
        );
        if p.diabetes {
            if p.egfr >= 30.0 {
                plan.chronic(&formulary::METFORMIN, 0.6, 0.05, 0.1, None, None);
            }
            plan.chronic(&formulary::INSULIN_GLARGINE, 0.25, 0.04, 0.05, None, None);
        }
        if p.lung_disease {
            plan.chronic(&formulary::SALBUTAMOL_INHALER, 0.7, 0.0, 0.2, None, None);
        }
        // Short courses: NSAIDs (fewer in CKD) and trimethoprim (urinary infections, more in
        // women), each one dispensing.
        let nsaid_rate = if p.egfr < 45.0 { 0.08 } else { 0.22 };
        plan.courses(
            nsaid_rate,
            |rng| (rng.pick(formulary::NSAIDS), *rng.pick(&[10u16, 14, 30])),
            Factor::Nsaid,
        );
        let tmp_rate = if p.female { 0.16 } else { 0.08 };
        plan.courses(
            tmp_rate,
            |rng| {
                if rng.bernoulli(0.7) {
                    (&formulary::TRIMETHOPRIM, *rng.pick(&[3u16, 7]))
                } else {
                    (&formulary::CO_TRIMOXAZOLE, *rng.pick(&[7u16, 10, 14]))
                }
            },
            Factor::Trimethoprim,
        );

        self.dispensings.sort_by_key(|d| d.at);
        self.build_timeline();
    }

    fn build_timeline(&mut self) {
        self.edges.sort_unstable();
        let mut counts = [0i32; 14];
        let mut mask = 0u32;
        let mut i = 0;
        while i < self.edges.len() {
            let t = self.edges[i].0;
            while i < self.edges.len() && self.edges[i].0 == t {
                let e = self.edges[i].1;
                let f = (e.unsigned_abs() - 1) as usize;
                counts[f] += e.signum();
                i += 1;
            }
            let mut new_mask = 0u32;
            for (f, c) in counts.iter().enumerate() {
                if *c > 0 {
                    new_mask |= 1 << f;
                }
            }
            if new_mask != mask || self.timeline.is_empty() {
                self.timeline.push((t, new_mask));
                mask = new_mask;
            }
        }
    }
}

struct Planner<'a> {
    out: &'a mut OutpatientDrugs,
    rng: &'a mut Rng,
    time: &'a SiteTime,
    start: i64,
    end: i64,
    supply: u16,
}

impl Planner<'_> {
    /// A dispensing time on the local date of `t`, in pharmacy hours 09:00–18:00.
    fn pharmacy_time(&mut self, t: i64) -> i64 {
        let local_day = self.time.local(t).div_euclid(SECONDS_PER_DAY);
        let seconds = self.rng.int_between(9 * 3600, 18 * 3600);
        self.time
            .instant_of_local(local_day * SECONDS_PER_DAY + seconds)
    }

    fn era(&mut self, factor: Option<Factor>, from: i64, to: i64) {
        if let Some(f) = factor {
            let code = f.index() as i32 + 1;
            self.out.edges.push((from, code));
            self.out.edges.push((to, -code));
        }
    }

    /// A chronic course: taken from the period start with probability `prevalent`, otherwise
    /// started at rate `start_per_year`; stopped at `stop_per_year`, restarted after a stop with
    /// probability 0.3 after 180–400 days.
    fn chronic(
        &mut self,
        drug: &'static Drug,
        prevalent: f64,
        start_per_year: f64,
        stop_per_year: f64,
        factor: Option<Factor>,
        tracked: Option<Tracked>,
    ) {
        let day = SECONDS_PER_DAY as f64;
        let is_prevalent = self.rng.bernoulli(prevalent);
        let mut t = if is_prevalent {
            self.start + (self.rng.range(0.0, 40.0_f64.min(f64::from(self.supply))) * day) as i64
        } else if start_per_year > 0.0 {
            self.start + (self.rng.exponential(start_per_year) * 365.25 * day) as i64
        } else {
            return;
        };
        if t >= self.end {
            return;
        }
        if let Some(tr) = tracked {
            self.out.first_use[tr as usize] = FirstUse {
                at: None,
                initiated: !is_prevalent,
            };
        }
        let supply = self.supply;
        let supply_seconds = i64::from(supply) * SECONDS_PER_DAY;
        let mut era: Option<(i64, i64)> = None;
        loop {
            let at = self.pharmacy_time(t);
            if at >= self.end {
                break;
            }
            self.out.dispensings.push(Dispensing {
                at,
                drug,
                days_supply: supply,
            });
            if let Some(tr) = tracked {
                let first = &mut self.out.first_use[tr as usize];
                if first.at.is_none() {
                    first.at = Some(at);
                }
            }
            era = match era {
                Some((s, e)) if at <= e + BRIDGED_GAP_DAYS * SECONDS_PER_DAY => {
                    Some((s, e.max(at + supply_seconds)))
                }
                Some((s, e)) => {
                    self.era(factor, s, e);
                    Some((at, at + supply_seconds))
                }
                None => Some((at, at + supply_seconds)),
            };
            let p_stop = 1.0 - (-stop_per_year * f64::from(supply) / 365.25).exp();
            if self.rng.bernoulli(p_stop) {
                if self.rng.bernoulli(0.3) {
                    t = at + supply_seconds + (self.rng.range(180.0, 400.0) * day) as i64;
                    continue;
                }
                break;
            }
            t = if self.rng.bernoulli(0.75) {
                at + (self.rng.range(0.85, 1.0) * supply_seconds as f64) as i64
            } else {
                at + supply_seconds + (self.rng.range(1.0, 9.0) * day) as i64
            };
        }
        if let Some((s, e)) = era {
            self.era(factor, s, e);
        }
    }

    /// Short courses at `per_year`, one dispensing each.
    fn courses(
        &mut self,
        per_year: f64,
        mut choose: impl FnMut(&mut Rng) -> (&'static Drug, u16),
        factor: Factor,
    ) {
        let day = SECONDS_PER_DAY as f64;
        let mut t = self.start;
        loop {
            t += (self.rng.exponential(per_year) * 365.25 * day) as i64;
            if t >= self.end {
                break;
            }
            let (drug, supply) = choose(self.rng);
            let at = self.pharmacy_time(t);
            if at >= self.end {
                break;
            }
            self.out.dispensings.push(Dispensing {
                at,
                drug,
                days_supply: supply,
            });
            self.era(Some(factor), at, at + i64::from(supply) * SECONDS_PER_DAY);
            t = at + i64::from(supply) * SECONDS_PER_DAY;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::site_time::days_from_civil;

    #[test]
    fn timeline_masks_follow_the_eras_and_refills_are_bridged() {
        let start = days_from_civil(2024, 1, 1) * SECONDS_PER_DAY;
        let end = days_from_civil(2026, 1, 5) * SECONDS_PER_DAY;
        let time = SiteTime::new("Europe/Vienna", start, end).unwrap();
        let mut rng = Rng::seeded(11);
        let mut drugs = OutpatientDrugs::default();
        let mut with_raas = 0;
        for _ in 0..500 {
            let profile = Profile::draw(&mut rng, 2024);
            drugs.plan(&profile, &mut rng, &time, start, end);
            let raas: Vec<&Dispensing> = drugs
                .dispensings
                .iter()
                .filter(|d| {
                    matches!(
                        d.drug.class,
                        crate::formulary::DrugClass::AceInhibitor
                            | crate::formulary::DrugClass::AngiotensinReceptorBlocker
                            | crate::formulary::DrugClass::NeprilysinArb
                    )
                })
                .collect();
            if raas.is_empty() {
                continue;
            }
            with_raas += 1;
            // During every dispensing's supply the RAAS bit is set; gaps between refills of at
            // most the bridged gap are exposed too.
            for w in raas.windows(2) {
                let supply_end = w[0].at + i64::from(w[0].days_supply) * SECONDS_PER_DAY;
                let gap = w[1].at - supply_end;
                let mid = w[0].at + (supply_end - w[0].at) / 2;
                assert!(Factor::RaasInhibitor.is_active(drugs.mask_at(mid)));
                if gap > 0 && gap <= BRIDGED_GAP_DAYS * SECONDS_PER_DAY {
                    assert!(Factor::RaasInhibitor.is_active(drugs.mask_at(supply_end + gap / 2)));
                } else if gap > BRIDGED_GAP_DAYS * SECONDS_PER_DAY {
                    assert!(gap > 150 * SECONDS_PER_DAY, "stops leave long gaps");
                    assert!(!Factor::RaasInhibitor.is_active(drugs.mask_at(supply_end + gap / 2)));
                }
            }
            let last = raas.last().unwrap();
            let last_end = last.at + i64::from(last.days_supply) * SECONDS_PER_DAY;
            assert!(
                !Factor::RaasInhibitor.is_active(drugs.mask_at(last_end + 1)) || last_end >= end
            );
            let first = drugs.first_use[Tracked::Raas as usize];
            assert_eq!(first.at, Some(raas[0].at));
            assert!(!Factor::RaasInhibitor.is_active(drugs.mask_at(raas[0].at - 1)));
        }
        assert!(with_raas > 50, "{with_raas}");
    }
}
