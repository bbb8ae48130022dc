-- +goose Up
-- The recorder's own reading gets stored values of our own, which say plainly
-- that the call is the device's (cohort/overread.Auto):
--   none         -> no_reading        no device reading
--   af           -> suggests_af       device suggests AF
--   sinus        -> suggests_regular  device suggests a regular rhythm
--   unclassified -> no_call           device made no rhythm call
--   unreadable   -> not_analysed      device could not analyse the trace
-- Audit events keep the values they were written with (the trail is
-- append-only) and issued referral summaries keep their recorded words, so
-- their digests still verify.

ALTER TABLE recordings DROP CONSTRAINT recordings_auto_interpretation_check;

UPDATE recordings SET auto_interpretation = CASE auto_interpretation
    WHEN 'none' THEN 'no_reading'
    WHEN 'af' THEN 'suggests_af'
    WHEN 'sinus' THEN 'suggests_regular'
    WHEN 'unclassified' THEN 'no_call'
    WHEN 'unreadable' THEN 'not_analysed'
    ELSE auto_interpretation
END;

ALTER TABLE recordings ALTER COLUMN auto_interpretation SET DEFAULT 'no_reading';

ALTER TABLE recordings ADD CONSTRAINT recordings_auto_interpretation_check
    CHECK (auto_interpretation IN ('no_reading', 'suggests_af', 'suggests_regular', 'no_call', 'not_analysed'));
