-- +goose Up
-- The study, its sites and its participants. Identifying details (PHI) live in
-- their own table so that one place decides who may read them.

CREATE EXTENSION IF NOT EXISTS pg_trgm;

-- One row: the study this deployment serves.
CREATE TABLE study (
    id               smallint PRIMARY KEY DEFAULT 1 CHECK (id = 1),
    name             text NOT NULL,
    time_zone        text NOT NULL DEFAULT 'UTC',
    -- Generic contact route printed on referral summaries (no staff names).
    contact_route    text NOT NULL DEFAULT '',
    -- Follow-up service levels, in the shape of cohort/followup.ServiceLevels.
    service_levels   jsonb NOT NULL DEFAULT '{}'::jsonb,
    -- Days on which the study team does not work, besides weekends.
    closure_days     date[] NOT NULL DEFAULT '{}',
    enrolment_target integer NOT NULL DEFAULT 0 CHECK (enrolment_target >= 0),
    -- Weeks of wear data each participant gives; 0 means open-ended. After
    -- them a participant has completed the study: no longer due for data.
    follow_up_weeks  smallint NOT NULL DEFAULT 0 CHECK (follow_up_weeks BETWEEN 0 AND 520),
    updated_at       timestamptz NOT NULL DEFAULT now()
);

CREATE TABLE sites (
    id          integer GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    code        text NOT NULL UNIQUE CHECK (code ~ '^[A-Z0-9]{2,8}$'),
    name        text NOT NULL,
    time_zone   text NOT NULL DEFAULT 'UTC',
    target      integer NOT NULL DEFAULT 0 CHECK (target >= 0),
    opened_on   date,
    created_at  timestamptz NOT NULL DEFAULT now()
);

-- Participants without identifying details: everything here may be shown to
-- every staff role.
CREATE TABLE participants (
    id                bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    study_id          text NOT NULL UNIQUE,
    site_id           integer NOT NULL REFERENCES sites(id),
    sex               char(1) NOT NULL DEFAULT 'U' CHECK (sex IN ('F','M','U')),
    -- Age in whole years at enrolment; the exact birth date is PHI.
    age_at_enrolment  smallint CHECK (age_at_enrolment BETWEEN 0 AND 130),
    time_zone         text NOT NULL,
    enrolled_on       date NOT NULL,
    consent_version   text NOT NULL DEFAULT '',
    withdrawn_on      date,
    withdrawal_reason text NOT NULL DEFAULT '',
    -- Intake answers used as stroke-risk factors; NULL means not answered.
    hypertension      boolean,
    diabetes          boolean,
    heart_failure     boolean,
    prior_stroke      boolean,
    vascular_disease  boolean,
    watch_model       text NOT NULL DEFAULT '',
    rr_capable        boolean NOT NULL DEFAULT false,
    version           integer NOT NULL DEFAULT 1,
    created_at        timestamptz NOT NULL DEFAULT now(),
    updated_at        timestamptz NOT NULL DEFAULT now(),
    CHECK (withdrawn_on IS NULL OR withdrawn_on >= enrolled_on)
);
CREATE INDEX participants_site_idx ON participants (site_id, study_id);
CREATE INDEX participants_enrolled_idx ON participants (enrolled_on, id);

-- Protected health information. Read only through the store methods that take a
-- role allowed to see PHI; every read is audited.
CREATE TABLE participant_identity (
    participant_id bigint PRIMARY KEY REFERENCES participants(id) ON DELETE CASCADE,
    given_name     text NOT NULL DEFAULT '',
    family_name    text NOT NULL DEFAULT '',
    birth_date     date,
    phone          text NOT NULL DEFAULT '',
    email          text NOT NULL DEFAULT '',
    street         text NOT NULL DEFAULT '',
    city           text NOT NULL DEFAULT '',
    zip            text NOT NULL DEFAULT '',
    device_serial  text NOT NULL DEFAULT '',
    -- For name search without a sequential scan.
    search_name    text GENERATED ALWAYS AS (lower(given_name || ' ' || family_name)) STORED
);
CREATE INDEX participant_identity_name_trgm ON participant_identity USING gin (search_name gin_trgm_ops);
