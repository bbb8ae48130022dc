-- +goose Up
-- Every large table keyed by participant. A distributed PostgreSQL spreads a
-- table over machines by one column and can only enforce a unique key, or a
-- foreign key between two such tables, that includes that column (README,
-- "Scaling out"). The study's large tables are spread by participant: the
-- participant id is now in the primary key and every unique index of each,
-- and each foreign key between them includes it, so all of one participant's
-- rows live together and a participant's page or case is read on one
-- machine. Lookups by a row's own id keep a plain (not unique) index.
-- migrations' TestSchemaKeyedByParticipant checks the rule on the migrated
-- schema.
--
-- This migration runs after every table it re-keys exists (the recording
-- signals, the outbox and its letters, the over-read corrections came after
-- the first kept figures), so their foreign keys into cases, recordings and
-- contact attempts, made by id alone, are dropped here with the others and
-- made again in pairs.

-- Study IDs stay unique across the study in a directory keyed by study ID
-- (spread by its own key), kept by a trigger; participants keep a plain
-- index for lookups. A duplicate study ID is refused by the directory's key
-- with the same message as before.
CREATE TABLE study_ids (
    study_id       text PRIMARY KEY,
    participant_id bigint NOT NULL
);
INSERT INTO study_ids (study_id, participant_id) SELECT study_id, id FROM participants;

-- +goose StatementBegin
CREATE FUNCTION study_ids_keep() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF TG_OP = 'INSERT' THEN
        INSERT INTO study_ids (study_id, participant_id) VALUES (NEW.study_id, NEW.id);
    ELSIF TG_OP = 'UPDATE' THEN
        IF NEW.study_id IS DISTINCT FROM OLD.study_id THEN
            DELETE FROM study_ids WHERE study_id = OLD.study_id AND participant_id = OLD.id;
            INSERT INTO study_ids (study_id, participant_id) VALUES (NEW.study_id, NEW.id);
        END IF;
    ELSE
        DELETE FROM study_ids WHERE study_id = OLD.study_id AND participant_id = OLD.id;
    END IF;
    RETURN NULL;
END;
$$;
-- +goose StatementEnd
CREATE TRIGGER study_ids_keep AFTER INSERT OR UPDATE OF study_id OR DELETE ON participants
    FOR EACH ROW EXECUTE FUNCTION study_ids_keep();
ALTER TABLE participants DROP CONSTRAINT participants_study_id_key;
CREATE INDEX participants_study_id_idx ON participants (study_id);

-- Foreign keys into cases and recordings go by (participant, id).
ALTER TABLE case_weeks DROP CONSTRAINT case_weeks_case_id_fkey;
ALTER TABLE contact_attempts DROP CONSTRAINT contact_attempts_case_id_fkey;
ALTER TABLE recordings DROP CONSTRAINT recordings_case_id_fkey;
ALTER TABLE over_reads DROP CONSTRAINT over_reads_case_id_fkey;
ALTER TABLE over_reads DROP CONSTRAINT over_reads_recording_id_fkey;
ALTER TABLE referrals DROP CONSTRAINT referrals_case_id_fkey;
ALTER TABLE recording_leads DROP CONSTRAINT recording_leads_recording_id_fkey;
ALTER TABLE letter_batch_items DROP CONSTRAINT letter_batch_items_case_id_fkey;
ALTER TABLE messages DROP CONSTRAINT messages_case_id_fkey;
ALTER TABLE messages DROP CONSTRAINT messages_attempt_id_fkey;
ALTER TABLE over_read_revisions DROP CONSTRAINT over_read_revisions_recording_id_fkey;
ALTER TABLE over_read_revisions DROP CONSTRAINT over_read_revisions_case_id_fkey;

ALTER TABLE cases DROP CONSTRAINT cases_pkey;
ALTER TABLE cases ADD PRIMARY KEY (participant_id, id);
CREATE INDEX cases_id_idx ON cases (id);

ALTER TABLE recordings DROP CONSTRAINT recordings_pkey;
ALTER TABLE recordings ADD PRIMARY KEY (participant_id, id);
CREATE INDEX recordings_id_idx ON recordings (id);
DROP INDEX recordings_case_file_idx;
CREATE UNIQUE INDEX recordings_case_file_idx ON recordings (participant_id, case_id, file_sha256) WHERE file_sha256 IS NOT NULL;

ALTER TABLE over_reads DROP CONSTRAINT over_reads_pkey;
ALTER TABLE over_reads ADD PRIMARY KEY (participant_id, id);
CREATE INDEX over_reads_id_idx ON over_reads (id);
ALTER TABLE over_reads DROP CONSTRAINT over_reads_recording_id_role_key;
ALTER TABLE over_reads ADD CONSTRAINT over_reads_recording_role_key UNIQUE (participant_id, recording_id, role);
-- Readings are read by recording (the over-read key led by recording before).
CREATE INDEX over_reads_recording_idx ON over_reads (recording_id);

ALTER TABLE contact_attempts DROP CONSTRAINT contact_attempts_pkey;
ALTER TABLE contact_attempts ADD PRIMARY KEY (participant_id, id);

ALTER TABLE participant_notes DROP CONSTRAINT participant_notes_pkey;
ALTER TABLE participant_notes ADD PRIMARY KEY (participant_id, id);

ALTER TABLE referrals DROP CONSTRAINT referrals_pkey;
ALTER TABLE referrals ADD PRIMARY KEY (participant_id, id);
CREATE INDEX referrals_id_idx ON referrals (id);
DROP INDEX referrals_one_signoff;
CREATE UNIQUE INDEX referrals_one_signoff ON referrals (participant_id, case_id) WHERE signed_off_at IS NOT NULL;

ALTER TABLE case_weeks ADD FOREIGN KEY (participant_id, case_id) REFERENCES cases (participant_id, id);
ALTER TABLE contact_attempts ADD FOREIGN KEY (participant_id, case_id) REFERENCES cases (participant_id, id);
ALTER TABLE recordings ADD FOREIGN KEY (participant_id, case_id) REFERENCES cases (participant_id, id);
ALTER TABLE over_reads ADD FOREIGN KEY (participant_id, case_id) REFERENCES cases (participant_id, id);
ALTER TABLE over_reads ADD FOREIGN KEY (participant_id, recording_id) REFERENCES recordings (participant_id, id);
ALTER TABLE referrals ADD FOREIGN KEY (participant_id, case_id) REFERENCES cases (participant_id, id);

-- A recording's analysed leads carry their participant (filled from the
-- recording when a lead is stored).
ALTER TABLE recording_leads ADD COLUMN participant_id bigint;
UPDATE recording_leads l SET participant_id = r.participant_id FROM recordings r WHERE r.id = l.recording_id;
ALTER TABLE recording_leads ALTER COLUMN participant_id SET NOT NULL;
ALTER TABLE recording_leads DROP CONSTRAINT recording_leads_pkey;
ALTER TABLE recording_leads ADD PRIMARY KEY (participant_id, recording_id, lead_index);
CREATE INDEX recording_leads_recording_idx ON recording_leads (recording_id, lead_index);
ALTER TABLE recording_leads ADD FOREIGN KEY (participant_id, recording_id) REFERENCES recordings (participant_id, id);

-- A batch's letters: one per case, each in its place; both rules now hold
-- per participant (a batch is printed by one transaction, which numbers its
-- letters), and the letters are read by batch from a plain index.
ALTER TABLE letter_batch_items DROP CONSTRAINT letter_batch_items_pkey;
ALTER TABLE letter_batch_items DROP CONSTRAINT letter_batch_items_batch_id_case_id_key;
ALTER TABLE letter_batch_items ADD PRIMARY KEY (participant_id, batch_id, case_id);
CREATE INDEX letter_batch_items_batch_idx ON letter_batch_items (batch_id, position);
ALTER TABLE letter_batch_items ADD FOREIGN KEY (participant_id, case_id) REFERENCES cases (participant_id, id);

-- The outbox.
ALTER TABLE messages DROP CONSTRAINT messages_pkey;
ALTER TABLE messages ADD PRIMARY KEY (participant_id, id);
CREATE INDEX messages_id_idx ON messages (id);
ALTER TABLE messages DROP CONSTRAINT messages_attempt_id_key;
ALTER TABLE messages ADD CONSTRAINT messages_attempt_key UNIQUE (participant_id, attempt_id);
ALTER TABLE messages DROP CONSTRAINT messages_idempotency_key_key;
ALTER TABLE messages ADD CONSTRAINT messages_idempotency_key UNIQUE (participant_id, idempotency_key);
CREATE INDEX messages_idempotency_idx ON messages (idempotency_key);
ALTER TABLE messages ADD FOREIGN KEY (participant_id, case_id) REFERENCES cases (participant_id, id);
ALTER TABLE messages ADD FOREIGN KEY (participant_id, attempt_id) REFERENCES contact_attempts (participant_id, id);

-- Corrections of over-reads.
ALTER TABLE over_read_revisions DROP CONSTRAINT over_read_revisions_pkey;
ALTER TABLE over_read_revisions ADD PRIMARY KEY (participant_id, id);
ALTER TABLE over_read_revisions ADD FOREIGN KEY (participant_id, recording_id) REFERENCES recordings (participant_id, id);
ALTER TABLE over_read_revisions ADD FOREIGN KEY (participant_id, case_id) REFERENCES cases (participant_id, id);
