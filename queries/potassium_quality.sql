-- potassium_quality: how many potassium results the episode definition could use, per LOINC code.
--
-- DEFINITION
-- One row per LOINC code of $potassium_loinc that occurs in lab_results:
--   n_results     every stored result with that code;
--   n_no_value    results without a value in mmol/L or mEq/L (possible only for a code the store
--                 does not interpret as potassium): never used;
--   n_hemolysed   results with a value and hemolysis_index at or above $hemolysis_cutoff:
--                 excluded from every episode rule;
--   n_used        the rest: the results episodes.sql reads.
-- n_results = n_no_value + n_hemolysed + n_used.
--
-- PARAMETERS: $potassium_loinc and $hemolysis_cutoff, through the view potassium_results of
-- episodes.sql (which therefore runs first).

SELECT
    loinc,
    CAST(COUNT(*) AS BIGINT) AS n_results,
    CAST(SUM(CASE WHEN NOT has_value THEN 1 ELSE 0 END) AS BIGINT) AS n_no_value,
    CAST(SUM(CASE WHEN has_value AND hemolysed THEN 1 ELSE 0 END) AS BIGINT) AS n_hemolysed,
    CAST(SUM(CASE WHEN has_value AND NOT hemolysed THEN 1 ELSE 0 END) AS BIGINT) AS n_used
FROM potassium_results
GROUP BY loinc
ORDER BY loinc;
