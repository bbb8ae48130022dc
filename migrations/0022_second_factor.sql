-- +goose Up
-- A second factor at sign-in: time-based one-time passwords (RFC 6238) and
-- recovery codes; the study-wide rule that roles who see identifying details
-- must use one.
CREATE TABLE second_factors (
    user_id       bigint PRIMARY KEY REFERENCES users(id),
    -- The TOTP secret, sealed with AES-256-GCM under a key derived from the
    -- deployment secret (cohort/credential.Seal), never stored in clear.
    secret_sealed text NOT NULL,
    -- The last time step whose code was accepted: a code is good once.
    last_step     bigint NOT NULL DEFAULT 0,
    enabled_at    timestamptz NOT NULL DEFAULT now()
);

CREATE TABLE recovery_codes (
    user_id   bigint NOT NULL REFERENCES users(id),
    code_id   text NOT NULL,   -- the first part of the code, to find the row
    code_hash text NOT NULL,   -- argon2id of the second part
    used_at   timestamptz,
    PRIMARY KEY (user_id, code_id)
);

-- One row: how the study's staff sign in. A second factor is required of the
-- roles that see identifying details unless an administrator turns it off
-- (the demo does, and lets anyone set one up to try it).
CREATE TABLE sign_in_policy (
    id                     smallint PRIMARY KEY DEFAULT 1 CHECK (id = 1),
    second_factor_required boolean NOT NULL DEFAULT true,
    updated_at             timestamptz NOT NULL DEFAULT now()
);
INSERT INTO sign_in_policy DEFAULT VALUES;
