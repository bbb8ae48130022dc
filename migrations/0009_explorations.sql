-- +goose Up
-- Threshold sweeps run in the background: one row per sweep asked for, with
-- the job that computes it and, once the job is done, its result
-- (db.Exploration as JSON). A sweep reads every stored reading, which at the
-- scale of a large study takes minutes; the request that asks for it returns
-- at once, and the result can be opened again later.
CREATE TABLE explorations (
    id           bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    protocol_id  integer NOT NULL REFERENCES protocols(id),
    param        text NOT NULL,
    sweep        jsonb NOT NULL,  -- the values swept, in order
    job_id       bigint NOT NULL UNIQUE REFERENCES jobs(id),
    result       jsonb,           -- null until the job is done
    created_by   text NOT NULL,
    created_at   timestamptz NOT NULL DEFAULT now()
);
