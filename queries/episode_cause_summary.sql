-- episode_cause_summary: one row per episode summing up episode_causes, with the kidney
-- context a reviewer reads beside it.
--
-- DEFINITION
--   n_causes            causes found (0 when only 'none_identified');
--   causes              the causes found, sorted, separated by ', ' ('' when none);
--   drug_classes        the drug-class causes only, sorted, separated by ', ';
--   none_identified     true when no cause was found;
--   baseline_egfr, baseline_gfr_category, aki_stage: from episode_kidney.
--
-- It reads the derived tables episode_causes and episode_kidney (not views, which would run
-- again).
--
-- PARAMETERS: none of its own.

SELECT
    o.episode_id,
    o.patient_id,
    o.onset_at,
    coalesce(f.n_causes, CAST(0 AS BIGINT)) AS n_causes,
    coalesce(f.causes, '') AS causes,
    coalesce(f.drug_classes, '') AS drug_classes,
    coalesce(f.n_causes, 0) = 0 AS none_identified,
    k.baseline_egfr,
    k.baseline_gfr_category,
    k.aki_stage
FROM episode_onsets o
LEFT JOIN (
    SELECT
        episode_id,
        CAST(COUNT(*) AS BIGINT) AS n_causes,
        array_to_string(array_sort(array_agg(cause)), ', ') AS causes,
        array_to_string(array_sort(array_agg(cause) FILTER (WHERE cause_group = 'drug')), ', ')
            AS drug_classes
    FROM episode_causes
    WHERE cause_group <> 'none'
    GROUP BY episode_id
) f ON f.episode_id = o.episode_id
LEFT JOIN episode_kidney k ON k.episode_id = o.episode_id
ORDER BY o.patient_id, o.onset_at, o.episode_id;
