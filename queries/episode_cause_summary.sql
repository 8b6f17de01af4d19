-- episode_cause_summary: one row per episode summing up episode_causes, with the kidney
-- context a reviewer reads beside it.
--
-- DEFINITION
--   n_causes            causes found (0 when only 'none_identified');
--   causes              the causes found, sorted, separated by ', ' ('' when none);
--   drug_classes        the drug-class causes only, sorted, separated by ', ';
--   none_identified     true when no cause was found;
--   baseline_egfr       median eGFR of the year up to onset (as in episode_causes), NULL
--                       without a creatinine result in that year; baseline_gfr_category its
--                       KDIGO category, 'unknown' when NULL;
--   aki_stage           the highest KDIGO stage of an AKI result in the AKI window, NULL when
--                       none.
--
-- PARAMETERS: $aki_before_hours, $aki_after_hours; the views of episode_causes.sql (which runs
-- first).

SELECT
    o.episode_id,
    o.patient_id,
    o.onset_at,
    CAST(COUNT(f.cause) AS BIGINT) AS n_causes,
    coalesce(string_agg(f.cause, ', ' ORDER BY f.cause), '') AS causes,
    coalesce(string_agg(f.cause, ', ' ORDER BY f.cause) FILTER (WHERE f.cause_group = 'drug'), '')
        AS drug_classes,
    COUNT(f.cause) = 0 AS none_identified,
    MAX(b.baseline_egfr) AS baseline_egfr,
    coalesce(kdigo_gfr_category(MAX(b.baseline_egfr)), 'unknown') AS baseline_gfr_category,
    MAX(a.aki_stage) AS aki_stage
FROM episode_onsets o
LEFT JOIN episode_found_causes f ON f.episode_id = o.episode_id
LEFT JOIN episode_baseline_egfr b ON b.episode_id = o.episode_id
LEFT JOIN (
    SELECT o2.episode_id, MAX(k.aki_stage) AS aki_stage
    FROM episode_onsets o2
    JOIN kidney_function k ON k.patient_id = o2.patient_id
    WHERE k.aki
      AND CAST(k.collected_at AS BIGINT) >= o2.onset_us - $aki_before_hours_us
      AND CAST(k.collected_at AS BIGINT) <= o2.onset_us + $aki_after_hours_us
    GROUP BY o2.episode_id
) a ON a.episode_id = o.episode_id
GROUP BY o.episode_id, o.patient_id, o.onset_at
ORDER BY o.patient_id, o.onset_at, o.episode_id;
