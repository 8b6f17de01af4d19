-- episode_causes: the possible causes of each high-potassium episode, one row per (episode,
-- cause), with the evidence a reviewer needs to see why. Multi-label: an episode may have
-- several causes; an episode with none has one row with cause 'none_identified'.
--
-- DEFINITION (onset = the episode's onset_at; every window is a study parameter)
--  drug classes (cause = the class name, cause_group 'drug'): an era of the class
--      (exposure_eras) with era_start <= onset and onset <= era_end + the class's lookback
--      (default $drug_lookback_hours, 168 h; potassium 48 h, suxamethonium 1 h), and, where the
--      class sets them, onset - era_start <= started_within_days (trimethoprim 14 days) and
--      onset - era_start >= min_exposure_days (heparins 3 days). Of several such eras the one
--      that started last is the evidence. The class `potassium` (supplements and IV
--      potassium) is the iatrogenic cause. Comparator classes (cause = false in the study, e.g.
--      calcium-channel blockers) are never causes.
--  acute_kidney_injury (group 'kidney'): a kidney_function result with aki collected from
--      $aki_before_hours (168) before to $aki_after_hours (24) after onset (inclusive); the
--      evidence is the highest stage, then the earliest.
--  ckd_g3b_or_worse (group 'kidney'): the baseline eGFR (episode_kidney: the median eGFR of
--      the year up to and including onset) is strictly below $ckd_egfr_below (45: KDIGO G3b,
--      G4, G5).
--  hyperglycemia, metabolic_acidosis, hyperosmolality, rhabdomyolysis, tumour_lysis (group
--      'lab'): a lab_conditions finding within $lab_window_hours (24) before or after onset
--      (inclusive); the evidence is the one nearest to onset, then the earliest.
--  adrenal_insufficiency (group 'diagnosis'): a diagnosis whose ICD-10 code (dots ignored)
--      starts with one of $adrenal_icd10 (E27.1-E27.4, N25.8), recorded at or before onset or on
--      the episode's covering encounter.
--
-- Every episode of the episodes table is attributed, unconfirmed ones too (reports choose).
--
-- COLUMNS: episode_id, patient_id, onset_at, cause, cause_group, evidence_id (era_id,
-- result_id or the ICD-10 code), evidence_at (era start, result or diagnosis time),
-- evidence_value (eGFR, creatinine, glucose ...; NULL for drugs and diagnoses), evidence (in
-- words).
--
-- PARAMETERS: $drug_class_codes, $drug_lookback_hours, $aki_before_hours, $aki_after_hours,
-- $ckd_egfr_below, $lab_window_hours, $adrenal_icd10.

CREATE VIEW drug_class_windows AS
SELECT drug_class, MIN(lookback_us) AS lookback_us, MIN(started_within_us) AS started_within_us,
       MIN(min_exposure_us) AS min_exposure_us
FROM $drug_class_codes
WHERE is_cause = 1
GROUP BY drug_class;

CREATE VIEW episode_drug_causes AS
SELECT episode_id, patient_id, onset_at, drug_class AS cause, 'drug' AS cause_group,
       era_id AS evidence_id, era_start AS evidence_at, CAST(NULL AS DOUBLE) AS evidence_value,
       drug_class || ' era from ' || to_char(era_start, '%Y-%m-%d %H:%M') || ' to ' ||
           to_char(era_end, '%Y-%m-%d %H:%M') || ' UTC, day ' ||
           CAST(floor((onset_us - start_us) / 86400000000.0) + 1 AS BIGINT) || ' at onset, ' ||
           CASE WHEN new_user THEN 'new user' ELSE 'prevalent user' END ||
           CASE WHEN onset_us > end_us THEN ', ended before onset' ELSE '' END AS evidence
FROM (
    SELECT o.*, x.era_id, x.drug_class, x.era_start, x.era_end, x.new_user,
           CAST(x.era_start AS BIGINT) AS start_us, CAST(x.era_end AS BIGINT) AS end_us,
           ROW_NUMBER() OVER (PARTITION BY o.episode_id, x.drug_class
                              ORDER BY x.era_start DESC, x.era_id) AS rank
    FROM episode_onsets o
    JOIN exposure_eras x ON x.patient_id = o.patient_id
    JOIN drug_class_windows w ON w.drug_class = x.drug_class
    WHERE CAST(x.era_start AS BIGINT) <= o.onset_us
      AND o.onset_us <= CAST(x.era_end AS BIGINT) + w.lookback_us
      AND o.onset_us - CAST(x.era_start AS BIGINT) <= w.started_within_us
      AND o.onset_us - CAST(x.era_start AS BIGINT) >= w.min_exposure_us
) AS matched
WHERE rank = 1;

CREATE VIEW episode_aki_causes AS
SELECT episode_id, patient_id, onset_at, 'acute_kidney_injury' AS cause, 'kidney' AS cause_group,
       result_id AS evidence_id, collected_at AS evidence_at, creatinine_mg_dl AS evidence_value,
       'creatinine ' || round(creatinine_mg_dl, 2) || ' mg/dL at ' ||
           to_char(collected_at, '%Y-%m-%d %H:%M') || ' UTC, KDIGO stage ' || aki_stage ||
           coalesce(', ' || round(ratio, 2) || ' x the lowest of the prior days', '') AS evidence
FROM (
    SELECT o.*, k.result_id, k.collected_at, k.creatinine_mg_dl, k.aki_stage, k.ratio,
           ROW_NUMBER() OVER (PARTITION BY o.episode_id
                              ORDER BY k.aki_stage DESC, k.collected_at, k.result_id) AS rank
    FROM episode_onsets o
    JOIN kidney_function k ON k.patient_id = o.patient_id
    WHERE k.aki
      AND CAST(k.collected_at AS BIGINT) >= o.onset_us - $aki_before_hours_us
      AND CAST(k.collected_at AS BIGINT) <= o.onset_us + $aki_after_hours_us
) AS matched
WHERE rank = 1;

CREATE VIEW episode_ckd_causes AS
SELECT o.episode_id, o.patient_id, o.onset_at, 'ckd_g3b_or_worse' AS cause,
       'kidney' AS cause_group, b.latest_egfr_result_id AS evidence_id,
       b.latest_egfr_at AS evidence_at, b.baseline_egfr AS evidence_value,
       'baseline eGFR ' || round(b.baseline_egfr, 1) || ' mL/min/1.73 m2 (' ||
           b.baseline_gfr_category || ', median of ' || b.n_egfr ||
           ' result(s) in the year up to onset)' AS evidence
FROM episode_onsets o
JOIN episode_kidney b ON b.episode_id = o.episode_id
WHERE b.baseline_egfr < $ckd_egfr_below;

CREATE VIEW episode_lab_causes AS
SELECT episode_id, patient_id, onset_at, condition AS cause, 'lab' AS cause_group,
       result_id AS evidence_id, at AS evidence_at, value AS evidence_value,
       detail || ' at ' || to_char(at, '%Y-%m-%d %H:%M') || ' UTC' AS evidence
FROM (
    SELECT o.*, c.condition, c.result_id, c.at, c.value, c.detail,
           ROW_NUMBER() OVER (PARTITION BY o.episode_id, c.condition
                              ORDER BY abs(CAST(c.at AS BIGINT) - o.onset_us), c.at, c.result_id)
               AS rank
    FROM episode_onsets o
    JOIN lab_conditions c ON c.patient_id = o.patient_id
    WHERE CAST(c.at AS BIGINT) >= o.onset_us - $lab_window_hours_us
      AND CAST(c.at AS BIGINT) <= o.onset_us + $lab_window_hours_us
) AS matched
WHERE rank = 1;

CREATE VIEW episode_diagnosis_causes AS
SELECT episode_id, patient_id, onset_at, 'adrenal_insufficiency' AS cause,
       'diagnosis' AS cause_group, icd10 AS evidence_id, recorded_at AS evidence_at,
       CAST(NULL AS DOUBLE) AS evidence_value,
       'diagnosis ' || icd10 || ' recorded ' || to_char(recorded_at, '%Y-%m-%d %H:%M') || ' UTC'
           AS evidence
FROM (
    SELECT o.*, d.icd10, d.recorded_at,
           ROW_NUMBER() OVER (PARTITION BY o.episode_id ORDER BY d.recorded_at, d.icd10) AS rank
    FROM episode_onsets o
    JOIN diagnoses d ON d.patient_id = o.patient_id
    WHERE atc_matches_any(replace(d.icd10, '.', ''), $adrenal_icd10)
      AND (d.recorded_at <= o.onset_at OR d.encounter_id = o.encounter_id)
) AS matched
WHERE rank = 1;

CREATE VIEW episode_found_causes AS
SELECT * FROM episode_drug_causes
UNION ALL SELECT * FROM episode_aki_causes
UNION ALL SELECT * FROM episode_ckd_causes
UNION ALL SELECT * FROM episode_lab_causes
UNION ALL SELECT * FROM episode_diagnosis_causes;

-- Every episode with its causes; an episode without any gets one 'none_identified' row (a left
-- join, so the cause views run once).
SELECT
    o.episode_id,
    o.patient_id,
    o.onset_at,
    coalesce(f.cause, 'none_identified') AS cause,
    coalesce(f.cause_group, 'none') AS cause_group,
    f.evidence_id,
    f.evidence_at,
    f.evidence_value,
    coalesce(f.evidence, 'no drug, kidney, laboratory or diagnosis cause found in the windows')
        AS evidence
FROM episode_onsets o
LEFT JOIN episode_found_causes f ON f.episode_id = o.episode_id
ORDER BY o.patient_id, o.onset_at, o.episode_id, cause_group, cause;
