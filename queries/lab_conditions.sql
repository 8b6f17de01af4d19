-- lab_conditions: laboratory findings that can raise potassium by shifting it out of cells or
-- by reducing its excretion, one row per finding (a result, or a draw of several results).
--
-- DEFINITION (values in the store's canonical units; thresholds are study parameters)
--  hyperglycemia       a glucose ($glucose_loinc) strictly above $hyperglycemia_above_mg_dl
--                      (default 250 mg/dL = 13.9 mmol/L; DOMAIN.md 2.5, the ADA 2009 DKA
--                      glucose criterion).
--  metabolic_acidosis  a bicarbonate or total CO2 ($bicarbonate_loinc) strictly below
--                      $acidosis_bicarbonate_below (default 22 mmol/L; common practice).
--                      anion_gap = Na - (Cl + HCO3) when a sodium and a chloride of the same
--                      patient were collected at the same instant (the same draw).
--  hyperosmolality     calculated osmolality 2 Na + glucose/18 + urea nitrogen/2.8 (mOsm/kg,
--                      with glucose and urea nitrogen in mg/dL; DOMAIN.md 2.6) strictly above
--                      $hyperosmolality_above (default 320), from a sodium, a glucose and a
--                      urea nitrogen of one draw (same patient and collected_at).
--  rhabdomyolysis      a creatine kinase ($creatine_kinase_loinc) at or above
--                      $rhabdomyolysis_ck_multiple x $ck_upper_normal_limit (default 5 x 200
--                      U/L; DOMAIN.md 2.7).
--  tumour_lysis        laboratory tumour lysis after Cairo-Bishop (Br J Haematol 2004;127:3-11),
--                      absolute criteria only: at a result that is one of urate >=
--                      $tls_urate_mg_dl (8), potassium >= $tls_potassium (6.0 mmol/L, used
--                      potassium results only: not hemolysed), phosphate >=
--                      $tls_phosphate_mg_dl (4.5) or corrected calcium <= $tls_calcium_mg_dl
--                      (7.0), when at least two of the four kinds occur within
--                      $tls_window_hours (24) up to and including it (Howard et al., N Engl J
--                      Med 2011;364:1844: two abnormalities within the same 24 h). Corrected
--                      calcium = Ca + 0.8 x (4.0 - albumin g/dL) with an albumin of the same draw,
--                      else Ca (the Payne formula, common practice).
--
-- DECISIONS
--  a. The start of cytotoxic therapy, which Cairo-Bishop's window refers to, is not required:
--     medication data rarely show it; the finding is laboratory evidence only.
--  b. The 25%-change criteria of Cairo-Bishop are not used (Howard et al. drop them).
--  c. A draw is a patient and a collected_at instant. Each qualifying result is one finding; the
--     co-analytes of its draw (sodium and chloride for the anion gap; glucose and urea nitrogen
--     for osmolality; albumin for corrected calcium) are the smallest value of that analyte in
--     the draw when a draw holds several.
--
-- COLUMNS: patient_id, condition, at (collected_at), result_id (the result that triggers the
-- finding), value (glucose, bicarbonate, osmolality, CK, or the number of TLS kinds), anion_gap
-- (acidosis only), detail (the values in words, for a reviewer).
--
-- PARAMETERS: $glucose_loinc, $bicarbonate_loinc, $sodium_loinc, $chloride_loinc,
-- $urea_nitrogen_loinc, $creatine_kinase_loinc, $urate_loinc, $phosphate_loinc,
-- $calcium_loinc, $albumin_loinc, $potassium_loinc, $hemolysis_cutoff and the thresholds above.

-- Results of the co-analytes, by analyte (each read once; a later view that needs a value of
-- the same draw joins on patient_id and collected_at).
CREATE VIEW coanalyte_results AS
SELECT patient_id, collected_at, result_id, value,
    CASE
        WHEN loinc IN ($glucose_loinc) THEN 'glucose'
        WHEN loinc IN ($bicarbonate_loinc) THEN 'bicarbonate'
        WHEN loinc IN ($sodium_loinc) THEN 'sodium'
        WHEN loinc IN ($chloride_loinc) THEN 'chloride'
        WHEN loinc IN ($urea_nitrogen_loinc) THEN 'urea_nitrogen'
        WHEN loinc IN ($creatine_kinase_loinc) THEN 'creatine_kinase'
        WHEN loinc IN ($urate_loinc) THEN 'urate'
        WHEN loinc IN ($phosphate_loinc) THEN 'phosphate'
        WHEN loinc IN ($calcium_loinc) THEN 'calcium'
        WHEN loinc IN ($albumin_loinc) THEN 'albumin'
    END AS analyte
FROM lab_results
WHERE value IS NOT NULL
  AND loinc IN ($glucose_loinc, $bicarbonate_loinc, $sodium_loinc, $chloride_loinc,
                $urea_nitrogen_loinc, $creatine_kinase_loinc, $urate_loinc, $phosphate_loinc,
                $calcium_loinc, $albumin_loinc);

-- Metabolic acidosis with the anion gap of its draw.
CREATE VIEW acidosis_findings AS
SELECT b.patient_id, b.collected_at, b.result_id, b.value,
       MIN(n.value) AS sodium, MIN(c.value) AS chloride
FROM coanalyte_results b
LEFT JOIN coanalyte_results n
    ON n.patient_id = b.patient_id AND n.collected_at = b.collected_at AND n.analyte = 'sodium'
LEFT JOIN coanalyte_results c
    ON c.patient_id = b.patient_id AND c.collected_at = b.collected_at AND c.analyte = 'chloride'
WHERE b.analyte = 'bicarbonate' AND b.value < $acidosis_bicarbonate_below
GROUP BY b.patient_id, b.collected_at, b.result_id, b.value;

-- Calculated osmolality of each sodium result's draw.
CREATE VIEW osmolality_findings AS
SELECT patient_id, collected_at, result_id, sodium, glucose, urea_nitrogen,
       2 * sodium + glucose / 18.0 + urea_nitrogen / 2.8 AS osmolality
FROM (
    SELECT n.patient_id, n.collected_at, n.result_id, n.value AS sodium,
           MIN(g.value) AS glucose, MIN(u.value) AS urea_nitrogen
    FROM coanalyte_results n
    JOIN coanalyte_results g
        ON g.patient_id = n.patient_id AND g.collected_at = n.collected_at AND g.analyte = 'glucose'
    JOIN coanalyte_results u
        ON u.patient_id = n.patient_id AND u.collected_at = n.collected_at
        AND u.analyte = 'urea_nitrogen'
    WHERE n.analyte = 'sodium'
    GROUP BY n.patient_id, n.collected_at, n.result_id, n.value
) AS draws
WHERE 2 * sodium + glucose / 18.0 + urea_nitrogen / 2.8 > $hyperosmolality_above;

-- Tumour lysis: each abnormal result, by kind.
CREATE VIEW tumour_lysis_abnormalities AS
SELECT patient_id, collected_at, CAST(collected_at AS BIGINT) AS t_us, result_id, kind, value
FROM (
    SELECT patient_id, collected_at, result_id, 'urate' AS kind, value
    FROM coanalyte_results WHERE analyte = 'urate' AND value >= $tls_urate_mg_dl
    UNION ALL
    SELECT patient_id, collected_at, result_id, 'phosphate', value
    FROM coanalyte_results WHERE analyte = 'phosphate' AND value >= $tls_phosphate_mg_dl
    UNION ALL
    SELECT patient_id, collected_at, result_id, 'corrected_calcium', corrected
    FROM (
        SELECT c.patient_id, c.collected_at, c.result_id,
               c.value + 0.8 * (4.0 - coalesce(MIN(a.value), 4.0)) AS corrected
        FROM coanalyte_results c
        LEFT JOIN coanalyte_results a
            ON a.patient_id = c.patient_id AND a.collected_at = c.collected_at
            AND a.analyte = 'albumin'
        WHERE c.analyte = 'calcium'
        GROUP BY c.patient_id, c.collected_at, c.result_id, c.value
    ) AS calcium
    WHERE corrected <= $tls_calcium_mg_dl
    UNION ALL
    SELECT patient_id, collected_at, result_id, 'potassium', value
    FROM potassium_results
    WHERE has_value AND NOT hemolysed AND value >= $tls_potassium
) AS abnormal;

CREATE VIEW tumour_lysis_findings AS
SELECT
    patient_id,
    collected_at,
    result_id,
    CAST(COUNT(*) AS DOUBLE) AS n_kinds,
    string_agg(kind, ', ' ORDER BY kind) AS kinds
FROM (
    SELECT DISTINCT a.patient_id, a.collected_at, a.result_id, b.kind
    FROM tumour_lysis_abnormalities a
    JOIN tumour_lysis_abnormalities b
        ON b.patient_id = a.patient_id
        AND b.t_us <= a.t_us
        AND b.t_us >= a.t_us - $tls_window_hours_us
) AS kinds_in_window
GROUP BY patient_id, collected_at, result_id
HAVING COUNT(*) >= 2;

SELECT patient_id, condition, at, result_id, value, anion_gap, detail
FROM (
    SELECT patient_id, 'hyperglycemia' AS condition, collected_at AS at, result_id,
           value, CAST(NULL AS DOUBLE) AS anion_gap,
           'glucose ' || CAST(round(value) AS BIGINT) || ' mg/dL' AS detail
    FROM coanalyte_results WHERE analyte = 'glucose' AND value > $hyperglycemia_above_mg_dl
    UNION ALL
    SELECT patient_id, 'metabolic_acidosis', collected_at, result_id, value,
           sodium - (chloride + value),
           'bicarbonate ' || value || ' mmol/L' || coalesce(
               ', anion gap ' || (sodium - (chloride + value)) || ' mmol/L', '')
    FROM acidosis_findings
    UNION ALL
    SELECT patient_id, 'hyperosmolality', collected_at, result_id, osmolality,
           CAST(NULL AS DOUBLE),
           'calculated osmolality ' || CAST(round(osmolality) AS BIGINT) ||
               ' mOsm/kg (sodium ' || sodium || ' mmol/L, glucose ' || glucose ||
               ' mg/dL, urea nitrogen ' || urea_nitrogen || ' mg/dL)'
    FROM osmolality_findings
    UNION ALL
    SELECT patient_id, 'rhabdomyolysis', collected_at, result_id, value, CAST(NULL AS DOUBLE),
           'creatine kinase ' || CAST(round(value) AS BIGINT) || ' U/L'
    FROM coanalyte_results
    WHERE analyte = 'creatine_kinase'
      AND value >= $rhabdomyolysis_ck_multiple * $ck_upper_normal_limit
    UNION ALL
    SELECT patient_id, 'tumour_lysis', collected_at, result_id, n_kinds, CAST(NULL AS DOUBLE),
           'abnormal within the window: ' || kinds
    FROM tumour_lysis_findings
) AS findings
ORDER BY patient_id, at, condition, result_id;
