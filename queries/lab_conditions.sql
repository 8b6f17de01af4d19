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
--  c. A draw is a patient and a collected_at instant; results of one draw with several values
--     of one analyte use the smallest result_id.
--
-- COLUMNS: patient_id, condition, at (collected_at), result_id (the result that triggers the
-- finding), value (glucose, bicarbonate, osmolality, CK, or the number of TLS kinds), anion_gap
-- (acidosis only), detail (the values in words, for a reviewer).
--
-- PARAMETERS: $glucose_loinc, $bicarbonate_loinc, $sodium_loinc, $chloride_loinc,
-- $urea_nitrogen_loinc, $creatine_kinase_loinc, $urate_loinc, $phosphate_loinc,
-- $calcium_loinc, $albumin_loinc, $potassium_loinc, $hemolysis_cutoff and the thresholds above.

-- One value per draw and co-analyte (decision c).
CREATE VIEW draw_values AS
SELECT patient_id, collected_at, analyte,
       first_value(value ORDER BY result_id) AS value,
       MIN(result_id) AS result_id
FROM (
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
) AS coded
WHERE analyte IS NOT NULL
GROUP BY patient_id, collected_at, analyte;

-- The draws with the co-analytes side by side.
CREATE VIEW draws AS
SELECT
    patient_id,
    collected_at,
    MAX(value) FILTER (WHERE analyte = 'glucose') AS glucose,
    MAX(result_id) FILTER (WHERE analyte = 'glucose') AS glucose_id,
    MAX(value) FILTER (WHERE analyte = 'bicarbonate') AS bicarbonate,
    MAX(result_id) FILTER (WHERE analyte = 'bicarbonate') AS bicarbonate_id,
    MAX(value) FILTER (WHERE analyte = 'sodium') AS sodium,
    MAX(result_id) FILTER (WHERE analyte = 'sodium') AS sodium_id,
    MAX(value) FILTER (WHERE analyte = 'chloride') AS chloride,
    MAX(value) FILTER (WHERE analyte = 'urea_nitrogen') AS urea_nitrogen,
    MAX(value) FILTER (WHERE analyte = 'creatine_kinase') AS creatine_kinase,
    MAX(result_id) FILTER (WHERE analyte = 'creatine_kinase') AS creatine_kinase_id,
    MAX(value) FILTER (WHERE analyte = 'urate') AS urate,
    MAX(result_id) FILTER (WHERE analyte = 'urate') AS urate_id,
    MAX(value) FILTER (WHERE analyte = 'phosphate') AS phosphate,
    MAX(result_id) FILTER (WHERE analyte = 'phosphate') AS phosphate_id,
    MAX(value) FILTER (WHERE analyte = 'calcium') AS calcium,
    MAX(result_id) FILTER (WHERE analyte = 'calcium') AS calcium_id,
    MAX(value) FILTER (WHERE analyte = 'albumin') AS albumin
FROM draw_values
GROUP BY patient_id, collected_at;

-- Tumour lysis: each abnormal result, by kind.
CREATE VIEW tumour_lysis_abnormalities AS
SELECT patient_id, collected_at, CAST(collected_at AS BIGINT) AS t_us, result_id, kind, value
FROM (
    SELECT patient_id, collected_at, urate_id AS result_id, 'urate' AS kind, urate AS value
    FROM draws WHERE urate >= $tls_urate_mg_dl
    UNION ALL
    SELECT patient_id, collected_at, phosphate_id, 'phosphate', phosphate
    FROM draws WHERE phosphate >= $tls_phosphate_mg_dl
    UNION ALL
    SELECT patient_id, collected_at, calcium_id, 'corrected_calcium',
           calcium + 0.8 * (4.0 - coalesce(albumin, 4.0))
    FROM draws WHERE calcium + 0.8 * (4.0 - coalesce(albumin, 4.0)) <= $tls_calcium_mg_dl
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
    SELECT patient_id, 'hyperglycemia' AS condition, collected_at AS at, glucose_id AS result_id,
           glucose AS value, CAST(NULL AS DOUBLE) AS anion_gap,
           'glucose ' || CAST(round(glucose) AS BIGINT) || ' mg/dL' AS detail
    FROM draws WHERE glucose > $hyperglycemia_above_mg_dl
    UNION ALL
    SELECT patient_id, 'metabolic_acidosis', collected_at, bicarbonate_id, bicarbonate,
           sodium - (chloride + bicarbonate),
           'bicarbonate ' || bicarbonate || ' mmol/L' || coalesce(
               ', anion gap ' || (sodium - (chloride + bicarbonate)) || ' mmol/L', '')
    FROM draws WHERE bicarbonate < $acidosis_bicarbonate_below
    UNION ALL
    SELECT patient_id, 'hyperosmolality', collected_at, sodium_id,
           2 * sodium + glucose / 18.0 + urea_nitrogen / 2.8, CAST(NULL AS DOUBLE),
           'calculated osmolality ' ||
               CAST(round(2 * sodium + glucose / 18.0 + urea_nitrogen / 2.8) AS BIGINT) ||
               ' mOsm/kg (sodium ' || sodium || ' mmol/L, glucose ' || glucose ||
               ' mg/dL, urea nitrogen ' || urea_nitrogen || ' mg/dL)'
    FROM draws WHERE 2 * sodium + glucose / 18.0 + urea_nitrogen / 2.8 > $hyperosmolality_above
    UNION ALL
    SELECT patient_id, 'rhabdomyolysis', collected_at, creatine_kinase_id, creatine_kinase,
           CAST(NULL AS DOUBLE),
           'creatine kinase ' || CAST(round(creatine_kinase) AS BIGINT) || ' U/L'
    FROM draws WHERE creatine_kinase >= $rhabdomyolysis_ck_multiple * $ck_upper_normal_limit
    UNION ALL
    SELECT patient_id, 'tumour_lysis', collected_at, result_id, n_kinds, CAST(NULL AS DOUBLE),
           'abnormal within the window: ' || kinds
    FROM tumour_lysis_findings
) AS findings
ORDER BY patient_id, at, condition, result_id;
