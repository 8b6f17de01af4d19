//! A plain reading of the episode definition (queries/episodes.sql header, issue 3 §3): one
//! patient at a time, results sorted, a state machine that opens, extends, closes and re-opens
//! episodes exactly as the rules say. Written for obviousness, not speed.

use kcohort_model::study::Study;

#[derive(Debug, Clone)]
pub struct LabResult {
    pub patient_id: String,
    pub result_id: String,
    pub loinc: String,
    pub collected_at: i64,
    pub value: f64,
    pub hemolysis_index: Option<f64>,
}

#[derive(Debug, Clone)]
pub struct Encounter {
    pub encounter_id: String,
    pub patient_id: String,
    pub class: String,
    pub unit: String,
    pub admitted_at: i64,
    pub discharged_at: Option<i64>,
}

#[derive(Debug, Clone)]
pub struct Medication {
    pub patient_id: String,
    pub atc: String,
    pub kind: String,
    pub start_at: i64,
}

/// One row of the episodes table.
#[derive(Debug, Clone, PartialEq)]
pub struct Episode {
    pub episode_id: String,
    pub patient_id: String,
    pub onset_at: i64,
    pub onset_value: f64,
    pub peak_value: f64,
    pub end_at: i64,
    pub n_results: i64,
    pub n_high: i64,
    pub resolved: bool,
    pub n_rebounds: i64,
    pub unconfirmed: bool,
    pub ctcae_grade: Option<i32>,
    pub severity: String,
    pub encounter_id: Option<String>,
    pub encounter_class: Option<String>,
    pub unit: Option<String>,
    pub setting: String,
    pub onset_result_id: String,
    pub first_treatment_at: Option<i64>,
}

fn hours(h: f64) -> i64 {
    (h * 3_600_000_000.0).round() as i64
}

/// An episode while the state machine runs.
struct Open {
    onset: LabResult,
    peak_value: f64,
    latest_at: i64,
    end_at: i64,
    resolved: bool,
    n_high: i64,
    n_rebounds: i64,
}

pub fn episodes(
    results: &[LabResult],
    encounters: &[Encounter],
    medications: &[Medication],
    study: &Study,
    extract_end: i64,
) -> Vec<Episode> {
    let p = &study.episode;
    let mut patients: Vec<&str> = results.iter().map(|r| r.patient_id.as_str()).collect();
    patients.sort();
    patients.dedup();
    let treatments = study.potassium_lowering_atc();
    let mut out = Vec::new();
    for patient in patients {
        // Rules 2 and 3: the patient's used potassium results in order.
        let mut used: Vec<&LabResult> = results
            .iter()
            .filter(|r| r.patient_id == patient)
            .filter(|r| study.potassium.loinc.contains(&r.loinc))
            .filter(|r| {
                !r.hemolysis_index
                    .is_some_and(|h| h >= study.potassium.hemolysis_cutoff)
            })
            .collect();
        used.sort_by(|a, b| {
            (a.collected_at, a.result_id.as_bytes()).cmp(&(b.collected_at, b.result_id.as_bytes()))
        });

        // Rules 4–6.
        let mut found: Vec<Open> = Vec::new();
        let mut open: Option<usize> = None;
        for r in &used {
            let high = r.value > p.high_above;
            let normal = r.value <= p.normal_at_or_below;
            if let Some(k) = open
                && r.collected_at > found[k].latest_at + hours(p.max_gap_hours)
            {
                found[k].end_at = found[k].latest_at;
                found[k].resolved = false;
                open = None;
            }
            match open {
                Some(k) => {
                    let e = &mut found[k];
                    e.latest_at = r.collected_at;
                    e.peak_value = e.peak_value.max(r.value);
                    if high {
                        e.n_high += 1;
                    }
                    if normal {
                        e.end_at = r.collected_at;
                        e.resolved = true;
                        open = None;
                    }
                }
                None if high => {
                    let rebound = found.last().is_some_and(|last| {
                        last.resolved && r.collected_at < last.end_at + hours(p.rebound_hours)
                    });
                    if rebound {
                        let k = found.len() - 1;
                        let e = &mut found[k];
                        e.n_rebounds += 1;
                        e.n_high += 1;
                        e.latest_at = r.collected_at;
                        e.peak_value = e.peak_value.max(r.value);
                        e.resolved = false;
                        open = Some(k);
                    } else {
                        found.push(Open {
                            onset: (*r).clone(),
                            peak_value: r.value,
                            latest_at: r.collected_at,
                            end_at: r.collected_at,
                            resolved: false,
                            n_high: 1,
                            n_rebounds: 0,
                        });
                        open = Some(found.len() - 1);
                    }
                }
                None => {}
            }
        }
        if let Some(k) = open {
            found[k].end_at = found[k].latest_at;
            found[k].resolved = false;
        }

        for e in found {
            let onset_at = e.onset.collected_at;
            // Rule 8 (decision b): n_results by time.
            let n_results = used
                .iter()
                .filter(|r| onset_at <= r.collected_at && r.collected_at <= e.end_at)
                .count() as i64;
            // Rule 7.
            let first_treatment_at = medications
                .iter()
                .filter(|m| m.patient_id == patient && m.kind == "administer")
                .filter(|m| treatments.iter().any(|t| m.atc.starts_with(t.as_str())))
                .filter(|m| onset_at <= m.start_at && m.start_at <= e.end_at)
                .map(|m| m.start_at)
                .min();
            let unconfirmed = e.n_high == 1
                && e.resolved
                && e.end_at <= onset_at + hours(p.spurious_repeat_hours)
                && first_treatment_at.is_none();
            // CTCAE v5.0 hyperkalemia, value part.
            let v = e.peak_value;
            let ctcae_grade = if v <= p.upper_normal_limit {
                None
            } else if v <= 5.5 {
                Some(1)
            } else if v <= 6.0 {
                Some(2)
            } else if v <= 7.0 {
                Some(3)
            } else {
                Some(4)
            };
            let severity = if v >= p.severity_severe_from {
                "severe"
            } else if v >= p.severity_moderate_from {
                "moderate"
            } else {
                "mild"
            };
            // Rule 9 (decision d).
            let rank = |class: &str| match class {
                "inpatient" => 1,
                "emergency" => 2,
                _ => 3,
            };
            let covering = encounters
                .iter()
                .filter(|c| c.patient_id == patient && c.admitted_at <= onset_at)
                .filter(|c| onset_at < c.discharged_at.unwrap_or(extract_end).min(extract_end))
                .min_by(|a, b| {
                    (rank(&a.class), a.admitted_at, a.encounter_id.as_bytes()).cmp(&(
                        rank(&b.class),
                        b.admitted_at,
                        b.encounter_id.as_bytes(),
                    ))
                });
            // Rule 10.
            let setting = match covering {
                Some(c) if c.class == "inpatient" => {
                    if onset_at >= c.admitted_at + hours(p.hospital_acquired_after_hours) {
                        "hospital_acquired"
                    } else {
                        "present_on_admission"
                    }
                }
                _ => "community",
            };
            out.push(Episode {
                episode_id: format!("hk-{}", e.onset.result_id),
                patient_id: patient.to_string(),
                onset_at,
                onset_value: e.onset.value,
                peak_value: e.peak_value,
                end_at: e.end_at,
                n_results,
                n_high: e.n_high,
                resolved: e.resolved,
                n_rebounds: e.n_rebounds,
                unconfirmed,
                ctcae_grade,
                severity: severity.to_string(),
                encounter_id: covering.map(|c| c.encounter_id.clone()),
                encounter_class: covering.map(|c| c.class.clone()),
                unit: covering.map(|c| c.unit.clone()),
                setting: setting.to_string(),
                onset_result_id: e.onset.result_id.clone(),
                first_treatment_at,
            });
        }
    }
    out.sort_by(|a, b| {
        (&a.patient_id, a.onset_at, &a.episode_id).cmp(&(&b.patient_id, b.onset_at, &b.episode_id))
    });
    out
}
