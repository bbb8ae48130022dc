-- +goose Up
-- Sign-in throttling by key (an account, a client address, a trusted device,
-- an account's second-factor codes) instead of one row per failure: the rule
-- is cohort/credential.Throttle, the counting db/signin_throttle.go. Attempts
-- refused while a key is locked only add to `refused`; they are neither
-- stored one by one nor audited.
CREATE TABLE sign_in_throttle (
    key             text PRIMARY KEY CHECK (length(key) <= 320),
    failures        integer NOT NULL DEFAULT 0 CHECK (failures >= 0),
    last_failure_at timestamptz,
    locked_until    timestamptz,
    refused         bigint NOT NULL DEFAULT 0,
    updated_at      timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX sign_in_throttle_updated_idx ON sign_in_throttle (updated_at);

DROP TABLE sign_in_failures;

-- RFC 5321 section 4.5.3.1 bounds a path (and so an address) to 254
-- characters usable; the forms refuse longer ones before anything is stored.
ALTER TABLE users ADD CONSTRAINT users_email_length CHECK (length(email) <= 254) NOT VALID;
