-- episodes: high-potassium (hyperkalemia) episodes, one row per episode.
--
-- DEFINITION (the default definition of issue 3 §3; every number is a study parameter)
--  1. Clock. Stored instants are UTC; every window is elapsed time, so 48 h across a
--     daylight-saving change is 48 real hours. The extract end comes from the store manifest.
--  2. Potassium results: lab results whose LOINC code is in $potassium_loinc (default 2823-3
--     serum/plasma, 6298-4 blood) with a value in mmol/L or mEq/L (the store keeps potassium in
--     mmol/L; a value reported with a comparator, `>9.0`, is stored as its number). Results with
--     hemolysis_index at or above $hemolysis_cutoff (default 100) are excluded from every step
--     below (they neither open, extend nor close an episode, nor count as a repeat); they are
--     counted in the potassium_quality table. A missing hemolysis_index is not hemolysed.
--  3. Order: per patient by collected_at, ties broken by result_id compared as byte strings.
--  4. High: value > $high_above (default 5.5, strict). Normal: value <= $normal_at_or_below
--     (default 5.0). Values in between keep an open episode open and open nothing.
--  5. Opening and closing: an episode opens at a high value when none is open. It closes at the
--     first later normal value (end_at = its collected_at, resolved), or, unresolved, when the
--     next result comes more than $max_gap_hours (default 168) after the episode's latest
--     result, or when the patient has no further result (end_at = the episode's latest result).
--  6. Rebound: a high value strictly less than $rebound_hours (default 24) after the end_at of
--     the immediately preceding episode, when that episode was resolved, re-opens it instead of
--     opening a new one (n_rebounds + 1; end_at moves on when it closes again; chains allowed).
--     Exactly $rebound_hours later opens a new episode.
--  7. Possible pseudohyperkalemia: after rebound merging, an episode with exactly one high value
--     that closed resolved with end_at <= onset_at + $spurious_repeat_hours (default 6,
--     inclusive), and with no potassium-lowering treatment in [onset_at, end_at], is
--     unconfirmed (left out of primary counts, reported separately). Potassium-lowering
--     treatment: a medication event of kind `administer` (any route, any encounter) with
--     start_at in that closed window and an ATC code starting with one of
--     $potassium_lowering_atc (default A10AB, R03AC02, B05XA02, A12AA03, A12AA07, V03AE, C03CA).
--  8. Attributes: episode_id, patient_id, onset_at, onset_value, peak_value, end_at, n_results
--     (every used potassium result with onset_at <= collected_at <= end_at), n_high, resolved,
--     n_rebounds, unconfirmed, ctcae_grade (CTCAE v5.0 value-based grade of the peak with
--     $upper_normal_limit, default 5.0: 1 above ULN to 5.5, 2 above 5.5 to 6.0, 3 above 6.0 to
--     7.0, 4 above 7.0), severity of the peak (mild below $severity_moderate_from, default 6.0;
--     moderate from it to below $severity_severe_from, default 6.5; severe from it).
--  9. Covering encounter of the onset: admitted_at <= onset_at < discharged_at (no
--     discharged_at: open-ended, cut at the extract end); inpatient preferred, then emergency,
--     then outpatient; within a class the earliest admitted_at, then encounter_id. A rebound does
--     not move it. unit = that encounter's unit.
-- 10. Setting: hospital_acquired when the covering encounter is inpatient and
--     onset_at >= admitted_at + $hospital_acquired_after_hours (default 48, inclusive);
--     present_on_admission when it is inpatient and earlier; community when no inpatient
--     encounter covers the onset.
--
-- DECISIONS where the text above leaves room (also in docs/definitions.md, tested in
-- crates/kcohort-engine/tests/slt/):
--  a. Only the rebound may re-open an episode, and only the immediately preceding one if it
--     closed resolved (an episode closed by the gap rule is followed by a result more than
--     $max_gap_hours later, so it cannot be re-opened anyway).
--  b. n_results counts by time, literally: a used result collected at exactly onset_at or end_at
--     counts even when it comes before the onset or after the closing result in result_id order.
--     The results between a close and its rebound count too.
--  c. n_high counts the high values that opened, extended or re-opened the episode (with the
--     default parameters this equals the high values in [onset_at, end_at]).
--  d. The covering encounter's end is LEAST(discharged_at, extract end), and the extract end when
--     discharged_at is missing; discharge times after the extract end are cut at it (the input
--     contract). The end is exclusive, so an onset exactly at the extract end of an open-ended
--     encounter is not covered.
--  e. episode_id = 'hk-' followed by the result_id of the opening high value: stable across
--     runs of the same store and study, and traceable to the result.
--  f. ctcae_grade is NULL when the peak is not above $upper_normal_limit (possible only when
--     $high_above is set below it).
--  g. onset_value and peak_value are the stored canonical values (mmol/L).
--  h. first_treatment_at (an extra column) is the first potassium-lowering administration in
--     [onset_at, end_at], whatever the episode; rule 7 uses it.
--
-- PARAMETERS: $potassium_loinc, $hemolysis_cutoff, $high_above, $normal_at_or_below,
-- $max_gap_hours, $rebound_hours, $spurious_repeat_hours, $potassium_lowering_atc,
-- $upper_normal_limit, $severity_moderate_from, $severity_severe_from,
-- $hospital_acquired_after_hours, $extract_end.
--
-- Windows are written `later > earlier + $window` (never as a difference compared with an
-- interval, which DataFusion 55 gets wrong for intervals with a day part; a test lints this).

-- Step 2: every potassium result of the study's LOINC set, with its exclusion flags. Also read by
-- potassium_quality.sql.
CREATE VIEW potassium_results AS
SELECT
    patient_id,
    result_id,
    loinc,
    collected_at,
    value,
    value IS NOT NULL AND lower(unit) IN ('mmol/l', 'meq/l') AS has_value,
    hemolysis_index IS NOT NULL AND hemolysis_index >= $hemolysis_cutoff AS hemolysed
FROM lab_results
WHERE loinc IN ($potassium_loinc);

-- Steps 3-6: the used results of each patient in order (collected_at, then result_id as bytes),
-- read by a state machine that applies rules 4-6 exactly as written above: open at a high
-- value, extend, close at the first normal value or before a gap of more than $max_gap_hours,
-- re-open the preceding resolved episode at a high value less than $rebound_hours after its end.
-- The machine is the window function potassium_episode_machine (Rust,
-- crates/kcohort-engine/src/episode_window.rs): a loop over the sorted rows instead of the
-- several sorts and aggregations the same rules need as window SQL. It returns, on the row of each
-- episode's opening high value, the episode after rebound merging (onset_at, onset_value,
-- peak_value, end_at, n_results by decision b, n_high, resolved, n_rebounds), NULL elsewhere.
-- The window has no PARTITION BY on purpose: one ordered pass over all patients (DataFusion pays a
-- large cost per window partition, and most patients have few results).
CREATE VIEW potassium_episodes_merged AS
SELECT
    patient_id,
    onset_result_id,
    machine['onset_at'] AS onset_at,
    machine['onset_value'] AS onset_value,
    machine['peak_value'] AS peak_value,
    machine['end_at'] AS end_at,
    machine['resolved'] AS resolved,
    machine['n_results'] AS n_results,
    machine['n_high'] AS n_high,
    machine['n_rebounds'] AS n_rebounds
FROM (
    SELECT
        patient_id,
        result_id AS onset_result_id,
        potassium_episode_machine(
            patient_id, collected_at, value,
            $high_above, $normal_at_or_below, $max_gap_hours_us, $rebound_hours_us
        ) OVER (ORDER BY patient_id, collected_at, result_id) AS machine
    FROM potassium_results
    WHERE has_value AND NOT hemolysed
) AS read_in_order
WHERE machine IS NOT NULL;

-- Step 7: potassium-lowering treatments as the pseudohyperkalemia rule counts them.
CREATE VIEW potassium_lowering_administrations AS
SELECT patient_id, start_at
FROM medication_events
WHERE kind = 'administer' AND atc_matches_any(atc, $potassium_lowering_atc);

-- Step 7: the first potassium-lowering treatment in [onset_at, end_at], if any. (Per-episode
-- picks here and below are aggregates over the episode's columns, not ROW_NUMBER windows: one
-- window partition per episode is slow in DataFusion 55.)
CREATE VIEW potassium_episodes_treated AS
SELECT
    e.patient_id, e.onset_result_id, e.onset_at, e.onset_value, e.peak_value, e.end_at,
    e.resolved, e.n_results, e.n_high, e.n_rebounds,
    MIN(t.start_at) AS first_treatment_at
FROM potassium_episodes_merged e
LEFT JOIN potassium_lowering_administrations t
    ON t.patient_id = e.patient_id
    AND t.start_at >= e.onset_at
    AND t.start_at <= e.end_at
GROUP BY e.patient_id, e.onset_result_id, e.onset_at, e.onset_value, e.peak_value, e.end_at,
    e.resolved, e.n_results, e.n_high, e.n_rebounds;

-- Step 9: the covering encounter of the onset, by class preference, admission, encounter_id.
CREATE VIEW potassium_episodes_located AS
SELECT
    e.patient_id, e.onset_result_id, e.onset_at, e.onset_value, e.peak_value, e.end_at,
    e.resolved, e.n_results, e.n_high, e.n_rebounds,
    e.first_treatment_at,
    first_value(c.encounter_id ORDER BY c.class_rank, c.admitted_at, c.encounter_id)
        AS encounter_id,
    first_value(c.class ORDER BY c.class_rank, c.admitted_at, c.encounter_id)
        AS encounter_class,
    first_value(c.unit ORDER BY c.class_rank, c.admitted_at, c.encounter_id) AS unit,
    first_value(c.admitted_at ORDER BY c.class_rank, c.admitted_at, c.encounter_id)
        AS admitted_at
FROM potassium_episodes_treated e
LEFT JOIN (
    SELECT
        *,
        CASE class WHEN 'inpatient' THEN 1 WHEN 'emergency' THEN 2 ELSE 3 END AS class_rank
    FROM encounters
) c
    ON c.patient_id = e.patient_id
    AND c.admitted_at <= e.onset_at
    AND e.onset_at < least(coalesce(c.discharged_at, $extract_end), $extract_end)
GROUP BY e.patient_id, e.onset_result_id, e.onset_at, e.onset_value, e.peak_value, e.end_at,
    e.resolved, e.n_results, e.n_high, e.n_rebounds, e.first_treatment_at;

-- Steps 7, 8 and 10: the attributes.
SELECT
    'hk-' || onset_result_id AS episode_id,
    patient_id,
    onset_at,
    onset_value,
    peak_value,
    end_at,
    n_results,
    n_high,
    resolved,
    n_rebounds,
    (n_high = 1
        AND resolved
        AND end_at <= onset_at + $spurious_repeat_hours
        AND first_treatment_at IS NULL) AS unconfirmed,
    ctcae_hyperkalemia_grade(peak_value, $upper_normal_limit) AS ctcae_grade,
    CASE
        WHEN peak_value >= $severity_severe_from THEN 'severe'
        WHEN peak_value >= $severity_moderate_from THEN 'moderate'
        ELSE 'mild'
    END AS severity,
    encounter_id,
    encounter_class,
    unit,
    CASE
        WHEN encounter_class = 'inpatient'
             AND onset_at >= admitted_at + $hospital_acquired_after_hours THEN 'hospital_acquired'
        WHEN encounter_class = 'inpatient' THEN 'present_on_admission'
        ELSE 'community'
    END AS setting,
    onset_result_id,
    first_treatment_at
FROM potassium_episodes_located
ORDER BY patient_id, onset_at, episode_id;
