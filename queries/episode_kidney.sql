-- episode_kidney: the kidney context of each high-potassium episode, one row per episode.
--
-- DEFINITION
--   baseline_egfr          median CKD-EPI 2021 eGFR (kidney_function) of the creatinine
--                          results collected in [onset - $baseline_egfr_days, onset] (default
--                          365 days; inclusive, so a creatinine of the onset draw counts; the
--                          median resists a single AKI value); NULL without one.
--   n_egfr                 how many results the median is of.
--   baseline_gfr_category  KDIGO category of baseline_egfr; 'unknown' when NULL.
--   latest_egfr_result_id, latest_egfr_at: the latest of those results (the evidence).
--   aki_stage              the highest KDIGO stage of an AKI result (kidney_function.aki)
--                          collected from $aki_before_hours (168) before to $aki_after_hours
--                          (24) after onset, inclusive; NULL when none.
--
-- PARAMETERS: $baseline_egfr_days, $aki_before_hours, $aki_after_hours.

CREATE VIEW episode_onsets AS
SELECT episode_id, patient_id, onset_at, CAST(onset_at AS BIGINT) AS onset_us, encounter_id
FROM episodes;

CREATE VIEW episode_baseline_egfr AS
SELECT o.episode_id, median(k.egfr) AS baseline_egfr, CAST(COUNT(k.egfr) AS BIGINT) AS n_egfr,
       MAX(k.collected_at) AS latest_at, MAX(k.result_id) AS latest_result_id
FROM episode_onsets o
JOIN kidney_function k ON k.patient_id = o.patient_id
WHERE k.egfr IS NOT NULL
  AND CAST(k.collected_at AS BIGINT) >= o.onset_us - $baseline_egfr_days_us
  AND CAST(k.collected_at AS BIGINT) <= o.onset_us
GROUP BY o.episode_id;

CREATE VIEW episode_aki_stage AS
SELECT o.episode_id, MAX(k.aki_stage) AS aki_stage
FROM episode_onsets o
JOIN (SELECT patient_id, collected_at, aki_stage FROM kidney_function WHERE aki) k
    ON k.patient_id = o.patient_id
WHERE CAST(k.collected_at AS BIGINT) >= o.onset_us - $aki_before_hours_us
  AND CAST(k.collected_at AS BIGINT) <= o.onset_us + $aki_after_hours_us
GROUP BY o.episode_id;

SELECT
    o.episode_id,
    o.patient_id,
    b.baseline_egfr,
    coalesce(b.n_egfr, CAST(0 AS BIGINT)) AS n_egfr,
    coalesce(kdigo_gfr_category(b.baseline_egfr), 'unknown') AS baseline_gfr_category,
    b.latest_result_id AS latest_egfr_result_id,
    b.latest_at AS latest_egfr_at,
    a.aki_stage
FROM episode_onsets o
LEFT JOIN episode_baseline_egfr b ON b.episode_id = o.episode_id
LEFT JOIN episode_aki_stage a ON a.episode_id = o.episode_id
ORDER BY o.patient_id, o.episode_id;
