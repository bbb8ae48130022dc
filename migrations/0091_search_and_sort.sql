-- +goose Up
-- Searching participants and cases by any part of a study ID, and the case
-- list's sort orders.

-- A study ID is searched in its letters and digits only, in lower case, so
-- "0173", "qrw0173" and "QRW-0173" all find QRW-0173-K. The searchable form
-- is kept beside the ID (as participant_identity.search_name is for names),
-- and a trigram index on it finds a part anywhere in the ID; parts of one or
-- two characters read the column instead, which stays quick because nothing
-- is computed per row. It replaces the prefix-only index of 0008.
ALTER TABLE participants ADD COLUMN search_id text GENERATED ALWAYS AS (regexp_replace(lower(study_id), '[^a-z0-9]', '', 'g')) STORED;
CREATE INDEX participants_search_id_trgm_idx ON participants USING gin (search_id gin_trgm_ops);
DROP INDEX participants_study_id_lower_idx;

-- The case list sorted by flag time (newest or oldest first), page by page.
CREATE INDEX cases_flagged_order_idx ON cases (flagged_at, id);
