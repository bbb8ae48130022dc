-- +goose Up
-- Outreach: message templates (versioned, never changed once saved), the
-- study's word list, participants' contact preferences, the outbox of
-- messages to participants, printed letter batches, and the morning summary
-- of coordinators. Purpose, channel and status values are cohort/outreach's
-- and cohort/followup's stored values; the CHECK constraints repeat them.

CREATE TABLE message_templates (
    id          integer GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    purpose     text NOT NULL CHECK (purpose IN ('first_contact', 'reminder', 'recorder_out', 'recorder_return', 'talk_next_steps')),
    channel     text NOT NULL CHECK (channel IN ('email', 'text_message', 'letter')),
    version     integer NOT NULL CHECK (version >= 1),
    -- fixed text: no placeholders, no health words (cohort/outreach.Template.Check)
    subject     text NOT NULL DEFAULT '' CHECK (length(subject) <= 120),
    body        text NOT NULL CHECK (length(body) BETWEEN 1 AND 5000),
    reply_days  smallint NOT NULL DEFAULT 5 CHECK (reply_days BETWEEN 1 AND 30),
    note        text NOT NULL DEFAULT '' CHECK (length(note) <= 500),
    created_at  timestamptz NOT NULL DEFAULT now(),
    created_by  text NOT NULL DEFAULT '',
    UNIQUE (purpose, channel, version)
);

-- +goose StatementBegin
CREATE FUNCTION message_templates_immutable() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION 'message template % version % is kept as it was saved; save a new version instead', OLD.purpose, OLD.version
        USING ERRCODE = 'integrity_constraint_violation';
END;
$$;
-- +goose StatementEnd
CREATE TRIGGER message_templates_immutable BEFORE UPDATE OR DELETE ON message_templates
    FOR EACH ROW EXECUTE FUNCTION message_templates_immutable();

-- One row: the study's word list (cohort/outreach.WordList); no row means the defaults.
CREATE TABLE outreach_settings (
    id          smallint PRIMARY KEY DEFAULT 1 CHECK (id = 1),
    words       text[] NOT NULL,
    updated_at  timestamptz NOT NULL DEFAULT now(),
    updated_by  text NOT NULL DEFAULT ''
);

-- How a participant wishes to be contacted; no row means cohort/outreach.Defaults.
CREATE TABLE contact_preferences (
    participant_id     bigint PRIMARY KEY REFERENCES participants(id) ON DELETE CASCADE,
    preferred_channel  text NOT NULL DEFAULT '' CHECK (preferred_channel IN ('', 'phone', 'email', 'text_message', 'letter')),
    phone_consent      boolean NOT NULL DEFAULT true,
    email_consent      boolean NOT NULL DEFAULT true,
    text_consent       boolean NOT NULL DEFAULT false,
    letter_consent     boolean NOT NULL DEFAULT true,
    -- a later request to stop a channel; NULL when none
    phone_opt_out_at   timestamptz,
    email_opt_out_at   timestamptz,
    text_opt_out_at    timestamptz,
    letter_opt_out_at  timestamptz,
    -- minutes after midnight in the participant's time zone; equal means no quiet hours
    quiet_from         smallint NOT NULL DEFAULT 1260 CHECK (quiet_from BETWEEN 0 AND 1439),
    quiet_until        smallint NOT NULL DEFAULT 480 CHECK (quiet_until BETWEEN 0 AND 1439),
    version            integer NOT NULL DEFAULT 1,
    updated_at         timestamptz NOT NULL DEFAULT now(),
    updated_by         text NOT NULL DEFAULT ''
);

-- Letters printed together in one PDF, recorded as posted once.
CREATE TABLE letter_batches (
    id           bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    template_id  integer NOT NULL REFERENCES message_templates(id),
    paper        text NOT NULL CHECK (paper IN ('a4', 'letter')),
    created_at   timestamptz NOT NULL DEFAULT now(),
    created_by   text NOT NULL DEFAULT '',
    actor_id     bigint REFERENCES users(id),
    -- the selected cases that got no letter: "study ID: reason"
    skipped      text[] NOT NULL DEFAULT '{}',
    -- set once, when the letters were recorded as posted
    posted_at    timestamptz,
    posted_by    text NOT NULL DEFAULT ''
);

-- The letters of a batch as printed (PHI: name, address, body), so the PDF
-- can be printed again identically and the messages record what was posted.
CREATE TABLE letter_batch_items (
    batch_id        bigint NOT NULL REFERENCES letter_batches(id),
    position        integer NOT NULL,
    case_id         bigint NOT NULL REFERENCES cases(id),
    participant_id  bigint NOT NULL REFERENCES participants(id),
    address         text[] NOT NULL,
    subject         text NOT NULL,
    body            text NOT NULL,
    PRIMARY KEY (batch_id, position),
    UNIQUE (batch_id, case_id)
);

-- The outbox: every message to a participant. A message is written in the
-- same transaction as the case's contact attempt and the job that sends it.
CREATE TABLE messages (
    id               bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    participant_id   bigint NOT NULL REFERENCES participants(id),
    case_id          bigint NOT NULL REFERENCES cases(id),
    attempt_id       bigint NOT NULL UNIQUE REFERENCES contact_attempts(id),
    template_id      integer NOT NULL REFERENCES message_templates(id),
    purpose          text NOT NULL,
    channel          text NOT NULL CHECK (channel IN ('email', 'text_message', 'letter')),
    -- the Message-ID of an e-mail and the idempotency key of a text message:
    -- every try of one message carries the same key
    idempotency_key  uuid NOT NULL UNIQUE DEFAULT gen_random_uuid(),
    -- PHI: the e-mail address, phone number or postal address, and the body
    recipient        text NOT NULL,
    subject          text NOT NULL DEFAULT '',
    body             text NOT NULL,
    status           text NOT NULL DEFAULT 'queued' CHECK (status IN ('queued', 'sent', 'delivered', 'undeliverable', 'failed')),
    -- when it may go: now, or the end of the participant's quiet hours
    send_after       timestamptz NOT NULL DEFAULT now(),
    held             boolean NOT NULL DEFAULT false,
    tries            smallint NOT NULL DEFAULT 0,
    -- '' no try yet; 'trying' a try began and its end is not recorded
    -- (a crash); 'temporary' the last try failed for now
    try_state        text NOT NULL DEFAULT '' CHECK (try_state IN ('', 'trying', 'temporary')),
    -- a try began while an earlier one's end was unknown: the participant
    -- may have two copies, with the same Message-ID or key
    resent           boolean NOT NULL DEFAULT false,
    last_try_at      timestamptz,
    sent_at          timestamptz,
    status_at        timestamptz NOT NULL DEFAULT now(),
    -- the server's or gateway's answer, or why the message failed
    detail           text NOT NULL DEFAULT '' CHECK (length(detail) <= 1000),
    -- the gateway's reference for a text message
    provider_ref     text NOT NULL DEFAULT '' CHECK (length(provider_ref) <= 200),
    job_id           bigint REFERENCES jobs(id),
    letter_batch_id  bigint REFERENCES letter_batches(id),
    actor_id         bigint REFERENCES users(id),
    actor            text NOT NULL DEFAULT '',
    created_at       timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX messages_case_idx ON messages (case_id, id);
CREATE INDEX messages_participant_idx ON messages (participant_id, id);
CREATE INDEX messages_queued_idx ON messages (id) WHERE status = 'queued';
CREATE INDEX messages_recent_idx ON messages (created_at DESC, id DESC);

-- The desk's own outcome of an attempt whose message did not arrive.
ALTER TABLE contact_attempts DROP CONSTRAINT contact_attempts_outcome_check;
ALTER TABLE contact_attempts ADD CONSTRAINT contact_attempts_outcome_check
    CHECK (outcome IN ('reached', 'no_answer', 'message_left', 'wrong_number', 'declined', 'undeliverable'));

-- The morning summary: opt-in per account, one e-mail per account and day.
ALTER TABLE users ADD COLUMN morning_summary boolean NOT NULL DEFAULT false;
CREATE TABLE morning_summaries (
    user_id   bigint NOT NULL REFERENCES users(id),
    day       date NOT NULL,
    sent_at   timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (user_id, day)
);
-- At most one morning-summary job waits in the queue.
CREATE UNIQUE INDEX jobs_one_morning_summary ON jobs (kind) WHERE kind = 'summary.morning' AND state = 'queued';
