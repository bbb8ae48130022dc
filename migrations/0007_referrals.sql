-- +goose Up
-- Issued referral summaries and de-identified exports, recorded so each can be
-- reproduced.

CREATE TABLE referrals (
    id              bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    case_id         bigint REFERENCES cases(id),
    participant_id  bigint NOT NULL REFERENCES participants(id),
    referral_code   text NOT NULL,
    protocol_id     integer REFERENCES protocols(id),
    -- the de-identified content as issued, and its digest
    content         jsonb NOT NULL,
    content_sha256  text NOT NULL,
    format          text NOT NULL DEFAULT 'html' CHECK (format IN ('html', 'pdf', 'zip')),
    issued_by_id    bigint REFERENCES users(id),
    issued_by       text NOT NULL,
    issued_at       timestamptz NOT NULL DEFAULT now(),
    signed_off_by_id bigint REFERENCES users(id),
    signed_off_by   text NOT NULL DEFAULT '',
    signed_off_at   timestamptz
);
CREATE INDEX referrals_case_idx ON referrals (case_id, issued_at);

CREATE TABLE exports (
    id          bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    kind        text NOT NULL,
    manifest    jsonb NOT NULL,
    sha256      text NOT NULL,
    actor_id    bigint REFERENCES users(id),
    actor       text NOT NULL,
    created_at  timestamptz NOT NULL DEFAULT now()
);
