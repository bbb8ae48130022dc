-- +goose Up
-- The paper the study prints on (referral summaries, the weekly report):
-- the default of every print view and batch, which a person may still change
-- for one printout. 'a4' (ISO 216) or 'letter' (US Letter).
ALTER TABLE study ADD COLUMN paper text NOT NULL DEFAULT 'a4' CHECK (paper IN ('a4', 'letter'));
