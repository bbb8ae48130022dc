-- +goose Up
-- Staff accounts, sessions, sign-in throttling and the audit trail.

CREATE EXTENSION IF NOT EXISTS citext;

CREATE TABLE users (
    id              bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    email           citext NOT NULL UNIQUE CHECK (email ~ '^[^@\s]+@[^@\s]+$'),
    display_name    text NOT NULL CHECK (length(display_name) BETWEEN 1 AND 120),
    role            text NOT NULL CHECK (role IN ('admin','coordinator','investigator','monitor')),
    -- argon2id in the PHC string format: $argon2id$v=19$m=...,t=...,p=...$salt$hash
    password_hash   text NOT NULL,
    active          boolean NOT NULL DEFAULT true,
    last_sign_in_at timestamptz,
    version         integer NOT NULL DEFAULT 1,
    created_at      timestamptz NOT NULL DEFAULT now(),
    updated_at      timestamptz NOT NULL DEFAULT now()
);

-- Sessions of the session manager (token, encoded data, expiry), shared by every
-- app instance.
CREATE TABLE sessions (
    token  text PRIMARY KEY,
    data   bytea NOT NULL,
    expiry timestamptz NOT NULL
);
CREATE INDEX sessions_expiry_idx ON sessions (expiry);

-- Failed sign-ins, for throttling by account and by client address. Pruned;
-- the audit trail keeps the permanent record.
CREATE TABLE sign_in_failures (
    id          bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    at          timestamptz NOT NULL DEFAULT now(),
    account     citext NOT NULL,
    client_addr text NOT NULL
);
CREATE INDEX sign_in_failures_account_idx ON sign_in_failures (account, at);
CREATE INDEX sign_in_failures_addr_idx ON sign_in_failures (client_addr, at);

-- The audit trail: who did what to which object, with old and new values. Rows
-- are only ever added; the triggers below make the database itself refuse
-- UPDATE, DELETE and TRUNCATE, whoever asks.
CREATE TABLE audit_events (
    id          bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    at          timestamptz NOT NULL DEFAULT now(),
    actor_id    bigint REFERENCES users(id),
    actor       text NOT NULL,          -- display name and role at the time, or "system"
    action      text NOT NULL,          -- e.g. signin, case.move, participant.view_phi
    object_type text NOT NULL DEFAULT '',
    object_id   text NOT NULL DEFAULT '',
    old_value   jsonb,
    new_value   jsonb,
    client_addr text NOT NULL DEFAULT '',
    request_id  text NOT NULL DEFAULT ''
);
CREATE INDEX audit_events_at_idx ON audit_events (at DESC, id DESC);
CREATE INDEX audit_events_object_idx ON audit_events (object_type, object_id, at);
CREATE INDEX audit_events_actor_idx ON audit_events (actor_id, at);
CREATE INDEX audit_events_action_idx ON audit_events (action, at);

-- +goose StatementBegin
CREATE FUNCTION audit_events_append_only() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION 'audit_events is append-only: % refused', TG_OP
        USING ERRCODE = 'insufficient_privilege';
END;
$$;
-- +goose StatementEnd

CREATE TRIGGER audit_events_no_update_delete
    BEFORE UPDATE OR DELETE ON audit_events
    FOR EACH ROW EXECUTE FUNCTION audit_events_append_only();
CREATE TRIGGER audit_events_no_truncate
    BEFORE TRUNCATE ON audit_events
    FOR EACH STATEMENT EXECUTE FUNCTION audit_events_append_only();
