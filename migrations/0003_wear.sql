-- +goose Up
-- Wear data and its imports. Readings are stored compactly: one row per
-- participant, study week and kind, holding the week's readings delta-encoded
-- (cohort/wear codec) in a bytea. The participant id leads every key so the
-- table can later be distributed by participant.

CREATE TABLE imports (
    id           bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    kind         text NOT NULL CHECK (kind IN ('readings_csv', 'fhir_bundle', 'verdicts_csv')),
    file_name    text NOT NULL,
    file_sha256  bytea NOT NULL,
    size_bytes   bigint NOT NULL DEFAULT 0,
    -- running: in progress; done: committed; failed: refused as a whole (nothing
    -- stored); interrupted: the process died before committing (nothing stored).
    status       text NOT NULL DEFAULT 'running' CHECK (status IN ('running', 'done', 'failed', 'interrupted')),
    started_at   timestamptz NOT NULL DEFAULT now(),
    finished_at  timestamptz,
    actor_id     bigint REFERENCES users(id),
    actor        text NOT NULL DEFAULT '',
    rows_total   bigint NOT NULL DEFAULT 0,
    accepted     bigint NOT NULL DEFAULT 0,
    rejected     bigint NOT NULL DEFAULT 0,
    duplicates   bigint NOT NULL DEFAULT 0,
    -- reason code -> count, and the first few examples per reason
    reasons      jsonb NOT NULL DEFAULT '{}'::jsonb,
    message      text NOT NULL DEFAULT '',
    -- progress of a running import, updated outside its transaction; an
    -- import whose heartbeat stops is marked interrupted
    bytes_read   bigint NOT NULL DEFAULT 0,
    heartbeat_at timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX imports_started_idx ON imports (started_at DESC);
CREATE INDEX imports_sha_idx ON imports (kind, file_sha256);

-- Rejected rows, kept with their place in the file (line; for FHIR also the
-- entry) so they can be fixed and sent again.
CREATE TABLE import_rejects (
    import_id bigint NOT NULL REFERENCES imports(id) ON DELETE CASCADE,
    seq       integer NOT NULL,
    line      bigint NOT NULL,
    entry     integer,
    reason    text NOT NULL,
    message   text NOT NULL,
    raw       text NOT NULL,
    PRIMARY KEY (import_id, seq)
);

CREATE TABLE wear_weeks (
    participant_id bigint NOT NULL REFERENCES participants(id),
    week           smallint NOT NULL CHECK (week >= 0),
    kind           smallint NOT NULL CHECK (kind IN (1, 2, 3)),
    n              integer NOT NULL CHECK (n >= 0),
    first_ms       bigint NOT NULL,
    last_ms        bigint NOT NULL,
    data           bytea NOT NULL,
    updated_at     timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (participant_id, week, kind)
);
ALTER TABLE wear_weeks ALTER COLUMN data SET COMPRESSION lz4;
