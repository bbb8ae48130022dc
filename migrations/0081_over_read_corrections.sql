-- +goose Up
-- Corrections of over-reads. over_reads holds each recording's current
-- readings, the ones its conclusion rests on (overread.Resolve). A reading
-- amended or withdrawn by its reader, with a reason, is copied here as it
-- was before it changed; an amended reading keeps its id in over_reads with
-- the new values, a withdrawn one leaves over_reads. Nothing here is ever
-- changed or deleted.
CREATE TABLE over_read_revisions (
    id             bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    over_read_id   bigint NOT NULL,
    recording_id   bigint NOT NULL REFERENCES recordings(id),
    case_id        bigint NOT NULL REFERENCES cases(id),
    participant_id bigint NOT NULL REFERENCES participants(id),
    -- the reading as it was
    role           text NOT NULL CHECK (role IN ('first', 'second', 'adjudication')),
    rhythm         text NOT NULL CHECK (rhythm IN ('af', 'flutter', 'sinus', 'other', 'uninterpretable')),
    confidence     text NOT NULL CHECK (confidence IN ('certain', 'probable', 'uncertain')),
    comment        text NOT NULL DEFAULT '' CHECK (length(comment) <= 2000),
    reader_id      bigint REFERENCES users(id),
    reader         text NOT NULL,
    read_on        date NOT NULL,
    created_by     text NOT NULL DEFAULT '',
    created_at     timestamptz NOT NULL,
    -- what became of it, why, by whom and when; free text stays inside
    change         text NOT NULL CHECK (change IN ('amended', 'withdrawn')),
    reason         text NOT NULL CHECK (length(reason) BETWEEN 1 AND 1000),
    changed_by_id  bigint REFERENCES users(id),
    changed_by     text NOT NULL,
    changed_at     timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX over_read_revisions_recording_idx ON over_read_revisions (recording_id, changed_at);

-- A recording that needs no over-read (a repeat replaced it, say), marked
-- with the reason: it leaves the over-read queue. NULL: it is wanted.
ALTER TABLE recordings
    ADD COLUMN read_not_needed_reason text CHECK (length(read_not_needed_reason) BETWEEN 1 AND 1000),
    ADD COLUMN read_not_needed_by     text,
    ADD COLUMN read_not_needed_at     timestamptz,
    ADD CONSTRAINT recordings_read_not_needed_whole
        CHECK ((read_not_needed_reason IS NULL) = (read_not_needed_at IS NULL) AND (read_not_needed_reason IS NULL) = (read_not_needed_by IS NULL));
