-- +goose Up
-- Kept figures for what came after the first ones (migration 0040):
--
-- A recording waits for an over-read (overread.Awaits) only while nobody
-- has marked it as needing none, and triage groups the cases holding such a
-- recording, whatever their state. figure_waiting keeps those cases, one row
-- per case with how many of its recordings wait, computed with the other
-- per-participant figures (db/figures_keep.go); triage counts and lists the
-- group from it.
CREATE TABLE figure_waiting (
    participant_id bigint NOT NULL,
    case_id        bigint NOT NULL,
    recordings     integer NOT NULL CHECK (recordings > 0),
    PRIMARY KEY (participant_id, case_id)
);

-- Marking a recording as needing no over-read changes what waits.
-- +goose StatementBegin
CREATE OR REPLACE FUNCTION recordings_mark_upd() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO figures_dirty (participant_id)
    SELECT DISTINCT x.pid FROM old_rows o JOIN new_rows n ON n.id = o.id
    CROSS JOIN LATERAL (VALUES (o.participant_id), (n.participant_id)) x(pid)
    WHERE (o.participant_id, o.case_id, o.auto_interpretation, o.too_short, o.read_not_needed_at IS NULL)
          IS DISTINCT FROM (n.participant_id, n.case_id, n.auto_interpretation, n.too_short, n.read_not_needed_at IS NULL);
    RETURN NULL;
END;
$$;
-- +goose StatementEnd

-- Built by the application like the other per-participant figures: a
-- database with recordings waiting builds its figures again at start-up.
UPDATE figures_state SET built_at = NULL WHERE EXISTS (SELECT 1 FROM recordings);
