-- +goose Up
-- Handheld single-lead ECG recordings and the clinicians' over-reads.

CREATE TABLE recordings (
    id                  bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    case_id             bigint NOT NULL REFERENCES cases(id),
    participant_id      bigint NOT NULL REFERENCES participants(id),
    taken_at            timestamptz NOT NULL,
    duration_s          real NOT NULL CHECK (duration_s > 0),
    -- the recorder's own automatic interpretation, mapped to our categories
    auto_interpretation text NOT NULL DEFAULT 'none'
        CHECK (auto_interpretation IN ('none', 'af', 'sinus', 'unclassified', 'unreadable')),
    -- shorter than 30 s: accepted but not enough for a diagnostic read
    too_short           boolean NOT NULL DEFAULT false,
    waveform_format     text NOT NULL DEFAULT '' CHECK (waveform_format IN ('', 'edf', 'edf+', 'csv')),
    file_name           text NOT NULL DEFAULT '',
    file_sha256         bytea,
    sampling_hz         real,
    -- samples in microvolts as little-endian int16 (db.EncodeSamples); empty without waveform
    samples             bytea,
    -- detected R peaks (sample indices) and the beat-interval hint
    beats               integer[] NOT NULL DEFAULT '{}',
    hint                jsonb,
    created_by          text NOT NULL DEFAULT '',
    created_at          timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX recordings_case_idx ON recordings (case_id, taken_at);
CREATE INDEX recordings_participant_idx ON recordings (participant_id);

CREATE TABLE over_reads (
    id            bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    recording_id  bigint NOT NULL REFERENCES recordings(id),
    case_id       bigint NOT NULL REFERENCES cases(id),
    participant_id bigint NOT NULL REFERENCES participants(id),
    -- first and second readers, and an adjudication when they disagree
    role          text NOT NULL CHECK (role IN ('first', 'second', 'adjudication')),
    rhythm        text NOT NULL CHECK (rhythm IN ('af', 'flutter', 'sinus', 'other', 'uninterpretable')),
    confidence    text NOT NULL DEFAULT 'certain' CHECK (confidence IN ('certain', 'probable', 'uncertain')),
    comment       text NOT NULL DEFAULT '',
    reader_id     bigint REFERENCES users(id),
    reader        text NOT NULL,
    read_on       date NOT NULL,
    created_at    timestamptz NOT NULL DEFAULT now(),
    UNIQUE (recording_id, role)
);
CREATE INDEX over_reads_case_idx ON over_reads (case_id);
