-- episode_register: one row per high-potassium episode with everything the monthly report and a
-- reviewer read about it: local month, setting, unit, severity, causes, and the process and
-- safety indicators.
--
-- DEFINITION
--   month                 local calendar month of onset_at ($local_months).
--   setting, unit, ...    as in episodes.
--   causes, drug_classes  as in episode_cause_summary.
--   severe_treated_1h,    for severe episodes only (NULL otherwise): the first potassium-lowering
--   severe_treated_4h     treatment at most 60 / 240 minutes after the onset result was
--                         reported (resulted_at; collected_at when resulted_at is missing),
--                         false when later or never within the treatment window.
--   repeat_within_4h      a used potassium result collected strictly after onset and at most 4 h
--                         after it.
--   insulin_given         insulin among the treatments of the window; hypoglycemia after it as
--                         in episode_outcomes (NULL when no insulin).
--   rebound, died_within_window  as in episode_outcomes.
--
-- PARAMETERS: none of its own (the views of unit_months.sql and the derived tables).

SELECT
    m.month,
    e.episode_id,
    e.patient_id,
    e.onset_at,
    e.setting,
    e.unit,
    e.encounter_class,
    e.unconfirmed,
    e.severity,
    e.ctcae_grade,
    e.peak_value,
    s.causes,
    s.drug_classes,
    s.none_identified,
    s.baseline_gfr_category,
    CASE WHEN e.severity = 'severe' THEN
        coalesce(o.first_treatment_at IS NOT NULL
            AND CAST(o.first_treatment_at AS BIGINT)
                <= CAST(coalesce(o.onset_resulted_at, e.onset_at) AS BIGINT) + 3600000000, false)
    END AS severe_treated_1h,
    CASE WHEN e.severity = 'severe' THEN
        coalesce(o.first_treatment_at IS NOT NULL
            AND CAST(o.first_treatment_at AS BIGINT)
                <= CAST(coalesce(o.onset_resulted_at, e.onset_at) AS BIGINT) + 14400000000, false)
    END AS severe_treated_4h,
    coalesce(o.repeat_delay_hours <= 4.0, false) AS repeat_within_4h,
    o.first_insulin_at IS NOT NULL AS insulin_given,
    CASE WHEN o.first_insulin_at IS NOT NULL THEN o.hypoglycemia END AS hypoglycemia_after_insulin,
    o.rebound,
    o.died_within_window
FROM episodes e
JOIN local_months m
    ON m.start_us <= CAST(e.onset_at AS BIGINT) AND CAST(e.onset_at AS BIGINT) < m.end_us
LEFT JOIN episode_cause_summary s ON s.episode_id = e.episode_id
LEFT JOIN episode_outcomes o ON o.episode_id = e.episode_id
ORDER BY m.month, e.unit, e.onset_at, e.episode_id;
