-- +goose Up
-- Recordings as files bring them: several signals, stretches the quality
-- check leaves out, more than one ECG lead, and the open research format.

-- usable_s: the length the quality check left usable (cohort/ecg.Quality);
-- NULL for recordings stored before it and for recordings without a
-- waveform, whose usable length is their duration.
ALTER TABLE recordings ADD COLUMN usable_s real CHECK (usable_s >= 0);
ALTER TABLE recordings ADD CHECK (usable_s IS NULL OR usable_s <= duration_s + 0.001);
-- signals: every signal of the uploaded file (cohort/ecg.SignalInfo as
-- JSON), the ECG leads and the others; NULL for recordings stored before.
ALTER TABLE recordings ADD COLUMN signals jsonb;
-- lead_index: with several ECG leads, the one shown and scored
-- (recording_leads.lead_index); NULL with one lead.
ALTER TABLE recordings ADD COLUMN lead_index smallint CHECK (lead_index >= 0);

-- The 30 s rule now counts usable seconds: too short means under 30 s
-- usable, whether the recording is short or its artefacts are long.
-- +goose StatementBegin
DO $$
DECLARE c text;
BEGIN
    FOR c IN SELECT conname FROM pg_constraint
             WHERE conrelid = 'recordings'::regclass AND contype = 'c'
               AND (pg_get_constraintdef(oid) LIKE '%too_short%' OR pg_get_constraintdef(oid) LIKE '%''edf+''%')
    LOOP
        EXECUTE format('ALTER TABLE recordings DROP CONSTRAINT %I', c);
    END LOOP;
END
$$;
-- +goose StatementEnd
ALTER TABLE recordings ADD CONSTRAINT recordings_too_short_check CHECK (too_short = (coalesce(usable_s, duration_s) < 30));
ALTER TABLE recordings ADD CONSTRAINT recordings_waveform_format_check
    CHECK (waveform_format IN ('', 'edf', 'edf+', 'csv', 'samples', 'wfdb'));

-- Every ECG lead of a recording whose file held more than one, analysed at
-- intake, so a reader can switch the lead shown without analysing again.
-- The recording row holds a copy of the lead shown.
CREATE TABLE recording_leads (
    recording_id  bigint NOT NULL REFERENCES recordings(id),
    lead_index    smallint NOT NULL CHECK (lead_index >= 0),
    -- the signal's number in the file (cohort/ecg.SignalInfo.Number)
    signal_number integer NOT NULL CHECK (signal_number >= 1),
    lead_label    text NOT NULL DEFAULT '' CHECK (length(lead_label) <= 80),
    source        text NOT NULL DEFAULT '' CHECK (length(source) <= 500),
    sampling_hz   real NOT NULL CHECK (sampling_hz > 0),
    -- samples in microvolts as little-endian int16 (db.EncodeSamples)
    samples       bytea NOT NULL,
    beats         integer[] NOT NULL DEFAULT '{}',
    hint          jsonb NOT NULL,
    usable_s      real NOT NULL CHECK (usable_s >= 0),
    PRIMARY KEY (recording_id, lead_index)
);
