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

-- Steps 3-4: the used results in order, numbered (seq), each high, normal or in between.
-- The windows run over all patients in one order (patient_id first) instead of PARTITION BY
-- patient_id: DataFusion 55 pays a large cost per window partition, and most patients have few
-- results. A row's predecessor therefore counts only when it is the same patient's.
CREATE VIEW potassium_sequence AS
SELECT
    patient_id,
    result_id,
    collected_at,
    value,
    value > $high_above AS is_high,
    value <= $normal_at_or_below AS is_normal,
    ROW_NUMBER() OVER w AS seq,
    coalesce(LAG(patient_id) OVER w = patient_id, false) AS has_previous,
    LAG(value <= $normal_at_or_below) OVER w AS previous_is_normal,
    LAG(collected_at) OVER w AS previous_collected_at,
    RANK() OVER (ORDER BY patient_id, collected_at) AS first_seq_at_time
FROM potassium_results
WHERE has_value AND NOT hemolysed
WINDOW w AS (ORDER BY patient_id, collected_at, result_id);

-- Step 5: cut each patient's sequence into segments. A segment ends at each normal value and
-- before each gap of more than $max_gap_hours (and at each patient's last result). An episode
-- never spans a segment boundary: a normal value closes it, and so does a gap. Inside a
-- segment the episode (if any) opens at the first high value and runs to the segment's last
-- result; it is resolved exactly when that last result is normal (only a segment's last result
-- can be normal). Segment numbers are unique over all patients.
CREATE VIEW potassium_segments AS
SELECT
    *,
    SUM(CASE WHEN starts_segment THEN 1 ELSE 0 END) OVER forward AS segment,
    MAX(CASE WHEN starts_segment THEN seq END) OVER forward AS segment_start_seq,
    MAX(CASE WHEN is_high THEN seq END) OVER forward AS latest_high_seq
FROM (
    SELECT
        *,
        coalesce(
            NOT has_previous
            OR previous_is_normal
            OR collected_at > previous_collected_at + $max_gap_hours,
            true) AS starts_segment
    FROM potassium_sequence
) AS sequence_with_starts
WINDOW forward AS (ORDER BY patient_id, collected_at, result_id
                   ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW);

-- For n_results (decision b): first_seq_at_time (above) and last_seq_at_time number the first
-- and last result of the patient collected at the same instant. Counted from the other end, a
-- row's number minus the rank of its instant is the number of results at that instant after it.
-- (A separate step, so that DataFusion sorts once forward for the steps above and once backward
-- here.)
CREATE VIEW potassium_instants AS
SELECT
    *,
    seq + (ROW_NUMBER() OVER (ORDER BY patient_id DESC, collected_at DESC, result_id DESC)
           - RANK() OVER (ORDER BY patient_id DESC, collected_at DESC)) AS last_seq_at_time
FROM potassium_segments;

-- Step 5: one run per segment that has a high value (an episode before rebound merging), made
-- of the segment's rows from its first high value on (a row is in the run when a high value of
-- its segment came at or before it).
CREATE VIEW potassium_runs AS
SELECT
    patient_id,
    segment,
    MIN(collected_at) FILTER (WHERE is_high) AS onset_at,
    first_value(value ORDER BY seq) FILTER (WHERE is_high) AS onset_value,
    first_value(result_id ORDER BY seq) FILTER (WHERE is_high) AS onset_result_id,
    first_value(first_seq_at_time ORDER BY seq) FILTER (WHERE is_high) AS first_seq,
    MAX(last_seq_at_time) AS last_seq,
    MAX(value) AS peak_value,
    MAX(collected_at) AS end_at,
    bool_or(is_normal) AS resolved,
    SUM(CASE WHEN is_high THEN 1 ELSE 0 END) AS n_high
FROM potassium_instants
WHERE latest_high_seq >= segment_start_seq
GROUP BY patient_id, segment;

-- Step 6: a run that starts strictly less than $rebound_hours after the end of the preceding
-- run, when that run was resolved, continues its episode; every other run starts a new one.
CREATE VIEW potassium_runs_numbered AS
SELECT
    *,
    SUM(starts_episode) OVER (PARTITION BY patient_id ORDER BY segment
                              ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS episode_number
FROM (
    SELECT
        *,
        CASE
            WHEN LAG(resolved) OVER runs
                 AND onset_at < LAG(end_at) OVER runs + $rebound_hours THEN 0
            ELSE 1
        END AS starts_episode
    FROM potassium_runs
    WINDOW runs AS (PARTITION BY patient_id ORDER BY segment)
) AS linked_runs;

-- Step 6: merge the runs of each episode. Every run but the last was resolved (else it could
-- not have been re-opened), so the episode is resolved exactly when all its runs are.
CREATE VIEW potassium_episodes_merged AS
SELECT
    patient_id,
    episode_number,
    MIN(onset_at) AS onset_at,
    first_value(onset_value ORDER BY segment) AS onset_value,
    first_value(onset_result_id ORDER BY segment) AS onset_result_id,
    MAX(peak_value) AS peak_value,
    MAX(end_at) AS end_at,
    bool_and(resolved) AS resolved,
    CAST(MAX(last_seq) - MIN(first_seq) + 1 AS BIGINT) AS n_results,
    CAST(SUM(n_high) AS BIGINT) AS n_high,
    CAST(COUNT(*) - 1 AS BIGINT) AS n_rebounds
FROM potassium_runs_numbered
GROUP BY patient_id, episode_number;

-- Step 7: potassium-lowering treatments as the pseudohyperkalemia rule counts them.
CREATE VIEW potassium_lowering_administrations AS
SELECT patient_id, start_at
FROM medication_events
WHERE kind = 'administer' AND atc_matches_any(atc, $potassium_lowering_atc);

-- Step 7: the first potassium-lowering treatment in [onset_at, end_at], if any.
CREATE VIEW potassium_episodes_treated AS
SELECT *
FROM (
    SELECT
        e.*,
        t.start_at AS first_treatment_at,
        ROW_NUMBER() OVER (PARTITION BY e.patient_id, e.episode_number
                           ORDER BY t.start_at) AS treatment_rank
    FROM potassium_episodes_merged e
    LEFT JOIN potassium_lowering_administrations t
        ON t.patient_id = e.patient_id
        AND t.start_at >= e.onset_at
        AND t.start_at <= e.end_at
) AS with_treatment
WHERE treatment_rank = 1;

-- Step 9: the covering encounter of the onset, by class preference, admission, encounter_id.
CREATE VIEW potassium_episodes_located AS
SELECT *
FROM (
    SELECT
        e.*,
        c.encounter_id,
        c.class AS encounter_class,
        c.unit,
        c.admitted_at,
        ROW_NUMBER() OVER (
            PARTITION BY e.patient_id, e.episode_number
            ORDER BY
                CASE c.class WHEN 'inpatient' THEN 1 WHEN 'emergency' THEN 2 ELSE 3 END,
                c.admitted_at,
                c.encounter_id
        ) AS encounter_rank
    FROM potassium_episodes_treated e
    LEFT JOIN encounters c
        ON c.patient_id = e.patient_id
        AND c.admitted_at <= e.onset_at
        AND e.onset_at < least(coalesce(c.discharged_at, $extract_end), $extract_end)
) AS with_encounter
WHERE encounter_rank = 1;

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
