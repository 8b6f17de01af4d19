//! One patient's two years: care contacts (outpatient visits, emergency visits, admissions with
//! transfers), the planted hazard of true high-potassium episodes over the time at risk, the
//! episodes themselves, deaths, and every draw, drug and diagnosis that results.
//!
//! Time at risk: outside hospital (community) and in hospital from 49 h after admission
//! (hospital-acquired; one hour beyond the 48 h of the reading, so that no onset sits on its
//! edge), never in the emergency department or the first 49 h of a stay, never in
//! a stay that began with a present-on-admission episode, and never from an onset until 7.5 days
//! after the episode ended (so a new episode always follows the previous one by more than the
//! 7-day gap of the domain reference §1.4). A community onset brings the patient to the emergency
//! department (present on admission); mild ones mostly go home, the others are admitted.

use crate::episode::{self, DrawRole, EpisodePlan, Severity};
use crate::exposure::OutpatientDrugs;
use crate::formulary::{self, DrugClass};
use crate::hazard::Factor;
use crate::network::{SITES, UNITS, UnitKind, unit_for, units_of};
use crate::profile::Profile;
use crate::random::Rng;
use crate::record::{
    DiagRec, DischargeStatus, EncounterClass, EncounterRec, LabRec, MedKind, MedRec, NO_ENCOUNTER,
};
use crate::scenario::Scenario;
use crate::site_time::TimeForm;
use crate::specimen::{
    self, AkiWindow, BASIC, CK, Draw, EXTENDED, EpisodeWindow, GLUCOSE, K, Role, Setting,
    SpecimenCounts,
};
use crate::truth::{Tally, TimeSetting};

const MINUTE: i64 = 60;
const HOUR: i64 = 3600;
const DAY: i64 = 86_400;
/// Hours after admission from which a stay is at risk of a hospital-acquired onset.
pub const HOSPITAL_AT_RISK_FROM_HOURS: i64 = 49;
/// After an episode ends, the patient is not at risk for this long.
const AT_RISK_GAP: i64 = 7 * DAY + 12 * HOUR;

/// Encounter boundaries are whole minutes, as the encounters table writes them, so that a row
/// inside an encounter in seconds is also inside it as written.
fn ceil_minute(t: i64) -> i64 {
    t + (60 - t.rem_euclid(60)) % 60
}

/// What truth.json needs about a planted episode after the patient is finished.
#[derive(Debug, Clone, Copy)]
pub struct EpisodeFacts {
    pub onset_at: i64,
    pub severity: Severity,
}

/// Reusable buffers of one patient's output (cleared between patients).
#[derive(Debug, Default)]
pub struct PatientRows {
    pub encounters: Vec<EncounterRec>,
    pub draws: Vec<Draw>,
    pub labs: Vec<LabRec>,
    pub meds: Vec<MedRec>,
    pub diags: Vec<DiagRec>,
    pub windows: Vec<EpisodeWindow>,
    pub episodes: Vec<EpisodeFacts>,
    pub aki: Vec<AkiWindow>,
    pub drugs: OutpatientDrugs,
    pub death_at: Option<i64>,
    pub profile: Option<Profile>,
    breaks: Vec<i64>,
}

impl PatientRows {
    fn clear(&mut self) {
        self.encounters.clear();
        self.draws.clear();
        self.labs.clear();
        self.meds.clear();
        self.diags.clear();
        self.windows.clear();
        self.episodes.clear();
        self.aki.clear();
        self.death_at = None;
        self.profile = None;
        self.breaks.clear();
    }
}

/// The current stay while it is simulated.
#[derive(Debug, Default)]
struct Stay {
    admit: i64,
    /// (from, unit, encounter index), in time order.
    segments: Vec<(i64, usize, u32)>,
    /// Inpatient drug exposures (from, to, factor bit).
    windows: Vec<(i64, i64, u32)>,
    aki: Option<AkiWindow>,
    plans: Vec<EpisodePlan>,
    heparin_from: Option<i64>,
    /// Potassium chloride infusions (start, end).
    kcl: Vec<(i64, i64)>,
    /// Co-trimoxazole doses and the drug (oral or IV).
    cotrimoxazole: Vec<i64>,
    cotrimoxazole_drug: Option<&'static formulary::Drug>,
}

impl Stay {
    fn segment_at(&self, t: i64) -> (usize, u32) {
        let i = self.segments.partition_point(|s| s.0 <= t).max(1);
        let s = self.segments[i - 1];
        (s.1, s.2)
    }

    fn segment_end(&self, t: i64, stay_end: i64) -> i64 {
        let i = self.segments.partition_point(|s| s.0 <= t);
        self.segments.get(i).map_or(stay_end, |s| s.0)
    }

    fn mask_at(&self, t: i64) -> u32 {
        let mut mask = 0;
        for (a, b, bit) in &self.windows {
            if t >= *a && t < *b {
                mask |= bit;
            }
        }
        if let Some(w) = &self.aki
            && t >= w.start
            && t < w.end
        {
            mask |= Factor::AcuteKidneyInjury.bit();
        }
        mask
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum StayKind {
    Unplanned,
    Elective,
    Hyperkalemia,
}

/// Simulates one patient (with its own random stream) into `rows` and adds its facts to `tally`.
pub fn simulate(sc: &Scenario, rng: Rng, rows: &mut PatientRows, tally: &mut Tally) {
    rows.clear();
    let mut rng = rng;
    let profile = Profile::draw(&mut rng, sc.first_year);
    rows.drugs.plan(
        &profile,
        &mut rng,
        &sc.time,
        sc.period_start,
        sc.extract_end,
    );
    let death_bg =
        sc.period_start + (rng.exponential(profile.deaths_per_year) * 365.25 * DAY as f64) as i64;
    let mut sim = Sim {
        sc,
        static_mask: profile.static_mask(),
        p: profile,
        rng,
        rows,
        tally,
        restart_at: sc.period_start,
        death_bg,
        exact_death: None,
        stay: Stay::default(),
    };
    sim.run();
    sim.finish();
}

struct Sim<'a> {
    sc: &'a Scenario,
    rng: Rng,
    p: Profile,
    rows: &'a mut PatientRows,
    tally: &'a mut Tally,
    static_mask: u32,
    /// Not at risk before this instant.
    restart_at: i64,
    /// Death from other causes: happens at this time or, if in care then, at the contact's end.
    death_bg: i64,
    /// Planted death after a severe episode, at exactly this time.
    exact_death: Option<i64>,
    stay: Stay,
}

impl Sim<'_> {
    fn hours(&mut self, low: f64, high: f64) -> i64 {
        (self.rng.range(low, high) * HOUR as f64) as i64
    }

    fn next_death(&self) -> i64 {
        self.exact_death
            .map_or(self.death_bg, |d| d.min(self.death_bg))
    }

    fn died(&self) -> bool {
        self.rows.death_at.is_some()
    }

    fn run(&mut self) {
        let sc = self.sc;
        let per_second = |per_year: f64| per_year / (365.25 * DAY as f64);
        let mut t = sc.period_start;
        while t < sc.extract_end && !self.died() {
            let adm = t + self
                .rng
                .exponential(per_second(self.p.unplanned_admissions_per_year))
                as i64;
            let ele = t + self
                .rng
                .exponential(per_second(self.p.elective_admissions_per_year))
                as i64;
            let ed = t + self
                .rng
                .exponential(per_second(self.p.emergency_visits_per_year))
                as i64;
            let opd = t + self
                .rng
                .exponential(per_second(self.p.outpatient_visits_per_year))
                as i64;
            let contact = adm.min(ele).min(ed).min(opd);
            // A death that fell inside the last contact happens right after it.
            let death = self.next_death().max(t);
            let horizon = contact.min(death).min(sc.extract_end);
            if let Some((tau, mask)) =
                self.community_onset(t.max(self.restart_at), horizon.min(sc.risk_end))
            {
                t = self.community_episode(tau, mask);
                continue;
            }
            if horizon >= sc.extract_end {
                break;
            }
            if horizon == death {
                self.rows.death_at = Some(death);
                break;
            }
            t = if contact == adm {
                self.unplanned_admission(adm)
            } else if contact == ele {
                self.elective_admission(ele)
            } else if contact == ed {
                self.emergency_visit(ed)
            } else {
                self.outpatient_visit(opd)
            };
        }
        if self.rows.encounters.is_empty() {
            self.fallback_visit();
        }
    }

    // ---- hazard -------------------------------------------------------------------------

    /// Samples a community onset in [a, b).
    fn community_onset(&mut self, a: i64, b: i64) -> Option<(i64, u32)> {
        if a >= b {
            return None;
        }
        let mut breaks = std::mem::take(&mut self.rows.breaks);
        breaks.clear();
        self.rows.drugs.change_points(a, b, &mut breaks);
        breaks.push(b);
        let mut s = a;
        let mut result = None;
        for &e in &breaks {
            if e <= s {
                continue;
            }
            let mask = self.static_mask | self.rows.drugs.mask_at(s);
            let rate = self.sc.hazard.community_per_day * self.sc.hazard.ratio(mask);
            let span = (e - s) as f64 / DAY as f64;
            let wait = if rate > 0.0 {
                self.rng.exponential(rate)
            } else {
                f64::INFINITY
            };
            if wait < span {
                self.tally
                    .at_risk(TimeSetting::Community, mask, wait, rate, None, 0);
                let tau = s + (wait * DAY as f64) as i64;
                result = Some((tau, mask));
                break;
            }
            self.tally
                .at_risk(TimeSetting::Community, mask, span, rate, None, 0);
            s = e;
        }
        self.rows.breaks = breaks;
        result
    }

    /// Samples a hospital-acquired onset in [a, b) of the current stay; returns (onset, unit).
    fn stay_onset(&mut self, a: i64, b: i64) -> Option<(i64, usize, u32)> {
        if a >= b {
            return None;
        }
        let sc = self.sc;
        let mut breaks = std::mem::take(&mut self.rows.breaks);
        breaks.clear();
        self.rows.drugs.change_points(a, b, &mut breaks);
        let inside = |t: i64| t > a && t < b;
        for (x, y, _) in &self.stay.windows {
            breaks.extend([*x, *y].into_iter().filter(|t| inside(*t)));
        }
        if let Some(w) = &self.stay.aki {
            breaks.extend([w.start, w.end].into_iter().filter(|t| inside(*t)));
        }
        breaks.extend(
            self.stay
                .segments
                .iter()
                .map(|s| s.0)
                .filter(|t| inside(*t)),
        );
        breaks.extend(sc.month_starts.iter().copied().filter(|t| inside(*t)));
        if inside(sc.step_at) {
            breaks.push(sc.step_at);
        }
        breaks.push(b);
        breaks.sort_unstable();
        breaks.dedup();
        let mut s = a;
        let mut result = None;
        for &e in &breaks {
            if e <= s {
                continue;
            }
            let mask = self.static_mask | self.rows.drugs.mask_at(s) | self.stay.mask_at(s);
            let (unit, _) = self.stay.segment_at(s);
            let in_step = unit == sc.step_unit;
            let step = if in_step && s >= sc.step_at {
                sc.step_factor
            } else {
                1.0
            };
            let unstepped = sc.hazard.inpatient_per_day * sc.hazard.ratio(mask);
            let rate = unstepped * step;
            let span = (e - s) as f64 / DAY as f64;
            let wait = if rate > 0.0 {
                self.rng.exponential(rate)
            } else {
                f64::INFINITY
            };
            let month = sc.month_index(s);
            let step_side = in_step.then_some(s >= sc.step_at);
            if wait < span {
                self.tally.at_risk(
                    TimeSetting::Hospital,
                    mask,
                    wait,
                    unstepped,
                    step_side,
                    month,
                );
                result = Some((s + (wait * DAY as f64) as i64, unit, mask));
                break;
            }
            self.tally.at_risk(
                TimeSetting::Hospital,
                mask,
                span,
                unstepped,
                step_side,
                month,
            );
            s = e;
        }
        self.rows.breaks = breaks;
        result
    }

    // ---- contacts -----------------------------------------------------------------------

    fn visit_site(&mut self) -> usize {
        if self.rng.bernoulli(0.9) {
            self.p.home_site
        } else {
            self.rng.below(SITES.len() as u64) as usize
        }
    }

    /// An arrival on the local date of `t` at an hour drawn from a daytime-weighted profile
    /// (emergency arrivals peak late morning to evening, common practice), not before `t`.
    fn arrival_time(&mut self, t: i64) -> i64 {
        const HOURLY: [f64; 24] = [
            2.0, 1.5, 1.2, 1.0, 1.0, 1.2, 2.0, 3.0, 4.5, 5.5, 6.0, 6.0, 5.8, 5.6, 5.5, 5.4, 5.3,
            5.2, 5.0, 4.6, 4.0, 3.4, 2.8, 2.4,
        ];
        let hour = self.rng.categorical(&HOURLY) as i64;
        let seconds = hour * HOUR + self.rng.int_between(0, 59) * MINUTE;
        self.sc.time.next_time_of_day(t, seconds)
    }

    fn push_encounter(
        &mut self,
        class: EncounterClass,
        unit: usize,
        from: i64,
        to: i64,
        status: DischargeStatus,
    ) -> u32 {
        debug_assert!(
            from % 60 == 0 && to % 60 == 0,
            "encounter boundaries are whole minutes"
        );
        let open = to >= self.sc.extract_end;
        self.rows.encounters.push(EncounterRec {
            class,
            unit,
            admitted_at: from,
            discharged_at: (!open).then_some(to),
            status: if open || class == EncounterClass::Outpatient {
                None
            } else {
                Some(status)
            },
        });
        (self.rows.encounters.len() - 1) as u32
    }

    fn routine_panel(&mut self, setting: Setting) -> u8 {
        // Potassium, sodium and creatinine always; chloride, bicarbonate and urea nitrogen,
        // glucose and CK on part of the requests (common practice; tuned so that an extract has
        // about 18 laboratory rows and 5 potassium results per patient).
        let mut panel = BASIC;
        let (extended, glucose, ck) = match setting {
            Setting::Inpatient => (0.15, if self.p.diabetes { 0.6 } else { 0.15 }, 0.03),
            Setting::Emergency => (0.4, 0.6, 0.1),
            Setting::Outpatient => (0.1, if self.p.diabetes { 0.6 } else { 0.1 }, 0.01),
        };
        if self.rng.bernoulli(extended) {
            panel |= EXTENDED;
        }
        if self.rng.bernoulli(glucose) {
            panel |= GLUCOSE;
        }
        if self.rng.bernoulli(ck) {
            panel |= CK;
        }
        panel
    }

    fn outpatient_visit(&mut self, t: i64) -> i64 {
        let site = self.visit_site();
        let start = self
            .sc
            .time
            .next_time_of_day(t, self.rng.int_between(8 * 60, 16 * 60) * MINUTE);
        if start >= self.sc.extract_end || start + 2 * HOUR >= self.next_death() {
            return start.max(t + 1);
        }
        let end = start + self.rng.int_between(15, 60) * MINUTE;
        let unit = unit_for(site, UnitKind::Clinic);
        let enc = self.push_encounter(
            EncounterClass::Outpatient,
            unit,
            start,
            end,
            DischargeStatus::Home,
        );
        // Potassium monitoring: more often with CKD, diabetes or RAAS/MRA exposure.
        let mask = self.rows.drugs.mask_at(start);
        let monitored = self.p.egfr < 60.0
            || self.p.diabetes
            || Factor::RaasInhibitor.is_active(mask)
            || Factor::Mra.is_active(mask);
        if self.rng.bernoulli(if monitored { 0.75 } else { 0.4 }) {
            let at = start + self.rng.int_between(5, (end - start) / MINUTE - 3) * MINUTE;
            let panel = self.routine_panel(Setting::Outpatient);
            self.rows.draws.push(Draw::new(
                at,
                enc,
                end,
                site,
                Setting::Outpatient,
                Role::Routine,
                panel,
            ));
        }
        self.chronic_diagnoses(enc, start + 10 * MINUTE, 0.15);
        end
    }

    fn emergency_visit(&mut self, t: i64) -> i64 {
        let site = self.visit_site();
        let arrival = self.arrival_time(t);
        if arrival >= self.sc.extract_end || arrival + 2 * HOUR >= self.next_death() {
            return arrival.max(t + 1);
        }
        let end = ceil_minute(
            arrival + (self.rng.lognormal(4.0, 0.5).clamp(1.5, 14.0) * HOUR as f64) as i64,
        );
        let status = if self.rng.bernoulli(0.96) {
            DischargeStatus::Home
        } else {
            DischargeStatus::Other
        };
        let unit = unit_for(site, UnitKind::Emergency);
        let enc = self.push_encounter(EncounterClass::Emergency, unit, arrival, end, status);
        if self.rng.bernoulli(0.75) {
            self.emergency_draw(arrival, enc, end, site);
        }
        if self.next_death() <= end {
            self.die_in_care(enc, end);
        }
        end
    }

    /// The first draw in the emergency department: chemistry, often a blood gas too.
    fn emergency_draw(&mut self, arrival: i64, enc: u32, end: i64, site: usize) {
        let at = arrival + self.rng.int_between(10, 45) * MINUTE;
        if at >= end {
            return;
        }
        let panel = self.routine_panel(Setting::Emergency);
        self.rows.draws.push(Draw::new(
            at,
            enc,
            end,
            site,
            Setting::Emergency,
            Role::Routine,
            panel,
        ));
        self.rows.draws.last_mut().expect("pushed").blood_gas = self.rng.bernoulli(0.2);
    }

    fn die_in_care(&mut self, enc: u32, at: i64) {
        let e = &mut self.rows.encounters[enc as usize];
        if e.discharged_at.is_some() {
            e.status = Some(DischargeStatus::Died);
            self.rows.death_at = Some(at);
            self.tally.deaths_in_hospital += 1;
        }
    }

    fn unplanned_admission(&mut self, t: i64) -> i64 {
        let site = self.visit_site();
        let mut admit = self.arrival_time(t);
        if admit >= self.sc.extract_end || admit + 2 * HOUR >= self.next_death() {
            return admit.max(t + 1);
        }
        let mut ed_draw = false;
        if self.rng.bernoulli(0.7) {
            let arrival = admit;
            admit = ceil_minute(arrival + self.hours(2.0, 8.0));
            let unit = unit_for(site, UnitKind::Emergency);
            let enc = self.push_encounter(
                EncounterClass::Emergency,
                unit,
                arrival,
                admit,
                DischargeStatus::Transfer,
            );
            if self.rng.bernoulli(0.9) {
                self.emergency_draw(arrival, enc, admit, site);
                ed_draw = true;
            }
            if admit >= self.sc.extract_end {
                return admit;
            }
        }
        let kind = self.unplanned_unit_kind();
        self.stay(
            admit,
            unit_for(site, kind),
            StayKind::Unplanned,
            None,
            !ed_draw,
        )
    }

    fn unplanned_unit_kind(&mut self) -> UnitKind {
        let p = &self.p;
        let u = self.rng.uniform();
        if u < 0.04 {
            UnitKind::CriticalCare
        } else if p.egfr < 30.0 && u < 0.5 {
            UnitKind::Renal
        } else if p.heart_failure && u < 0.5 {
            UnitKind::Cardiology
        } else if p.age >= 80.0 && u < 0.5 {
            UnitKind::Elderly
        } else {
            // General medicine 40%, cardiology 40% (chest pain, arrhythmia), surgery 20%;
            // sites without a cardiology ward admit to medicine.
            *self.rng.pick(&[
                UnitKind::Medicine,
                UnitKind::Medicine,
                UnitKind::Cardiology,
                UnitKind::Cardiology,
                UnitKind::Surgery,
            ])
        }
    }

    fn elective_admission(&mut self, t: i64) -> i64 {
        let site = self.visit_site();
        let admit = self
            .sc
            .time
            .next_time_of_day(t, self.rng.int_between(7 * 60, 10 * 60) * MINUTE);
        if admit >= self.sc.extract_end || admit + 2 * HOUR >= self.next_death() {
            return admit.max(t + 1);
        }
        self.stay(
            admit,
            unit_for(site, UnitKind::Surgery),
            StayKind::Elective,
            None,
            true,
        )
    }

    fn fallback_visit(&mut self) {
        // Every patient of the extract had at least one contact: if the simulation gave none,
        // one outpatient visit at a random time while alive.
        let until = self
            .rows
            .death_at
            .unwrap_or(self.sc.extract_end)
            .min(self.sc.extract_end);
        let span = (until - self.sc.period_start - DAY).max(HOUR);
        let t = self.sc.period_start + self.rng.int_between(0, span);
        self.outpatient_visit(t);
        if self.rows.encounters.is_empty() {
            // The visit could not fit before death: place it at the period start.
            let unit = unit_for(self.p.home_site, UnitKind::Clinic);
            let start = self
                .sc
                .time
                .next_time_of_day(self.sc.period_start, 9 * HOUR);
            self.push_encounter(
                EncounterClass::Outpatient,
                unit,
                start,
                start + 20 * MINUTE,
                DischargeStatus::Home,
            );
            if let Some(d) = self.rows.death_at {
                self.rows.death_at = Some(d.max(start + DAY));
            }
        }
    }

    // ---- episodes -----------------------------------------------------------------------

    /// Bookkeeping of a planted onset: truth counts and the window other draws respect.
    fn record_episode(
        &mut self,
        plan: &EpisodePlan,
        setting: TimeSetting,
        mask: u32,
        unit: Option<usize>,
    ) {
        let month = self.sc.month_index(plan.onset_at);
        let step_side = unit
            .filter(|u| *u == self.sc.step_unit)
            .map(|_| plan.onset_at >= self.sc.step_at);
        let label = self.sc.hazard.attribute(mask, &mut self.rng);
        self.tally
            .episode(plan, setting, mask, label, step_side, month);
        self.rows.episodes.push(EpisodeFacts {
            onset_at: plan.onset_at,
            severity: plan.severity(),
        });
        let rebound = plan
            .draws
            .iter()
            .find(|d| d.role == DrawRole::Rebound)
            .map(|d| (d.at, d.potassium));
        self.rows.windows.push(EpisodeWindow {
            onset_at: plan.onset_at,
            peak: plan.peak,
            normalised_at: plan.normalised_at.unwrap_or(plan.end_at),
            rebound,
            end_at: plan.end_at,
        });
        self.restart_at = plan.end_at + AT_RISK_GAP;
        if let Some(d) = plan.death_at {
            self.exact_death = Some(self.exact_death.map_or(d, |e| e.min(d)));
        }
    }

    fn community_episode(&mut self, tau: i64, mask: u32) -> i64 {
        let site = self.visit_site();
        let arrival = tau - tau.rem_euclid(60);
        let onset = arrival + self.rng.int_between(10, 40) * MINUTE;
        let peak = episode::draw_peak(&mut self.rng);
        let severity = Severity::of(peak);
        let admitted = severity != Severity::Mild || self.rng.bernoulli(0.15);
        let follow_up = if !admitted && self.rng.bernoulli(0.75) {
            let day = onset + self.rng.int_between(1, 3) * DAY;
            Some(
                self.sc
                    .time
                    .next_time_of_day(day - 12 * HOUR, self.rng.int_between(8 * HOUR, 15 * HOUR)),
            )
            .filter(|at| *at < self.sc.extract_end - HOUR)
        } else {
            None
        };
        let mut plan = EpisodePlan::default();
        episode::plan(
            &mut self.rng,
            &self.sc.config,
            onset,
            peak,
            !admitted,
            follow_up,
            &mut plan,
        );
        let early = plan.early_care_until();
        let ed_end = ceil_minute(if admitted {
            (early + self.hours(0.5, 1.5)).max(arrival + self.hours(2.5, 5.0))
        } else {
            early + self.hours(0.5, 2.0)
        });
        let ed_unit = unit_for(site, UnitKind::Emergency);
        let status = if admitted {
            DischargeStatus::Transfer
        } else {
            DischargeStatus::Home
        };
        let ed = self.push_encounter(EncounterClass::Emergency, ed_unit, arrival, ed_end, status);
        self.record_episode(&plan, TimeSetting::Community, mask, None);
        // Emergency part: planned draws, doses and glucose checks before the department end.
        self.place_plan(
            &plan,
            i64::MIN,
            ed_end,
            |_| (ed, ed_end),
            site,
            Setting::Emergency,
        );
        if !admitted {
            if self.rng.bernoulli(0.4) {
                let binder = self.rng.pick(formulary::BINDERS);
                self.rows.meds.push(MedRec {
                    encounter: ed,
                    drug: binder,
                    kind: MedKind::Dispense,
                    start_at: ed_end - 5 * MINUTE,
                    end_at: None,
                    days_supply: Some(7),
                });
            }
            if self.rng.bernoulli(0.5) {
                self.rows.diags.push(DiagRec {
                    encounter: ed,
                    code: "E87.5",
                    recorded_at: ed_end,
                });
            }
            let Some(at) = follow_up else { return ed_end };
            let start = at - at.rem_euclid(60) - self.rng.int_between(5, 20) * MINUTE;
            let end = ceil_minute(at + self.rng.int_between(10, 40) * MINUTE);
            let unit = unit_for(site, UnitKind::Clinic);
            let enc = self.push_encounter(
                EncounterClass::Outpatient,
                unit,
                start,
                end,
                DischargeStatus::Home,
            );
            // Only the follow-up draw itself: a glucose check due while the patient was at home
            // was not done.
            self.place_plan(
                &plan,
                start,
                end + 1,
                |_| (enc, end),
                site,
                Setting::Outpatient,
            );
            return end;
        }
        if self.rng.bernoulli(0.5) {
            self.rows.diags.push(DiagRec {
                encounter: ed,
                code: "E87.5",
                recorded_at: ed_end,
            });
        }
        if ed_end >= self.sc.extract_end {
            return ed_end;
        }
        let kind = if severity == Severity::Severe && self.rng.bernoulli(0.2) {
            UnitKind::CriticalCare
        } else if self.p.egfr < 30.0 && self.rng.bernoulli(0.5) {
            UnitKind::Renal
        } else {
            UnitKind::Medicine
        };
        self.stay(
            ed_end,
            unit_for(site, kind),
            StayKind::Hyperkalemia,
            Some(plan),
            false,
        )
    }

    /// Adds the plan's draws, doses and glucose checks in [from, to) to the patient, in the
    /// encounter `encounter_at(t)` gives.
    fn place_plan(
        &mut self,
        plan: &EpisodePlan,
        from: i64,
        to: i64,
        encounter_at: impl Fn(i64) -> (u32, i64),
        site: usize,
        setting: Setting,
    ) {
        for d in &plan.draws {
            if d.at < from || d.at >= to {
                continue;
            }
            let (enc, enc_end) = encounter_at(d.at);
            let panel = match d.role {
                DrawRole::Onset => BASIC | EXTENDED | GLUCOSE,
                DrawRole::Normalising => BASIC,
                _ => K,
            };
            let mut draw = Draw::new(
                d.at,
                enc,
                enc_end,
                site,
                setting,
                Role::Planned(d.role),
                panel,
            );
            draw.planned_potassium = Some(d.potassium);
            if d.role == DrawRole::Onset
                && setting == Setting::Emergency
                && plan.severity() != Severity::Mild
            {
                draw.blood_gas = self.rng.bernoulli(0.5);
            }
            self.rows.draws.push(draw);
        }
        for dose in &plan.doses {
            if dose.at < from || dose.at >= to {
                continue;
            }
            let (enc, _) = encounter_at(dose.at);
            self.rows.meds.push(MedRec {
                encounter: enc,
                drug: dose.drug,
                kind: MedKind::Administer,
                start_at: dose.at,
                end_at: dose.end_at,
                days_supply: None,
            });
        }
        for &(at, glucose) in &plan.glucose_checks {
            if at < from || at >= to {
                continue;
            }
            let (enc, enc_end) = encounter_at(at);
            let mut draw = Draw::new(at, enc, enc_end, site, setting, Role::GlucoseCheck, GLUCOSE);
            draw.planned_glucose = Some(glucose);
            self.rows.draws.push(draw);
        }
    }

    // ---- stays --------------------------------------------------------------------------

    /// A hospital stay from `admit` on `unit`; returns its end. `poa` is the present-on-admission
    /// episode that caused it; `admission_draw` adds the usual draw soon after arrival.
    fn stay(
        &mut self,
        admit: i64,
        unit: usize,
        kind: StayKind,
        poa: Option<EpisodePlan>,
        admission_draw: bool,
    ) -> i64 {
        let sc = self.sc;
        let site = UNITS[unit].site;
        // Length of stay: lognormal, median 4 days, σ 0.85 (mean 5.7 d; 2.6% beyond 3 weeks)
        // for unplanned stays, median 3 days (σ 0.6) for elective ones (common practice).
        let los_days = match kind {
            StayKind::Elective => self.rng.lognormal(3.0, 0.6),
            _ => self.rng.lognormal(4.0, 0.85),
        }
        .clamp(0.3, 120.0);
        let mut end = admit + (los_days * DAY as f64) as i64;
        if los_days >= 1.0 {
            // Discharges happen in the day, 10:00–18:00 local.
            let day_start = end - sc.time.seconds_of_day(end);
            let daytime = sc
                .time
                .next_time_of_day(day_start - 1, self.rng.int_between(10 * HOUR, 18 * HOUR));
            if daytime > admit + 12 * HOUR {
                end = daytime;
            }
        }
        let mut stay = std::mem::take(&mut self.stay);
        stay.admit = admit;
        stay.segments.clear();
        stay.windows.clear();
        stay.aki = None;
        stay.plans.clear();
        stay.heparin_from = None;
        stay.kcl.clear();
        stay.cotrimoxazole.clear();
        stay.cotrimoxazole_drug = None;
        stay.segments.push((admit, unit, NO_ENCOUNTER));
        if UNITS[unit].kind == UnitKind::CriticalCare {
            let ward = unit_for(
                site,
                if self.p.heart_failure {
                    UnitKind::Cardiology
                } else {
                    UnitKind::Medicine
                },
            );
            let transfer = ceil_minute(admit + self.hours(24.0, 72.0));
            end = end.max(transfer + self.hours(24.0, 120.0));
            stay.segments.push((transfer, ward, NO_ENCOUNTER));
        } else if los_days >= 2.0 && self.rng.bernoulli(0.08) {
            let wards: Vec<usize> = [
                UnitKind::Medicine,
                UnitKind::Cardiology,
                UnitKind::Renal,
                UnitKind::Elderly,
                UnitKind::Surgery,
            ]
            .into_iter()
            .flat_map(|k| units_of(site, k))
            .filter(|u| *u != unit)
            .collect();
            if !wards.is_empty() {
                let other = *self.rng.pick(&wards);
                let transfer =
                    ceil_minute(admit + ((end - admit) as f64 * self.rng.range(0.3, 0.7)) as i64);
                stay.segments.push((transfer, other, NO_ENCOUNTER));
            }
        }
        self.plan_inpatient_drugs(&mut stay, end);
        let mut died = false;
        if let Some(plan) = &poa {
            end = end.max(plan.end_at + self.hours(6.0, 30.0));
        } else {
            // Hospital-acquired hazard from 49 h after admission.
            let mut a = (admit + HOSPITAL_AT_RISK_FROM_HOURS * HOUR).max(self.restart_at);
            self.stay = stay;
            loop {
                let b = end
                    .min(sc.risk_end)
                    .min(self.exact_death.unwrap_or(i64::MAX));
                let Some((tau, onset_unit, mask)) = self.stay_onset(a, b) else {
                    break;
                };
                let peak = episode::draw_peak(&mut self.rng);
                let mut plan = EpisodePlan::default();
                episode::plan(&mut self.rng, &sc.config, tau, peak, false, None, &mut plan);
                self.record_episode(&plan, TimeSetting::Hospital, mask, Some(onset_unit));
                end = end.max(plan.end_at + self.hours(6.0, 30.0));
                self.stay.plans.push(plan);
                a = self.restart_at;
            }
            stay = std::mem::take(&mut self.stay);
        }
        if let Some(d) = self.exact_death
            && d < end
        {
            end = d;
            died = true;
        }
        if !died && (self.death_bg <= end || self.rng.bernoulli(self.p.stay_death_probability)) {
            died = true;
        }
        if let Some(plan) = poa {
            stay.plans.push(plan);
        }
        // Encounters of the stay, one per unit segment, joined by transfers (none starting
        // after death, discharge or the extract end).
        end = ceil_minute(end);
        stay.segments.retain(|s| s.0 < end && s.0 < sc.extract_end);
        let n = stay.segments.len();
        for i in 0..n {
            let (from, seg_unit, _) = stay.segments[i];
            let to = if i + 1 < n {
                stay.segments[i + 1].0
            } else {
                end
            };
            let status = if i + 1 < n {
                DischargeStatus::Transfer
            } else if died {
                DischargeStatus::Died
            } else {
                match self.rng.categorical(&[0.93, 0.04, 0.03]) {
                    0 => DischargeStatus::Home,
                    1 => DischargeStatus::Other,
                    _ => DischargeStatus::Transfer,
                }
            };
            let enc = self.push_encounter(EncounterClass::Inpatient, seg_unit, from, to, status);
            stay.segments[i].2 = enc;
        }
        // A stay cut to nothing (a death before its first segment) writes no encounter and is
        // not counted.
        if n > 0 {
            self.tally.stays += 1;
            self.tally.transfers += n as u64 - 1;
            if end >= sc.extract_end {
                self.tally.open_admissions += 1;
            }
        }
        if died && end < sc.extract_end {
            self.rows.death_at = Some(end);
            self.tally.deaths_in_hospital += 1;
        }
        let stop = end.min(sc.extract_end);
        // Planned episode draws, doses and checks of the stay.
        let plans = std::mem::take(&mut stay.plans);
        let mut planned_times: Vec<i64> = Vec::new();
        for plan in &plans {
            let seg = |t: i64| {
                let (_, enc) = stay.segment_at(t);
                (enc, stay.segment_end(t, end))
            };
            self.place_plan(plan, admit, stop, seg, site, Setting::Inpatient);
            planned_times.extend(plan.draws.iter().map(|d| d.at));
        }
        self.routine_draws(&stay, end, stop, site, admission_draw, &planned_times);
        self.inpatient_doses(&stay, end, stop);
        if let Some(w) = stay.aki {
            self.rows.aki.push(w);
        }
        self.stay_diagnoses(&stay, &plans, end);
        self.stay = stay;
        end
    }

    /// Heparin prophylaxis, IV potassium and co-trimoxazole of a stay, and their exposure
    /// windows: from the first dose to discharge (heparin) or to 24 h after the last dose (the
    /// inpatient rule of the domain reference §4).
    fn plan_inpatient_drugs(&mut self, stay: &mut Stay, planned_end: i64) {
        let admit = stay.admit;
        // Heparin thromboprophylaxis in 60% of stays of a day or more (from memory), from the
        // first evening.
        if planned_end - admit >= DAY && self.rng.bernoulli(0.6) {
            let first = self.sc.time.next_time_of_day(admit + 2 * HOUR, 18 * HOUR);
            stay.heparin_from = Some(first);
            stay.windows.push((first, i64::MAX, Factor::Heparin.bit()));
        }
        // IV potassium chloride in 6% of stays (hypokalemia correction): 1 + Poisson(0.8)
        // infusions (at most 4) of 2–4 h, 6–12 h apart.
        if self.rng.bernoulli(0.06) {
            let mut t = admit + self.hours(2.0, 36.0);
            let infusions = 1 + self.rng.poisson(0.8).min(3);
            for _ in 0..infusions {
                if t >= planned_end - HOUR {
                    break;
                }
                let end = t + self.hours(2.0, 4.0);
                stay.kcl.push((t, end));
                t = end + self.hours(6.0, 12.0);
            }
            if let (Some(first), Some(last)) = (stay.kcl.first(), stay.kcl.last()) {
                stay.windows
                    .push((first.0, last.1 + DAY, Factor::PotassiumIv.bit()));
            }
        }
        // Inpatient co-trimoxazole in 3.5% of stays: twice daily for 5–10 days, oral or IV.
        if self.rng.bernoulli(0.035) {
            let mut t = self.sc.time.next_time_of_day(admit + 4 * HOUR, 8 * HOUR);
            let last = t + self.rng.int_between(5, 10) * DAY;
            while t <= last && t < planned_end - 2 * HOUR {
                stay.cotrimoxazole
                    .push(t + self.rng.int_between(0, 30) * MINUTE);
                t += 12 * HOUR;
            }
            stay.cotrimoxazole_drug = Some(if self.rng.bernoulli(0.5) {
                &formulary::CO_TRIMOXAZOLE_IV
            } else {
                &formulary::CO_TRIMOXAZOLE
            });
            if let (Some(first), Some(last)) =
                (stay.cotrimoxazole.first(), stay.cotrimoxazole.last())
            {
                stay.windows
                    .push((*first, *last + DAY, Factor::Trimethoprim.bit()));
            }
        }
        // Acute kidney injury in 5% of stays, twice as often with eGFR < 45 and 1.5 times with
        // RAAS inhibitor or NSAID exposure at admission (from memory, order of magnitude).
        let mut p_aki = 0.05;
        if self.p.egfr < 45.0 {
            p_aki *= 2.0;
        }
        let mask = self.rows.drugs.mask_at(admit);
        if Factor::RaasInhibitor.is_active(mask) || Factor::Nsaid.is_active(mask) {
            p_aki *= 1.5;
        }
        if self.rng.bernoulli(p_aki) {
            let start = admit + self.hours(0.0, 72.0);
            let end = start + self.hours(48.0, 168.0);
            stay.aki = Some(AkiWindow {
                start,
                end,
                peak_factor: self.rng.range(1.5, 3.0),
            });
        }
    }

    /// Writes the doses of the stay's inpatient drugs before `stop`.
    fn inpatient_doses(&mut self, stay: &Stay, end: i64, stop: i64) {
        let enc_at = |t: i64| stay.segment_at(t).1;
        let administer = |drug: &'static formulary::Drug, at: i64, end_at: Option<i64>| MedRec {
            encounter: enc_at(at),
            drug,
            kind: MedKind::Administer,
            start_at: at,
            end_at,
            days_supply: None,
        };
        if let Some(from) = stay.heparin_from {
            // Unfractionated heparin twice daily when eGFR < 30, otherwise enoxaparin daily.
            let (drug, step) = if self.p.egfr < 30.0 {
                (&formulary::HEPARIN, 12 * HOUR)
            } else {
                (&formulary::ENOXAPARIN, DAY)
            };
            let mut t = from;
            while t < end - HOUR && t < stop {
                let at = t + self.rng.int_between(0, 40) * MINUTE;
                if at < stop {
                    self.rows.meds.push(administer(drug, at, None));
                }
                t += step;
            }
            // Some stays also carry the standing order (start at admission, end at discharge).
            if self.rng.bernoulli(0.15) {
                let at = stay.admit + self.hours(0.5, 3.0);
                if at < stop {
                    let order_end = (end < self.sc.extract_end).then_some(end);
                    self.rows.meds.push(MedRec {
                        kind: MedKind::Order,
                        end_at: order_end,
                        ..administer(drug, at, None)
                    });
                }
            }
        }
        for &(from, to) in &stay.kcl {
            if from < stop {
                self.rows.meds.push(administer(
                    &formulary::POTASSIUM_CHLORIDE_IV,
                    from,
                    Some(to),
                ));
            }
        }
        if let Some(drug) = stay.cotrimoxazole_drug {
            for &at in &stay.cotrimoxazole {
                if at < stop {
                    let end_at = (drug.route == "IV").then_some(at + 60 * MINUTE);
                    self.rows.meds.push(administer(drug, at, end_at));
                }
            }
        }
    }

    fn routine_draws(
        &mut self,
        stay: &Stay,
        end: i64,
        stop: i64,
        site: usize,
        admission_draw: bool,
        planned: &[i64],
    ) {
        let near_planned = |t: i64| planned.iter().any(|p| (p - t).abs() < 3 * HOUR);
        let add = |sim: &mut Self, at: i64| {
            if at >= stop || near_planned(at) {
                return;
            }
            let (_, enc) = stay.segment_at(at);
            let enc_end = stay.segment_end(at, end);
            let panel = sim.routine_panel(Setting::Inpatient);
            sim.rows.draws.push(Draw::new(
                at,
                enc,
                enc_end,
                site,
                Setting::Inpatient,
                Role::Routine,
                panel,
            ));
        };
        if admission_draw {
            let at = stay.admit + self.rng.int_between(15, 90) * MINUTE;
            add(self, at);
        }
        // Morning bloods on most days (85%), twice daily in critical care (common practice).
        let mut day = stay.admit + 2 * HOUR;
        loop {
            let morning = self
                .sc
                .time
                .next_time_of_day(day, self.rng.int_between(5 * HOUR + 1800, 7 * HOUR + 1800));
            if morning >= end - 30 * MINUTE || morning >= stop {
                break;
            }
            let (unit, _) = stay.segment_at(morning);
            if UNITS[unit].kind == UnitKind::CriticalCare {
                add(self, morning);
                let evening = morning + self.hours(10.5, 12.0);
                if evening < end - 30 * MINUTE {
                    add(self, evening);
                }
            } else if self.rng.bernoulli(0.85) {
                add(self, morning);
            }
            day = morning + 12 * HOUR;
        }
    }

    fn stay_diagnoses(&mut self, stay: &Stay, plans: &[EpisodePlan], end: i64) {
        let Some(&(last_from, _, enc)) = stay.segments.last() else {
            return;
        };
        // Coded at discharge; for a stay still open at the extract end, soon after the start of
        // its current encounter.
        let at = if end < self.sc.extract_end {
            end
        } else {
            last_from + ((self.sc.extract_end - last_from) / 2).min(2 * HOUR)
        };
        if !plans.is_empty() && self.rng.bernoulli(0.6) {
            self.rows.diags.push(DiagRec {
                encounter: enc,
                code: "E87.5",
                recorded_at: at,
            });
        }
        if stay.aki.is_some() && self.rng.bernoulli(0.7) {
            self.rows.diags.push(DiagRec {
                encounter: enc,
                code: "N17.9",
                recorded_at: at,
            });
        }
        self.chronic_diagnoses(enc, at, 0.75);
    }

    /// Codes of the patient's chronic conditions, each recorded with probability `p`.
    fn chronic_diagnoses(&mut self, enc: u32, at: i64, p: f64) {
        let p_ckd = self.p.ckd_code();
        let mut codes: [Option<&'static str>; 6] = [None; 6];
        codes[0] = p_ckd;
        codes[1] = self.p.diabetes.then(|| self.p.diabetes_code());
        codes[2] = self.p.heart_failure.then_some("I50.9");
        codes[3] = self.p.hypertension.then_some("I10");
        codes[4] = self.p.adrenal;
        codes[5] = self.p.lung_disease.then_some("J44.9");
        for code in codes.into_iter().flatten() {
            // Rare conditions are coded almost always once known.
            let p_code = if code.starts_with("E27") { 0.9 } else { p };
            if self.rng.bernoulli(p_code) {
                self.rows.diags.push(DiagRec {
                    encounter: enc,
                    code,
                    recorded_at: at,
                });
            }
        }
    }

    // ---- finishing ----------------------------------------------------------------------

    fn finish(mut self) {
        let sc = self.sc;
        let rows = &mut *self.rows;
        let stop = rows.death_at.unwrap_or(sc.extract_end).min(sc.extract_end);
        rows.draws.retain(|d| d.at < stop);
        rows.meds
            .retain(|m| m.start_at < sc.extract_end && m.start_at <= stop);
        rows.diags
            .retain(|d| d.recorded_at < sc.extract_end && d.recorded_at <= stop);
        for d in &rows.drugs.dispensings {
            if d.at < stop {
                rows.meds.push(MedRec {
                    encounter: NO_ENCOUNTER,
                    drug: d.drug,
                    kind: MedKind::Dispense,
                    start_at: d.at,
                    end_at: None,
                    days_supply: Some(d.days_supply),
                });
            }
        }
        rows.meds.sort_by_key(|m| m.start_at);
        rows.diags.sort_by_key(|d| d.recorded_at);
        let config = &sc.config;
        specimen::assign_values(
            &mut self.rng,
            &self.p,
            config.hemolysed_share,
            config.spurious_high_share,
            &rows.windows,
            stop,
            &mut rows.draws,
        );
        let mut counts = SpecimenCounts::default();
        specimen::count(&sc.time, &rows.draws, &rows.windows, &mut counts);
        specimen::lab_rows(
            &mut self.rng,
            &self.p,
            &rows.draws,
            &rows.aki,
            sc.extract_end,
            &mut counts,
            &mut rows.labs,
        );
        self.tally.specimens(&counts);
        self.tally.patient(&self.p, rows, sc);
        // Planted facts that depend on the final rows.
        for e in &rows.episodes {
            if e.severity == Severity::Severe {
                let died_30 = rows
                    .death_at
                    .is_some_and(|d| d > e.onset_at && d - e.onset_at <= 30 * DAY);
                self.tally.severe_death(died_30);
            }
        }
        for m in &rows.meds {
            if m.drug.class == DrugClass::RegularInsulin && m.kind == MedKind::Administer {
                // Times as a reader of the local-time files sees them.
                let read = |t: i64, form| sc.time.instant_of_local(sc.time.written_local(t, form));
                let given = read(m.start_at, TimeForm::Seconds);
                let window = rows.labs.iter().filter(|l| {
                    let form = if SITES[l.site].collection_seconds {
                        TimeForm::Seconds
                    } else {
                        TimeForm::Minutes
                    };
                    let at = read(l.collected_at, form);
                    l.test == crate::record::Test::Glucose && at > given && at - given <= 6 * HOUR
                });
                let mut checked = false;
                let mut low = false;
                for l in window {
                    checked = true;
                    low |= l.value.value() < 70.0;
                }
                self.tally.insulin(checked, low);
            }
        }
        for d in &rows.draws {
            if d.role == Role::Planned(DrawRole::Rebound) {
                self.tally.episodes_rebound += 1;
            }
        }
        rows.profile = Some(self.p);
    }
}
