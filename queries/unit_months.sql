-- unit_months: inpatient days at risk of a hospital-acquired episode, admissions and
-- hospital-acquired episodes, per local calendar month and unit. The monthly quality report
-- reads it.
--
-- DEFINITION
--  1. Days at risk. Each inpatient encounter contributes its interval
--     [admitted_at + $hospital_acquired_after_hours, end), end = discharged_at, or the extract
--     end when discharged_at is missing or later. Elapsed hours / 24, fractional. A stay shorter
--     than $hospital_acquired_after_hours (default 48 h) adds nothing. Time inside an episode is
--     not removed; a death does not cut a stay before its discharged_at.
--  2. Months. The interval is split at local midnight of the first day of each month in the site
--     time zone ($local_months: one row per month from the earliest admission or result to the
--     extract end, with its start and end as UTC instants) and attributed to the encounter's
--     unit.
--  3. Admissions: inpatient encounters whose admitted_at falls in the local month, by unit.
--  4. Episodes: hospital-acquired episodes (episodes.setting = 'hospital_acquired': the covering
--     encounter is inpatient and onset >= admitted_at + 48 h) with onset in the local month, by
--     the covering encounter's unit: ha_episodes counts the confirmed ones (not unconfirmed),
--     ha_unconfirmed the possible pseudohyperkalemia ones, ha_severe the confirmed severe ones.
--
-- COLUMNS: month ('YYYY-MM'), unit, days_at_risk, admissions, ha_episodes, ha_severe,
-- ha_unconfirmed. One row per month and unit with any days at risk, admission or episode.
--
-- PARAMETERS: $local_months, $hospital_acquired_after_hours, $extract_end.

CREATE VIEW local_months AS
SELECT * FROM $local_months;

CREATE VIEW inpatient_at_risk AS
SELECT
    unit,
    CAST(admitted_at AS BIGINT) AS admitted_us,
    CAST(admitted_at AS BIGINT) + $hospital_acquired_after_hours_us AS start_us,
    CAST(least(coalesce(discharged_at, $extract_end), $extract_end) AS BIGINT) AS end_us
FROM encounters
WHERE class = 'inpatient';

CREATE VIEW unit_month_days AS
SELECT
    m.month,
    i.unit,
    SUM(least(i.end_us, m.end_us) - greatest(i.start_us, m.start_us)) / 86400000000.0
        AS days_at_risk
FROM inpatient_at_risk i
JOIN local_months m ON m.start_us < i.end_us AND i.start_us < m.end_us
WHERE i.start_us < i.end_us
GROUP BY m.month, i.unit;

CREATE VIEW unit_month_admissions AS
SELECT m.month, i.unit, CAST(COUNT(*) AS BIGINT) AS admissions
FROM inpatient_at_risk i
JOIN local_months m ON m.start_us <= i.admitted_us AND i.admitted_us < m.end_us
GROUP BY m.month, i.unit;

CREATE VIEW unit_month_episodes AS
SELECT
    m.month,
    e.unit,
    CAST(SUM(CASE WHEN NOT e.unconfirmed THEN 1 ELSE 0 END) AS BIGINT) AS ha_episodes,
    CAST(SUM(CASE WHEN NOT e.unconfirmed AND e.severity = 'severe' THEN 1 ELSE 0 END) AS BIGINT)
        AS ha_severe,
    CAST(SUM(CASE WHEN e.unconfirmed THEN 1 ELSE 0 END) AS BIGINT) AS ha_unconfirmed
FROM episodes e
JOIN local_months m
    ON m.start_us <= CAST(e.onset_at AS BIGINT) AND CAST(e.onset_at AS BIGINT) < m.end_us
WHERE e.setting = 'hospital_acquired'
GROUP BY m.month, e.unit;

SELECT
    k.month,
    k.unit,
    coalesce(d.days_at_risk, 0.0) AS days_at_risk,
    coalesce(a.admissions, CAST(0 AS BIGINT)) AS admissions,
    coalesce(e.ha_episodes, CAST(0 AS BIGINT)) AS ha_episodes,
    coalesce(e.ha_severe, CAST(0 AS BIGINT)) AS ha_severe,
    coalesce(e.ha_unconfirmed, CAST(0 AS BIGINT)) AS ha_unconfirmed
FROM (
    SELECT month, unit FROM unit_month_days
    UNION SELECT month, unit FROM unit_month_admissions
    UNION SELECT month, unit FROM unit_month_episodes
) AS k
LEFT JOIN unit_month_days d ON d.month = k.month AND d.unit = k.unit
LEFT JOIN unit_month_admissions a ON a.month = k.month AND a.unit = k.unit
LEFT JOIN unit_month_episodes e ON e.month = k.month AND e.unit = k.unit
ORDER BY k.month, k.unit;
