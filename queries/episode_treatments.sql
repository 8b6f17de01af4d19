-- episode_treatments: potassium-lowering treatment given for each high-potassium episode, one
-- row per (episode, treatment class) that was given.
--
-- DEFINITION
--   A treatment is a medication event of kind 'administer' (any route, any encounter) of the
--   patient whose ATC code starts with a code of a potassium-lowering class
--   ($potassium_lowering_codes: calcium, insulin, beta2_agonist, bicarbonate, binder,
--   loop_diuretic by default; DOMAIN.md 2.2), with start_at from onset_at to onset_at +
--   $treatment_window_hours (default 12 h), both inclusive.
--   Per class: first_at (the first such start_at), delay_minutes = first_at - onset_at,
--   delay_from_result_minutes = first_at - resulted_at of the onset result (NULL when the
--   result has no resulted_at; negative when treatment came before the result was reported),
--   n_administrations in the window.
--
-- DECISION: an event that matches two classes counts in both.
--
-- PARAMETERS: $potassium_lowering_codes, $treatment_window_hours.

CREATE VIEW episode_onset_results AS
SELECT e.episode_id, e.patient_id, e.onset_at, CAST(e.onset_at AS BIGINT) AS onset_us,
       l.resulted_at AS onset_resulted_at
FROM episodes e
LEFT JOIN lab_results l ON l.result_id = e.onset_result_id;

CREATE VIEW treatment_administrations AS
SELECT DISTINCT m.event_id, m.patient_id, m.start_at, CAST(m.start_at AS BIGINT) AS start_us,
       c.treatment_class
FROM medication_events m
JOIN $potassium_lowering_codes c ON starts_with(m.atc, c.atc_prefix)
WHERE m.kind = 'administer';

CREATE VIEW episode_treatment_windows AS
SELECT o.episode_id, o.patient_id, o.onset_at, o.onset_us, o.onset_resulted_at,
       t.treatment_class, t.start_at, t.start_us, t.event_id
FROM episode_onset_results o
JOIN treatment_administrations t ON t.patient_id = o.patient_id
WHERE t.start_us >= o.onset_us AND t.start_us <= o.onset_us + $treatment_window_hours_us;

SELECT
    episode_id,
    patient_id,
    treatment_class,
    MIN(start_at) AS first_at,
    (MIN(start_us) - MIN(onset_us)) / 60000000.0 AS delay_minutes,
    (MIN(start_us) - CAST(MIN(onset_resulted_at) AS BIGINT)) / 60000000.0
        AS delay_from_result_minutes,
    CAST(COUNT(*) AS BIGINT) AS n_administrations
FROM episode_treatment_windows
GROUP BY episode_id, patient_id, treatment_class
ORDER BY patient_id, episode_id, first_at, treatment_class;
