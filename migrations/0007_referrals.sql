-- +goose Up
-- Issued referral summaries and de-identified exports, recorded so each can be
-- reproduced: the summary's de-identified content is kept as issued with its
-- digest, and the digest of the PDF made from it.

CREATE TABLE referrals (
    id              bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    participant_id  bigint NOT NULL REFERENCES participants(id),
    -- NULL for a summary made on request for a participant without a case
    case_id         bigint REFERENCES cases(id),
    referral_code   text NOT NULL,
    -- the screening protocol version whose results the summary shows
    protocol_id     integer REFERENCES protocols(id),
    -- the de-identified content as issued (cohort/referral.Summary as JSON);
    -- content_sha256 is referral.Digest of it, so any later rendering can be
    -- checked against what was issued
    content         jsonb NOT NULL,
    content_sha256  text NOT NULL CHECK (content_sha256 ~ '^[0-9a-f]{64}$'),
    -- how it was handed out: the HTML print view, a PDF, or a PDF inside a
    -- batch zip; paper is the page size it was laid out for
    format          text NOT NULL DEFAULT 'html' CHECK (format IN ('html', 'pdf', 'zip')),
    paper           text NOT NULL DEFAULT 'a4' CHECK (paper IN ('a4', 'letter')),
    -- SHA-256 of the PDF bytes made from content on paper; re-rendering the
    -- content gives the same bytes
    pdf_sha256      text NOT NULL CHECK (pdf_sha256 ~ '^[0-9a-f]{64}$'),
    issued_by_id    bigint REFERENCES users(id),
    issued_by       text NOT NULL,
    issued_at       timestamptz NOT NULL DEFAULT now(),
    -- the investigator's sign-off, which moves the case to referred
    signed_off_by_id bigint REFERENCES users(id),
    signed_off_by   text NOT NULL DEFAULT '',
    signed_off_at   timestamptz,
    CHECK ((signed_off_at IS NULL) = (signed_off_by = ''))
);
CREATE INDEX referrals_participant_idx ON referrals (participant_id, issued_at);
CREATE INDEX referrals_case_idx ON referrals (case_id, issued_at);
CREATE INDEX referrals_issued_idx ON referrals (issued_at DESC, id DESC);
-- At most one signed-off summary per case: the sign-off ends the case.
CREATE UNIQUE INDEX referrals_one_signoff ON referrals (case_id) WHERE signed_off_at IS NOT NULL;

-- De-identified files handed out: the dataset export and batches of referral
-- summaries. The file itself is not kept; its manifest (files, row counts,
-- digests) and its digest are, so a copy found later can be recognised.
CREATE TABLE exports (
    id          bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    kind        text NOT NULL CHECK (kind IN ('dataset', 'referral_batch')),
    file_name   text NOT NULL,
    bytes       bigint NOT NULL CHECK (bytes >= 0),
    sha256      text NOT NULL CHECK (sha256 ~ '^[0-9a-f]{64}$'),
    manifest    jsonb NOT NULL,
    actor_id    bigint REFERENCES users(id),
    actor       text NOT NULL,
    created_at  timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX exports_created_idx ON exports (created_at DESC, id DESC);
