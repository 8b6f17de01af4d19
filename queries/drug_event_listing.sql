-- drug_event_listing: the drug-linked event listing of a drug-safety committee, one row per
-- (high-potassium episode, suspect drug class). `kcohort listing --class C --from D --to D`
-- selects from it.
--
-- DEFINITION
--   Suspect drug class: a drug-class cause of the episode (episode_causes, cause_group 'drug':
--   an era of the class in use at onset or ended within the class's lookback before it); its
--   era is the cause's evidence (era_id).
--   era_start, era_end, day_on_drug (day 1 = the day of era_start; counted in elapsed 24 h from
--   era_start to onset), user_type ('new user' or 'prevalent user', exposure_eras.new_user).
--   other_suspect_classes  the episode's other drug-class causes, sorted, ', '-separated.
--   other_causes           the episode's causes that are not drugs (kidney, lab, diagnosis),
--                          sorted, ', '-separated.
--   baseline_egfr, baseline_gfr_category, aki_stage: episode_kidney.
--   onset_at, unit, setting, peak_value, severity, ctcae_grade, unconfirmed: episodes.
--   treatments             the potassium-lowering classes given in the treatment window
--                          (episode_treatments), in order of first administration, each with
--                          its delay from onset: 'calcium +45 min; insulin +60 min'; '' when none.
--   first_treatment_delay_minutes, hypoglycemia, lowest_glucose_after_insulin, rebound,
--   died_within_window: episode_outcomes.
--   Dechallenge: what happened to the suspect class in the $dechallenge_days (default 7) after
--   onset, read from the recorded exposure (a dispensing covers its days of supply, so a drug
--   stopped in hospital may still read as continued), checked in this order:
--     'ended before onset'  the suspect era ended before onset (within the class's lookback);
--     'died'                death at or before onset + $dechallenge_days;
--     'not observable'      the extract ends before onset + $dechallenge_days;
--     'continued'           an era of the class covers onset + $dechallenge_days
--                           (era_start <= t <= era_end);
--     'stopped'             otherwise: the suspect era ended between onset and
--                           onset + $dechallenge_days and the class was not restarted by then.
--   restarted_at           the start of the first later era of the class (a rechallenge), if
--                          any.
--
-- No ORDER BY: `kcohort listing` orders its rows; sorting the wide joined rows here made
-- DataFusion 55 reserve tens of GB for one batch (its size estimate of the string views) on a
-- 1,000,000-patient store.
--
-- Row-level output for the committee: pseudonymous ids only (patient_id, episode_id, era_id as
-- in the store); it must stay inside the committee.
--
-- PARAMETERS: $dechallenge_days, $extract_end; reads the derived tables episodes,
-- exposure_eras, episode_causes, episode_kidney, episode_treatments, episode_outcomes.

CREATE VIEW listing_suspects AS
SELECT c.episode_id, c.patient_id, c.onset_at, CAST(c.onset_at AS BIGINT) AS onset_us,
       c.cause AS suspect_class, x.era_id, x.era_start, x.era_end, x.new_user,
       CAST(x.era_start AS BIGINT) AS start_us, CAST(x.era_end AS BIGINT) AS end_us
FROM episode_causes c
JOIN exposure_eras x ON x.era_id = c.evidence_id AND x.patient_id = c.patient_id
WHERE c.cause_group = 'drug';

CREATE VIEW listing_other_causes AS
SELECT s.episode_id, s.suspect_class,
       array_to_string(array_sort(array_agg(o.cause) FILTER (WHERE o.cause_group = 'drug')), ', ')
           AS other_suspect_classes,
       array_to_string(
           array_sort(array_agg(o.cause) FILTER (WHERE o.cause_group NOT IN ('drug', 'none'))),
           ', ') AS other_causes
FROM listing_suspects s
JOIN episode_causes o ON o.episode_id = s.episode_id AND o.cause <> s.suspect_class
GROUP BY s.episode_id, s.suspect_class;

CREATE VIEW listing_treatments AS
SELECT episode_id,
       string_agg(treatment_class || ' +' || CAST(round(delay_minutes) AS BIGINT) || ' min', '; '
                  ORDER BY first_at, treatment_class) AS treatments
FROM episode_treatments
GROUP BY episode_id;

-- The class in use at onset + $dechallenge_days, and its first later era.
CREATE VIEW listing_after_onset AS
SELECT s.episode_id, s.suspect_class,
       bool_or(CAST(x.era_start AS BIGINT) <= s.onset_us + $dechallenge_days_us
               AND s.onset_us + $dechallenge_days_us <= CAST(x.era_end AS BIGINT))
           AS in_use_after,
       MIN(x.era_start) FILTER (WHERE CAST(x.era_start AS BIGINT) > s.end_us) AS restarted_at
FROM listing_suspects s
JOIN exposure_eras x ON x.patient_id = s.patient_id AND x.drug_class = s.suspect_class
GROUP BY s.episode_id, s.suspect_class;

SELECT
    s.episode_id,
    s.patient_id,
    s.suspect_class,
    s.era_id,
    s.era_start,
    s.era_end,
    CAST(floor((s.onset_us - s.start_us) / 86400000000.0) + 1 AS BIGINT) AS day_on_drug,
    CASE WHEN s.new_user THEN 'new user' ELSE 'prevalent user' END AS user_type,
    coalesce(oc.other_suspect_classes, '') AS other_suspect_classes,
    coalesce(oc.other_causes, '') AS other_causes,
    e.onset_at,
    e.unit,
    e.setting,
    e.unconfirmed,
    e.peak_value,
    e.severity,
    e.ctcae_grade,
    k.baseline_egfr,
    k.baseline_gfr_category,
    k.aki_stage,
    coalesce(t.treatments, '') AS treatments,
    o.first_treatment_delay_minutes,
    o.hypoglycemia,
    o.lowest_glucose_after_insulin,
    o.rebound,
    o.died_within_window,
    CASE
        WHEN s.end_us < s.onset_us THEN 'ended before onset'
        WHEN o.death_at IS NOT NULL
             AND CAST(o.death_at AS BIGINT) <= s.onset_us + $dechallenge_days_us THEN 'died'
        WHEN CAST($extract_end AS BIGINT) < s.onset_us + $dechallenge_days_us
            THEN 'not observable'
        WHEN coalesce(a.in_use_after, false) THEN 'continued'
        ELSE 'stopped'
    END AS dechallenge,
    a.restarted_at
FROM listing_suspects s
JOIN episodes e ON e.episode_id = s.episode_id
LEFT JOIN listing_other_causes oc
    ON oc.episode_id = s.episode_id AND oc.suspect_class = s.suspect_class
LEFT JOIN episode_kidney k ON k.episode_id = s.episode_id
LEFT JOIN listing_treatments t ON t.episode_id = s.episode_id
LEFT JOIN episode_outcomes o ON o.episode_id = s.episode_id
LEFT JOIN listing_after_onset a
    ON a.episode_id = s.episode_id AND a.suspect_class = s.suspect_class;
