-- +goose Up
-- One word for the threshold-sweep feature: the table of sweeps asked for
-- (0009) is "sweeps", its list of values swept "sweep_values", and the job
-- kind that computes a sweep "sweep". Stored results (db.SweepResult as
-- JSON) keep their keys. Audit events already written keep the action and
-- object type they were written with ("exploration.start", "exploration"):
-- the audit trail is never rewritten.
ALTER TABLE explorations RENAME TO sweeps;
ALTER TABLE sweeps RENAME COLUMN sweep TO sweep_values;
ALTER SEQUENCE explorations_id_seq RENAME TO sweeps_id_seq;
ALTER INDEX explorations_pkey RENAME TO sweeps_pkey;
ALTER INDEX explorations_job_id_key RENAME TO sweeps_job_id_key;
ALTER TABLE sweeps RENAME CONSTRAINT explorations_protocol_id_fkey TO sweeps_protocol_id_fkey;
ALTER TABLE sweeps RENAME CONSTRAINT explorations_job_id_fkey TO sweeps_job_id_fkey;
UPDATE jobs SET kind = 'sweep' WHERE kind = 'explore';
