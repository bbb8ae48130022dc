-- +goose Up
-- Follow-up cases: one per screen-positive episode, worked by coordinators.

CREATE TABLE cases (
    id                 bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    participant_id     bigint NOT NULL REFERENCES participants(id),
    protocol_id        integer NOT NULL REFERENCES protocols(id),
    first_week         smallint NOT NULL,
    last_week          smallint NOT NULL CHECK (last_week >= first_week),
    -- cohort/followup state names
    state              text NOT NULL DEFAULT 'open',
    owner_id           bigint REFERENCES users(id),
    flagged_at         timestamptz NOT NULL,
    next_action        text NOT NULL DEFAULT '',
    due_at             timestamptz,
    reached_at         timestamptz,
    recorder_sent_at   timestamptz,
    tracking_number    text NOT NULL DEFAULT '',
    recording_back_at  timestamptz,
    over_read_at       timestamptz,
    closed_at          timestamptz,
    closing_note       text NOT NULL DEFAULT '',
    version            integer NOT NULL DEFAULT 1,
    created_at         timestamptz NOT NULL DEFAULT now(),
    updated_at         timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX cases_participant_idx ON cases (participant_id, first_week);
CREATE INDEX cases_state_idx ON cases (state, due_at);
CREATE INDEX cases_owner_idx ON cases (owner_id, state);

CREATE TABLE contact_attempts (
    id             bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    case_id        bigint NOT NULL REFERENCES cases(id),
    participant_id bigint NOT NULL REFERENCES participants(id),
    at             timestamptz NOT NULL,
    channel        text NOT NULL CHECK (channel IN ('phone', 'email', 'text', 'letter')),
    outcome        text NOT NULL CHECK (outcome IN ('reached', 'no_answer', 'message_left', 'wrong_number', 'declined', 'sent')),
    -- free text: never leaves the system in exports
    note           text NOT NULL DEFAULT '',
    actor_id       bigint REFERENCES users(id),
    actor          text NOT NULL DEFAULT '',
    created_at     timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX contact_attempts_case_idx ON contact_attempts (case_id, at);

-- Participant notes (free text, audited, never exported).
CREATE TABLE participant_notes (
    id             bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    participant_id bigint NOT NULL REFERENCES participants(id),
    body           text NOT NULL CHECK (length(body) BETWEEN 1 AND 4000),
    actor_id       bigint REFERENCES users(id),
    actor          text NOT NULL DEFAULT '',
    created_at     timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX participant_notes_idx ON participant_notes (participant_id, created_at);
