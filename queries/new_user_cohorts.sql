-- new_user_cohorts: new users of each drug class, one row per class and patient, with follow-up
-- to the first high-potassium episode and baseline covariates measured before entry only.
--
-- DEFINITION
--  1. Entry. A patient enters the cohort of a class at the start of their first new-user era of
--     it (exposure_eras.new_user: no era of the class in the washout before, and observed that
--     long). entry_at = era_start; later eras of the class do not enter again.
--  2. Follow-up starts at entry_at and never before (no immortal time). The outcome is the first
--     confirmed high-potassium episode (episodes, not unconfirmed) with onset_at strictly after
--     entry_at. Death (patients.death_at) competes with it. Two ends of follow-up:
--       as-treated:  the first of the outcome, death, era_end + $dispense_grace_days (default
--                    30), the extract end;
--       intention-to-treat: the first of the outcome, death, entry_at + $cohort_horizon_days
--                    (default 90), the extract end.
--     on_drug_days: days from entry to era_end + $dispense_grace_days (or the extract end): the
--     time on drug, for the time-varying exposure model.
--     Each has its end_at, event ('episode', 'death' or 'censored'; an outcome and a death at the
--     same instant count as the outcome) and follow-up in days.
--  3. in_episode_at_entry: entry_at falls inside an episode (onset_at <= entry_at <= end_at);
--     analyses leave these entries out (their outcome is already present).
--  4. Baseline covariates, from data strictly before entry_at only:
--       age_years, age_band   calendar year of entry (UTC) minus birth_year; bands 18-44, 45-64,
--                             65-74, 75+ ('under 18' below);
--       sex;
--       egfr_band             'below 45' / '45 or more' / 'unknown' with the study's
--                             $ckd_egfr_below (the eGFR-interaction strata);
--       baseline_egfr, egfr_category: median CKD-EPI 2021 eGFR of the creatinine results in
--                             [entry - $cohort_baseline_days, entry) and its KDIGO category
--                             ('unknown' without one);
--       recent_aki            an AKI result (kidney_function.aki) in [entry -
--                             $cohort_recent_aki_days, entry);
--       diabetes              a glucose-lowering medication event (ATC A10) or a hyperglycemia
--                             finding (lab_conditions) before entry, within the baseline window;
--       other_classes         other drug classes of the study with an era in use at entry
--                             (era_start < entry_at <= era_end), sorted, ', '-separated;
--                             n_other_classes their number;
--       baseline_potassium    the latest used potassium result in the baseline window.
--
-- PARAMETERS: $dispense_grace_days, $ckd_egfr_below (and its text, $ckd_egfr_below_text),
-- $cohort_horizon_days, $cohort_baseline_days, $cohort_recent_aki_days, $extract_end; the views of earlier definitions (potassium_results).

-- No ORDER BY (readers order what they read): sorting these wide joined rows made DataFusion 55
-- reserve several GB for one batch (its size estimate of shared string-view buffers) on a
-- 1,000,000-patient store.

CREATE VIEW cohort_entries AS
SELECT
    drug_class,
    patient_id,
    first_value(era_id ORDER BY era_start, era_id) AS era_id,
    MIN(era_start) AS entry_at,
    first_value(era_end ORDER BY era_start, era_id) AS era_end,
    CAST(MIN(era_start) AS BIGINT) AS entry_us
FROM exposure_eras
WHERE new_user
GROUP BY drug_class, patient_id;

CREATE VIEW cohort_outcomes AS
SELECT c.drug_class, c.patient_id,
       MIN(e.onset_at) FILTER (WHERE NOT e.unconfirmed AND e.onset_at > c.entry_at)
           AS first_episode_at,
       bool_or(e.onset_at <= c.entry_at AND c.entry_at <= e.end_at) AS in_episode_at_entry
FROM cohort_entries c
JOIN episodes e ON e.patient_id = c.patient_id
GROUP BY c.drug_class, c.patient_id;

CREATE VIEW cohort_baseline_kidney AS
SELECT c.drug_class, c.patient_id,
       median(k.egfr) FILTER (WHERE k.egfr IS NOT NULL) AS baseline_egfr,
       bool_or(k.aki AND CAST(k.collected_at AS BIGINT) >= c.entry_us - $cohort_recent_aki_days_us)
           AS recent_aki
FROM cohort_entries c
JOIN kidney_function k ON k.patient_id = c.patient_id
WHERE CAST(k.collected_at AS BIGINT) >= c.entry_us - $cohort_baseline_days_us
  AND k.collected_at < c.entry_at
GROUP BY c.drug_class, c.patient_id;

CREATE VIEW cohort_baseline_potassium AS
SELECT c.drug_class, c.patient_id,
       first_value(p.value ORDER BY p.collected_at DESC, p.result_id DESC) AS baseline_potassium
FROM cohort_entries c
JOIN potassium_results p ON p.patient_id = c.patient_id
WHERE p.has_value AND NOT p.hemolysed
  AND CAST(p.collected_at AS BIGINT) >= c.entry_us - $cohort_baseline_days_us
  AND p.collected_at < c.entry_at
GROUP BY c.drug_class, c.patient_id;

CREATE VIEW cohort_diabetes AS
SELECT DISTINCT c.drug_class, c.patient_id
FROM cohort_entries c
JOIN (
    SELECT patient_id, start_at AS at FROM medication_events WHERE starts_with(atc, 'A10')
    UNION ALL
    SELECT patient_id, at FROM lab_conditions WHERE condition = 'hyperglycemia'
) d ON d.patient_id = c.patient_id
WHERE CAST(d.at AS BIGINT) >= c.entry_us - $cohort_baseline_days_us AND d.at < c.entry_at;

CREATE VIEW cohort_other_classes AS
SELECT c.drug_class, c.patient_id,
       array_to_string(array_sort(array_agg(DISTINCT x.drug_class)), ', ') AS other_classes,
       CAST(COUNT(DISTINCT x.drug_class) AS BIGINT) AS n_other_classes
FROM cohort_entries c
JOIN exposure_eras x
    ON x.patient_id = c.patient_id
    AND x.drug_class <> c.drug_class
    AND x.era_start < c.entry_at
    AND c.entry_at <= x.era_end
GROUP BY c.drug_class, c.patient_id;

CREATE VIEW cohort_followed AS
SELECT
    c.*,
    p.sex,
    CAST(date_part('year', c.entry_at) AS DOUBLE) - CAST(p.birth_year AS DOUBLE) AS age_years,
    p.death_at,
    o.first_episode_at,
    coalesce(o.in_episode_at_entry, false) AS in_episode_at_entry,
    least(c.era_end + $dispense_grace_days, $extract_end) AS as_treated_limit,
    least(c.entry_at + $cohort_horizon_days, $extract_end) AS itt_limit
FROM cohort_entries c
JOIN patients p ON p.patient_id = c.patient_id
LEFT JOIN cohort_outcomes o ON o.drug_class = c.drug_class AND o.patient_id = c.patient_id;

SELECT
    f.drug_class,
    f.patient_id,
    f.era_id,
    f.entry_at,
    f.era_end,
    f.in_episode_at_entry,
    least(f.first_episode_at, f.death_at, f.as_treated_limit) AS as_treated_end_at,
    CASE
        WHEN f.first_episode_at IS NOT NULL AND f.first_episode_at <= f.as_treated_limit
             AND (f.death_at IS NULL OR f.first_episode_at <= f.death_at) THEN 'episode'
        WHEN f.death_at IS NOT NULL AND f.death_at <= f.as_treated_limit THEN 'death'
        ELSE 'censored'
    END AS as_treated_event,
    (CAST(least(f.first_episode_at, f.death_at, f.as_treated_limit) AS BIGINT) - f.entry_us)
        / 86400000000.0 AS as_treated_days,
    least(f.first_episode_at, f.death_at, f.itt_limit) AS itt_end_at,
    CASE
        WHEN f.first_episode_at IS NOT NULL AND f.first_episode_at <= f.itt_limit
             AND (f.death_at IS NULL OR f.first_episode_at <= f.death_at) THEN 'episode'
        WHEN f.death_at IS NOT NULL AND f.death_at <= f.itt_limit THEN 'death'
        ELSE 'censored'
    END AS itt_event,
    (CAST(least(f.first_episode_at, f.death_at, f.itt_limit) AS BIGINT) - f.entry_us)
        / 86400000000.0 AS itt_days,
    (CAST(f.as_treated_limit AS BIGINT) - f.entry_us) / 86400000000.0 AS on_drug_days,
    f.sex,
    f.age_years,
    CASE
        WHEN f.age_years < 18 THEN 'under 18'
        WHEN f.age_years < 45 THEN '18-44'
        WHEN f.age_years < 65 THEN '45-64'
        WHEN f.age_years < 75 THEN '65-74'
        ELSE '75+'
    END AS age_band,
    k.baseline_egfr,
    coalesce(kdigo_gfr_category(k.baseline_egfr), 'unknown') AS egfr_category,
    CASE
        WHEN k.baseline_egfr IS NULL THEN 'unknown'
        WHEN k.baseline_egfr < $ckd_egfr_below THEN 'below ' || $ckd_egfr_below_text
        ELSE $ckd_egfr_below_text || ' or more'
    END AS egfr_band,
    coalesce(k.recent_aki, false) AS recent_aki,
    d.patient_id IS NOT NULL AS diabetes,
    coalesce(x.other_classes, '') AS other_classes,
    coalesce(x.n_other_classes, CAST(0 AS BIGINT)) AS n_other_classes,
    b.baseline_potassium
FROM cohort_followed f
LEFT JOIN cohort_baseline_kidney k ON k.drug_class = f.drug_class AND k.patient_id = f.patient_id
LEFT JOIN cohort_diabetes d ON d.drug_class = f.drug_class AND d.patient_id = f.patient_id
LEFT JOIN cohort_other_classes x ON x.drug_class = f.drug_class AND x.patient_id = f.patient_id
LEFT JOIN cohort_baseline_potassium b
    ON b.drug_class = f.drug_class AND b.patient_id = f.patient_id;
