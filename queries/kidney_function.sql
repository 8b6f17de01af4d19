-- kidney_function: every creatinine result with its eGFR, KDIGO GFR category and AKI test.
--
-- DEFINITION
--  1. Creatinine results: lab results with a LOINC code in $creatinine_loinc and a positive
--     value (the store keeps creatinine in mg/dL; µmol/L is converted at ingest, 88.4 µmol/L =
--     1 mg/dL).
--  2. eGFR: the race-free CKD-EPI 2021 creatinine equation (Inker et al., N Engl J Med
--     2021;385:1737-1749; the UDF ckd_epi_2021, crates/kcohort-model/src/kidney.rs):
--     142 x min(Scr/k, 1)^a x max(Scr/k, 1)^-1.200 x 0.9938^age x 1.012 if female,
--     k = 0.7 (F) / 0.9 (M), a = -0.241 (F) / -0.302 (M). Age in years = calendar year of
--     collected_at (UTC) minus birth_year (the store has birth years only, so an age can be one
--     year too high). No eGFR below age 18 or for sex U. gfr_category: KDIGO 2012 G1 >= 90,
--     G2 60-89, G3a 45-59, G3b 30-44, G4 15-29, G5 < 15.
--  3. AKI (KDIGO 2012, creatinine criteria): the result is an AKI result when
--       its rise over the lowest creatinine of the same patient collected in the
--       $aki_absolute_window_hours (default 48) before it is at least
--       $aki_absolute_rise_mg_dl (default 0.3), or
--       it is at least $aki_ratio (default 1.5) times the lowest creatinine collected in the
--       $aki_baseline_days (default 7) before it.
--     "Before" is strictly earlier (collected_at - window <= earlier < collected_at). The
--     comparisons allow 1e-9 mg/dL for rounding of decimal inputs (1.2 - 0.9 is 0.3). Stage
--     (kdigo_aki_stage): 3 when the ratio is >= 3.0 or creatinine >= $aki_stage3_creatinine_mg_dl
--     (default 4.0), 2 when the ratio is >= 2.0, else 1. Urine output and dialysis are not in
--     the data, so stages from them are not given.
--
-- DECISIONS
--  a. Without a creatinine in the 7 days before, there is no ratio (the longer-term baseline
--     some algorithms use, a median over the past year, is not used).
--  b. A rise of 26.5 µmol/L converted is 0.2998 mg/dL and stays below 0.3: the criterion is
--     applied in mg/dL, as KDIGO states it first.
--
-- COLUMNS: patient_id, result_id, collected_at, creatinine_mg_dl, age_years, sex, egfr,
-- gfr_category, lowest_prior_short (within the rise window), lowest_prior_baseline (within the
-- baseline window), rise_mg_dl, ratio, aki, aki_stage (NULL unless aki).
--
-- PARAMETERS: $creatinine_loinc, $aki_absolute_window_hours, $aki_absolute_rise_mg_dl,
-- $aki_ratio, $aki_baseline_days, $aki_stage3_creatinine_mg_dl.

CREATE VIEW creatinine_results AS
SELECT
    l.patient_id,
    l.result_id,
    l.collected_at,
    CAST(l.collected_at AS BIGINT) AS t_us,
    l.value AS creatinine_mg_dl,
    CAST(date_part('year', l.collected_at) AS DOUBLE) - CAST(p.birth_year AS DOUBLE) AS age_years,
    p.sex
FROM lab_results l
JOIN patients p ON p.patient_id = l.patient_id
WHERE l.loinc IN ($creatinine_loinc) AND l.value > 0;

-- The lowest earlier creatinine in each window (a self-join: patients have few results).
CREATE VIEW creatinine_prior AS
SELECT
    c.result_id,
    MIN(p.creatinine_mg_dl) FILTER (WHERE p.t_us >= c.t_us - $aki_absolute_window_hours_us)
        AS lowest_prior_short,
    MIN(p.creatinine_mg_dl) FILTER (WHERE p.t_us >= c.t_us - $aki_baseline_days_us)
        AS lowest_prior_baseline
FROM creatinine_results c
JOIN creatinine_results p
    ON p.patient_id = c.patient_id
    AND p.t_us < c.t_us
    AND p.t_us >= c.t_us - greatest($aki_absolute_window_hours_us, $aki_baseline_days_us)
GROUP BY c.result_id;

CREATE VIEW creatinine_tested AS
SELECT
    c.*,
    ckd_epi_2021(c.creatinine_mg_dl, c.age_years, c.sex) AS egfr,
    p.lowest_prior_short,
    p.lowest_prior_baseline,
    c.creatinine_mg_dl - p.lowest_prior_short AS rise_mg_dl,
    c.creatinine_mg_dl / p.lowest_prior_baseline AS ratio,
    coalesce(c.creatinine_mg_dl - p.lowest_prior_short >= $aki_absolute_rise_mg_dl - 1e-9, false)
        OR coalesce(c.creatinine_mg_dl >= $aki_ratio * p.lowest_prior_baseline - 1e-9, false)
        AS aki
FROM creatinine_results c
LEFT JOIN creatinine_prior p ON p.result_id = c.result_id;

SELECT
    patient_id,
    result_id,
    collected_at,
    creatinine_mg_dl,
    age_years,
    sex,
    egfr,
    kdigo_gfr_category(egfr) AS gfr_category,
    lowest_prior_short,
    lowest_prior_baseline,
    rise_mg_dl,
    ratio,
    aki,
    CASE WHEN aki THEN kdigo_aki_stage(ratio, creatinine_mg_dl, $aki_stage3_creatinine_mg_dl) END
        AS aki_stage
FROM creatinine_tested
ORDER BY patient_id, collected_at, result_id;
