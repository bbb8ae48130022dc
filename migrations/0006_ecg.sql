-- +goose Up
-- Handheld single-lead ECG recordings and the clinicians' over-reads.
-- Category values are the stored values of cohort/overread; the CHECK
-- constraints repeat them so no path can store anything else.

CREATE TABLE recordings (
    id                  bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    case_id             bigint NOT NULL REFERENCES cases(id),
    participant_id      bigint NOT NULL REFERENCES participants(id),
    taken_at            timestamptz NOT NULL,
    -- when the recording reached the study (the case's "recording received")
    received_at         timestamptz NOT NULL DEFAULT now(),
    duration_s          real NOT NULL CHECK (duration_s > 0),
    -- the recorder's own automatic interpretation, mapped to our categories
    auto_interpretation text NOT NULL DEFAULT 'none'
        CHECK (auto_interpretation IN ('none', 'af', 'sinus', 'unclassified', 'unreadable')),
    -- shorter than 30 s: accepted but not enough for a diagnostic read (2020
    -- ESC AF guidelines); kept in step with the duration
    too_short           boolean NOT NULL DEFAULT false,
    waveform_format     text NOT NULL DEFAULT '' CHECK (waveform_format IN ('', 'edf', 'edf+', 'csv', 'samples')),
    -- the uploaded file's name (may itself identify someone: shown only on
    -- pages for roles that see PHI, never exported) and digest
    file_name           text NOT NULL DEFAULT '' CHECK (length(file_name) <= 255),
    file_sha256         bytea,
    sampling_hz         real CHECK (sampling_hz > 0),
    -- lead label and a technical description of the source (format, signal,
    -- rate, units); never the EDF patient or recording identification
    lead_label          text NOT NULL DEFAULT '' CHECK (length(lead_label) <= 80),
    source              text NOT NULL DEFAULT '' CHECK (length(source) <= 500),
    -- samples in microvolts as little-endian int16 (db.EncodeSamples); NULL without waveform
    samples             bytea,
    -- detected R peaks (sample indices) and the beat-interval hint
    beats               integer[] NOT NULL DEFAULT '{}',
    hint                jsonb,
    created_by_id       bigint REFERENCES users(id),
    created_by          text NOT NULL DEFAULT '',
    created_at          timestamptz NOT NULL DEFAULT now(),
    CHECK (too_short = (duration_s < 30)),
    CHECK ((samples IS NULL) = (sampling_hz IS NULL)),
    CHECK ((samples IS NULL) = (waveform_format = ''))
);
CREATE INDEX recordings_case_idx ON recordings (case_id, taken_at);
CREATE INDEX recordings_participant_idx ON recordings (participant_id);
-- The same file twice on one case is a repeated upload, not a new recording.
CREATE UNIQUE INDEX recordings_case_file_idx ON recordings (case_id, file_sha256) WHERE file_sha256 IS NOT NULL;

CREATE TABLE over_reads (
    id            bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    recording_id  bigint NOT NULL REFERENCES recordings(id),
    case_id       bigint NOT NULL REFERENCES cases(id),
    participant_id bigint NOT NULL REFERENCES participants(id),
    -- first and second readers, and an adjudication when they disagree
    role          text NOT NULL CHECK (role IN ('first', 'second', 'adjudication')),
    rhythm        text NOT NULL CHECK (rhythm IN ('af', 'flutter', 'sinus', 'other', 'uninterpretable')),
    confidence    text NOT NULL DEFAULT 'certain' CHECK (confidence IN ('certain', 'probable', 'uncertain')),
    -- free text: stays inside the system
    comment       text NOT NULL DEFAULT '' CHECK (length(comment) <= 2000),
    reader_id     bigint REFERENCES users(id),
    reader        text NOT NULL,
    read_on       date NOT NULL,
    created_by    text NOT NULL DEFAULT '',
    created_at    timestamptz NOT NULL DEFAULT now(),
    UNIQUE (recording_id, role)
);
CREATE INDEX over_reads_case_idx ON over_reads (case_id);
CREATE INDEX over_reads_recent_idx ON over_reads (created_at DESC, id DESC);
