-- episode_outcomes: what followed each high-potassium episode, one row per episode.
--
-- DEFINITION
--   onset_resulted_at    when the onset result was reported (NULL when the extract lacks it).
--   treated              a potassium-lowering administration in the treatment window
--                        (episode_treatments); first_treatment_at, first_treatment_delay_minutes
--                        and first_treatment_from_result_minutes for the earliest of any class.
--   first_repeat_at      the first used potassium result (not hemolysed) collected strictly
--                        after onset_at; repeat_delay_hours from onset.
--   first_insulin_at     the first insulin administration of the treatment window.
--   hypoglycemia         a glucose ($glucose_loinc) strictly below $hypoglycemia_below_mg_dl
--                        (default 70 mg/dL = 3.9 mmol/L) collected after an insulin
--                        administration of the treatment window and at most
--                        $hypoglycemia_window_hours (default 6 h) after it (insulin_at <
--                        collected_at <= insulin_at + 6 h); lowest_glucose_after_insulin is
--                        the lowest glucose in those windows (mg/dL), hypoglycemia_at the first
--                        time below the threshold.
--   rebound              n_rebounds > 0 (the episode definition's rebound).
--   death_at, died_within_window: death at or after onset and at most $death_within_days
--                        (default 30) after it.
--
-- PARAMETERS: $glucose_loinc, $hypoglycemia_below_mg_dl, $hypoglycemia_window_hours,
-- $death_within_days; the views of episode_treatments.sql (which runs first).

CREATE VIEW episode_first_repeat AS
SELECT o.episode_id, MIN(r.collected_at) AS first_repeat_at
FROM episode_onset_results o
JOIN potassium_results r ON r.patient_id = o.patient_id
WHERE r.has_value AND NOT r.hemolysed AND r.collected_at > o.onset_at
GROUP BY o.episode_id;

CREATE VIEW episode_glucose_after_insulin AS
SELECT w.episode_id, MIN(g.value) AS lowest_glucose,
       MIN(g.collected_at) FILTER (WHERE g.value < $hypoglycemia_below_mg_dl) AS hypoglycemia_at
FROM episode_treatment_windows w
JOIN lab_results g ON g.patient_id = w.patient_id
WHERE w.treatment_class = 'insulin'
  AND g.loinc IN ($glucose_loinc) AND g.value IS NOT NULL
  AND CAST(g.collected_at AS BIGINT) > w.start_us
  AND CAST(g.collected_at AS BIGINT) <= w.start_us + $hypoglycemia_window_hours_us
GROUP BY w.episode_id;

CREATE VIEW episode_first_treatment AS
SELECT episode_id,
       MIN(start_at) AS first_treatment_at,
       MIN(start_at) FILTER (WHERE treatment_class = 'insulin') AS first_insulin_at,
       MIN(start_us) AS first_us
FROM episode_treatment_windows
GROUP BY episode_id;

SELECT
    e.episode_id,
    e.patient_id,
    e.onset_at,
    o.onset_resulted_at,
    t.first_treatment_at IS NOT NULL AS treated,
    t.first_treatment_at,
    (t.first_us - CAST(e.onset_at AS BIGINT)) / 60000000.0 AS first_treatment_delay_minutes,
    (t.first_us - CAST(o.onset_resulted_at AS BIGINT)) / 60000000.0
        AS first_treatment_from_result_minutes,
    r.first_repeat_at,
    (CAST(r.first_repeat_at AS BIGINT) - CAST(e.onset_at AS BIGINT)) / 3600000000.0
        AS repeat_delay_hours,
    t.first_insulin_at,
    coalesce(g.hypoglycemia_at IS NOT NULL, false) AS hypoglycemia,
    g.lowest_glucose AS lowest_glucose_after_insulin,
    g.hypoglycemia_at,
    e.n_rebounds > 0 AS rebound,
    p.death_at,
    coalesce(p.death_at >= e.onset_at AND p.death_at <= e.onset_at + $death_within_days, false)
        AS died_within_window
FROM episodes e
JOIN episode_onset_results o ON o.episode_id = e.episode_id
LEFT JOIN episode_first_treatment t ON t.episode_id = e.episode_id
LEFT JOIN episode_first_repeat r ON r.episode_id = e.episode_id
LEFT JOIN episode_glucose_after_insulin g ON g.episode_id = e.episode_id
LEFT JOIN patients p ON p.patient_id = e.patient_id
ORDER BY e.patient_id, e.onset_at, e.episode_id;
