-- +goose Up
-- Follow-up cases: one per screen-positive episode, worked by coordinators.
-- State names, channels and outcomes are the stored values of cohort/followup;
-- the CHECK constraints repeat them so a bad value cannot be stored by any
-- path. The participant id is on every table so the schema can later be
-- distributed by participant.

CREATE TABLE cases (
    id                 bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    participant_id     bigint NOT NULL REFERENCES participants(id),
    -- the protocol version whose results opened the case
    protocol_id        integer NOT NULL REFERENCES protocols(id),
    first_week         smallint NOT NULL,
    last_week          smallint NOT NULL CHECK (last_week >= first_week),
    state              text NOT NULL DEFAULT 'open' CHECK (state IN (
                           'open', 'contacting', 'reached', 'recorder_sent', 'recording_received', 'over_read',
                           'referred', 'closed_not_confirmed', 'closed_unreachable', 'closed_declined', 'closed_withdrawn')),
    owner_id           bigint REFERENCES users(id),
    -- when staff were told: the moment the case was opened
    flagged_at         timestamptz NOT NULL,
    -- followup.NextDue's answer, recomputed after every change and whenever the
    -- study's service levels or calendar change; '' and NULL when nothing is due
    next_action        text NOT NULL DEFAULT '',
    due_at             timestamptz,
    reached_at         timestamptz,
    recorder_sent_at   timestamptz,
    tracking_number    text NOT NULL DEFAULT '' CHECK (length(tracking_number) <= 64),
    recording_back_at  timestamptz,
    over_read_at       timestamptz,
    -- set exactly when the state is final
    closed_at          timestamptz,
    closing_note       text NOT NULL DEFAULT '' CHECK (length(closing_note) <= 1000),
    -- short working note shown on the lists (free text: never exported)
    note               text NOT NULL DEFAULT '' CHECK (length(note) <= 500),
    -- optimistic locking: every edit names the version it was based on
    version            integer NOT NULL DEFAULT 1,
    created_at         timestamptz NOT NULL DEFAULT now(),
    updated_at         timestamptz NOT NULL DEFAULT now(),
    CHECK ((closed_at IS NOT NULL) = (state IN ('referred', 'closed_not_confirmed', 'closed_unreachable', 'closed_declined', 'closed_withdrawn')))
);
CREATE INDEX cases_participant_idx ON cases (participant_id, first_week);
-- The working lists (triage, open cases) read only cases still being worked.
CREATE INDEX cases_open_due_idx ON cases (due_at, id) WHERE closed_at IS NULL;
CREATE INDEX cases_owner_idx ON cases (owner_id, state) WHERE closed_at IS NULL;
-- The case list pages through cases by deadline, cases with nothing due last.
CREATE INDEX cases_due_order_idx ON cases ((coalesce(due_at, 'infinity'::timestamptz)), id);

-- The screen-positive participant-weeks behind each case. A screening result
-- (participant, protocol, week) belongs to at most one case, which is what
-- makes re-running the case sync harmless. late: the week arrived after the
-- case was closed and is recorded on it without reopening it.
CREATE TABLE case_weeks (
    participant_id bigint NOT NULL REFERENCES participants(id),
    protocol_id    integer NOT NULL REFERENCES protocols(id),
    week           smallint NOT NULL CHECK (week >= 0),
    case_id        bigint NOT NULL REFERENCES cases(id),
    late           boolean NOT NULL DEFAULT false,
    added_at       timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (participant_id, protocol_id, week)
);
CREATE INDEX case_weeks_case_idx ON case_weeks (case_id, week);

CREATE TABLE contact_attempts (
    id             bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    case_id        bigint NOT NULL REFERENCES cases(id),
    participant_id bigint NOT NULL REFERENCES participants(id),
    at             timestamptz NOT NULL,
    channel        text NOT NULL CHECK (channel IN ('phone', 'email', 'text_message', 'letter')),
    outcome        text NOT NULL CHECK (outcome IN ('reached', 'no_answer', 'message_left', 'wrong_number', 'declined')),
    -- free text: never leaves the system in exports
    note           text NOT NULL DEFAULT '' CHECK (length(note) <= 2000),
    -- the state the attempt moved the case to (followup.AfterAttempt), '' when none
    moved_to       text NOT NULL DEFAULT '',
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
