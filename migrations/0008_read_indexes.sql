-- +goose Up
-- Indexes for the reads that cover a whole study: measured at 20,000 and
-- 100,000 participants with the bench command (README, Performance).

-- The progress figures (data sufficiency by week, the screening cascade) read
-- every verdict of a protocol version. Each screen_results row carries its
-- metrics as JSON (about 1.4 kB), so those reads scanned the whole table:
-- 286 MB for 175,000 rows at 20,000 participants. This index holds only what
-- they need, so they run as index-only scans over a table about 30 times
-- smaller (9 MB).
CREATE INDEX screen_results_verdicts_idx ON screen_results (protocol_id, participant_id, week) INCLUDE (verdict);

-- The positive results of a version (case opening, the participants list's
-- "screen-positive in the last N weeks") with their participant, without
-- visiting the wide rows.
DROP INDEX screen_results_positive_idx;
CREATE INDEX screen_results_positive_idx ON screen_results (protocol_id, week) INCLUDE (participant_id) WHERE verdict = 'positive';

-- The participants list: a case-insensitive study ID prefix search, and the
-- enrolment order (enrolment day, then study ID) read from an index page by
-- page.
CREATE INDEX participants_study_id_lower_idx ON participants (lower(study_id) text_pattern_ops);
DROP INDEX participants_enrolled_idx;
CREATE INDEX participants_enrolled_idx ON participants (enrolled_on, study_id);

-- Creating these locks the two tables against writes while they build; on a
-- large existing study apply this migration when imports and screening are
-- idle.
