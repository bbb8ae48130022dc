-- +goose Up
-- A referral summary is issued as a draft (its content says so and its PDF
-- carries the draft mark). The investigator's sign-off makes new content that
-- names the signer and the study day (cohort/referral.Sign), recorded beside
-- the draft with its own digests, so both stay reproducible. Summaries issued
-- before drafts existed keep their content and have no signed content.
ALTER TABLE referrals
    ADD COLUMN signed_content        jsonb,
    ADD COLUMN signed_content_sha256 text CHECK (signed_content_sha256 ~ '^[0-9a-f]{64}$'),
    ADD COLUMN signed_pdf_sha256     text CHECK (signed_pdf_sha256 ~ '^[0-9a-f]{64}$'),
    ADD CONSTRAINT referrals_signed_content_whole
        CHECK ((signed_content IS NULL) = (signed_content_sha256 IS NULL) AND (signed_content IS NULL) = (signed_pdf_sha256 IS NULL)),
    ADD CONSTRAINT referrals_signed_content_signed
        CHECK (signed_content IS NULL OR signed_off_at IS NOT NULL);
