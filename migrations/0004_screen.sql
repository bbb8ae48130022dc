-- +goose Up
-- Screening protocols, results, external verdicts and the background job queue.

CREATE TABLE protocols (
    id          integer GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    name        text NOT NULL,
    version     integer NOT NULL CHECK (version >= 1),
    -- cohort/screen.Protocol as JSON
    params      jsonb NOT NULL,
    note        text NOT NULL DEFAULT '',
    based_on    integer REFERENCES protocols(id),
    active      boolean NOT NULL DEFAULT false,
    -- set once any result was computed with this version; from then on the
    -- parameters may never change
    used        boolean NOT NULL DEFAULT false,
    created_at  timestamptz NOT NULL DEFAULT now(),
    created_by  text NOT NULL DEFAULT '',
    UNIQUE (name, version)
);
-- At most one active version.
CREATE UNIQUE INDEX protocols_one_active ON protocols (active) WHERE active;

-- +goose StatementBegin
CREATE FUNCTION protocols_immutable_once_used() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF TG_OP = 'UPDATE' AND OLD.used AND NOT NEW.used THEN
        RAISE EXCEPTION 'protocol % version % has produced results and stays marked as used', OLD.name, OLD.version
            USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    IF TG_OP = 'UPDATE' AND OLD.used AND (NEW.params IS DISTINCT FROM OLD.params OR NEW.name IS DISTINCT FROM OLD.name
                     OR NEW.version IS DISTINCT FROM OLD.version OR NEW.based_on IS DISTINCT FROM OLD.based_on) THEN
        RAISE EXCEPTION 'protocol % version % has produced results and cannot change; create a new version', OLD.name, OLD.version
            USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    IF TG_OP = 'DELETE' AND OLD.used THEN
        RAISE EXCEPTION 'protocol % version % has produced results and cannot be deleted', OLD.name, OLD.version
            USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    IF TG_OP = 'DELETE' THEN
        RETURN OLD;
    END IF;
    RETURN NEW;
END;
$$;
-- +goose StatementEnd
CREATE TRIGGER protocols_immutable
    BEFORE UPDATE OR DELETE ON protocols
    FOR EACH ROW EXECUTE FUNCTION protocols_immutable_once_used();

-- One verdict per participant-week and protocol version, with the digest of the
-- input readings so any result can be reproduced exactly.
CREATE TABLE screen_results (
    participant_id bigint NOT NULL REFERENCES participants(id),
    protocol_id    integer NOT NULL REFERENCES protocols(id),
    week           smallint NOT NULL,
    verdict        text NOT NULL CHECK (verdict IN ('positive', 'negative', 'insufficient')),
    reason         text NOT NULL,
    -- cohort/screen.Result exactly as the screen marshalled it (json, not
    -- jsonb, so the stored bytes are the computed bytes and a re-run can be
    -- compared byte for byte)
    result         json NOT NULL,
    input_digest   text NOT NULL,
    wear_hours     real NOT NULL DEFAULT 0,
    computed_at    timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (participant_id, protocol_id, week)
);
CREATE INDEX screen_results_positive_idx ON screen_results (protocol_id, week) WHERE verdict = 'positive';

-- Verdicts from other algorithms, kept beside ours and shown separately.
CREATE TABLE external_verdicts (
    participant_id bigint NOT NULL REFERENCES participants(id),
    week           smallint NOT NULL,
    model_name     text NOT NULL,
    model_version  text NOT NULL,
    score          double precision,
    verdict        text NOT NULL CHECK (verdict IN ('positive', 'negative', 'insufficient')),
    import_id      bigint REFERENCES imports(id),
    PRIMARY KEY (participant_id, week, model_name, model_version)
);
CREATE INDEX external_verdicts_import_idx ON external_verdicts (import_id);

-- Background jobs, taken with FOR UPDATE SKIP LOCKED so any number of app
-- instances can work the queue and each job runs once.
-- A running job holds a lease that its worker renews while it works; a job
-- whose lease ran out belongs to a worker that died and is taken again.
CREATE TABLE jobs (
    id             bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    kind           text NOT NULL,
    -- what the job does, in words, for the progress page
    label          text NOT NULL DEFAULT '',
    payload        jsonb NOT NULL DEFAULT '{}'::jsonb,
    state          text NOT NULL DEFAULT 'queued' CHECK (state IN ('queued', 'running', 'done', 'failed')),
    attempts       integer NOT NULL DEFAULT 0 CHECK (attempts >= 0),
    max_attempts   integer NOT NULL DEFAULT 3 CHECK (max_attempts >= 1),
    run_after      timestamptz NOT NULL DEFAULT now(),
    locked_by      text NOT NULL DEFAULT '',
    locked_at      timestamptz,
    lease_until    timestamptz,
    progress_done  bigint NOT NULL DEFAULT 0,
    progress_total bigint NOT NULL DEFAULT 0,
    -- the last failure, kept after a retry succeeds
    error          text NOT NULL DEFAULT '',
    -- a short outcome, e.g. counts of verdicts
    outcome        text NOT NULL DEFAULT '',
    created_by     text NOT NULL DEFAULT '',
    created_at     timestamptz NOT NULL DEFAULT now(),
    started_at     timestamptz,
    finished_at    timestamptz,
    CHECK (state <> 'running' OR lease_until IS NOT NULL)
);
CREATE INDEX jobs_queue_idx ON jobs (run_after, id) WHERE state = 'queued';
CREATE INDEX jobs_lease_idx ON jobs (lease_until) WHERE state = 'running';
CREATE INDEX jobs_recent_idx ON jobs (created_at DESC);
