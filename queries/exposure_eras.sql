-- exposure_eras: continuous exposure to a drug class, one row per patient, class and era.
--
-- DEFINITION
--  1. Classes. A medication event belongs to every drug class of the study ($drug_class_codes,
--     [drug_classes] in the study file) whose ATC code or prefix its atc starts with (one row
--     per event and class, however many prefixes of the class match).
--  2. Covered interval of an event, [start, end]:
--       dispense    start_at to start_at + days_supply days (no days_supply:
--                   $dispense_default_days, default 30);
--       administer  start_at to end_at (no end_at: start_at + the class's administer_hours,
--                   default $administer_default_hours, 24);
--       order       start_at to end_at (no end_at: start_at + $order_default_hours, 24).
--     An end before start_at is read as start_at.
--  3. Eras. Per patient and class, intervals in order of start (then end, then event_id) join
--     the current era when they start at most the grace period after the latest end so far
--     (gap <= grace, inclusive; overlapping and adjacent intervals always join); otherwise they
--     open a new era. The grace period belongs to the interval that ends latest so far:
--     $dispense_grace_days (default 30 days) after a dispensing, $administer_grace_hours
--     (default 24 h) after an administration or an order. The era runs from its first start to
--     its latest end (the grace period is not added to its end).
--  4. New user. An era is a new-user era when no earlier era of the patient and class ended
--     within $washout_days (default 365) before its start (previous end < start - washout) and
--     the patient was observed at least that long before: the earliest admitted_at of an
--     encounter or collected_at of a lab result is at or before start - washout. Otherwise the
--     era is a prevalent-user era. (Medication events alone do not count as observation: a
--     dispensing record does not show that the patient had no earlier exposure.)
--
-- COLUMNS: era_id ('<class>-<event_id of the first event>'), patient_id, drug_class, era_start,
-- era_end, n_events, n_dispense, n_administer, n_order, new_user, previous_era_end,
-- observed_from.
--
-- PARAMETERS: $drug_class_codes, $dispense_default_days, $administer_default_hours,
-- $order_default_hours, $dispense_grace_days, $administer_grace_hours, $washout_days.
--
-- Time arithmetic is done in epoch microseconds (CAST(t AS BIGINT)); $name_us is a window in
-- microseconds.

-- Step 1: each event with each class it belongs to.
CREATE VIEW drug_class_events AS
SELECT
    m.event_id,
    m.patient_id,
    m.kind,
    m.start_at,
    m.end_at,
    m.days_supply,
    c.drug_class,
    MIN(c.administer_us) AS administer_us
FROM medication_events m
JOIN $drug_class_codes c ON starts_with(m.atc, c.atc_prefix)
GROUP BY m.event_id, m.patient_id, m.kind, m.start_at, m.end_at, m.days_supply, c.drug_class;

-- Step 2: each event's covered interval and grace period, in microseconds.
CREATE VIEW drug_exposure_intervals AS
SELECT
    event_id,
    patient_id,
    drug_class,
    kind,
    start_us,
    greatest(end_us, start_us) AS end_us,
    CASE WHEN kind = 'dispense' THEN $dispense_grace_days_us ELSE $administer_grace_hours_us END
        AS grace_us
FROM (
    SELECT
        *,
        CAST(start_at AS BIGINT) AS start_us,
        CASE kind
            WHEN 'dispense' THEN CAST(start_at AS BIGINT) + coalesce(
                CAST(round(days_supply * 86400000000.0) AS BIGINT), $dispense_default_days_us)
            WHEN 'administer' THEN coalesce(
                CAST(end_at AS BIGINT), CAST(start_at AS BIGINT) + administer_us)
            ELSE coalesce(CAST(end_at AS BIGINT), CAST(start_at AS BIGINT) + $order_default_hours_us)
        END AS end_us
    FROM drug_class_events
) AS with_ends;

-- Step 3: an interval opens an era when it starts more than the grace period after the latest
-- end (plus its grace) of the intervals before it; era_number counts the openings.
CREATE VIEW drug_exposure_islands AS
SELECT
    *,
    SUM(CASE WHEN opens_era THEN 1 ELSE 0 END) OVER (
        PARTITION BY patient_id, drug_class ORDER BY start_us, end_us, event_id
        ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS era_number
FROM (
    SELECT
        *,
        coalesce(
            start_us > MAX(end_us + grace_us) OVER (
                PARTITION BY patient_id, drug_class ORDER BY start_us, end_us, event_id
                ROWS BETWEEN UNBOUNDED PRECEDING AND 1 PRECEDING),
            true) AS opens_era
    FROM drug_exposure_intervals
) AS with_openings;

CREATE VIEW drug_eras_merged AS
SELECT
    patient_id,
    drug_class,
    era_number,
    first_value(event_id ORDER BY start_us, end_us, event_id) AS first_event_id,
    MIN(start_us) AS start_us,
    MAX(end_us) AS end_us,
    CAST(COUNT(*) AS BIGINT) AS n_events,
    CAST(SUM(CASE WHEN kind = 'dispense' THEN 1 ELSE 0 END) AS BIGINT) AS n_dispense,
    CAST(SUM(CASE WHEN kind = 'administer' THEN 1 ELSE 0 END) AS BIGINT) AS n_administer,
    CAST(SUM(CASE WHEN kind = 'order' THEN 1 ELSE 0 END) AS BIGINT) AS n_order
FROM drug_exposure_islands
GROUP BY patient_id, drug_class, era_number;

-- Step 4: when each patient is first observed (an encounter or a lab result).
CREATE VIEW patient_observed_from AS
SELECT patient_id, MIN(t) AS observed_from_us
FROM (
    SELECT patient_id, CAST(admitted_at AS BIGINT) AS t FROM encounters
    UNION ALL
    SELECT patient_id, CAST(collected_at AS BIGINT) AS t FROM lab_results
) AS observations
GROUP BY patient_id;

SELECT
    e.drug_class || '-' || e.first_event_id AS era_id,
    e.patient_id,
    e.drug_class,
    arrow_cast(e.start_us, 'Timestamp(Microsecond, Some("UTC"))') AS era_start,
    arrow_cast(e.end_us, 'Timestamp(Microsecond, Some("UTC"))') AS era_end,
    e.n_events,
    e.n_dispense,
    e.n_administer,
    e.n_order,
    coalesce(
        (e.previous_end_us IS NULL OR e.previous_end_us < e.start_us - $washout_days_us)
            AND o.observed_from_us <= e.start_us - $washout_days_us,
        false) AS new_user,
    arrow_cast(e.previous_end_us, 'Timestamp(Microsecond, Some("UTC"))') AS previous_era_end,
    arrow_cast(o.observed_from_us, 'Timestamp(Microsecond, Some("UTC"))') AS observed_from
FROM (
    SELECT
        *,
        LAG(end_us) OVER (PARTITION BY patient_id, drug_class ORDER BY era_number)
            AS previous_end_us
    FROM drug_eras_merged
) AS e
LEFT JOIN patient_observed_from o ON o.patient_id = e.patient_id
ORDER BY e.patient_id, e.drug_class, era_start;
