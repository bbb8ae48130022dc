-- +goose Up
-- Staff free text that an audit event refers to and that has no other home
-- (the reason given for moving a case to another working state). The audit
-- event keeps this row's id and the text's SHA-256, never the text, so the
-- text can be removed (a participant's request, a reason written on the
-- wrong case) while the append-only trail stays as written. Text that has a
-- home of its own (notes, withdrawal reasons, closing reasons, attempt notes,
-- over-read comments) is referred to where it lives.
CREATE TABLE audit_texts (
    id          bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    object_type text NOT NULL,
    object_id   text NOT NULL,
    body        text NOT NULL CHECK (length(body) BETWEEN 1 AND 4000),
    created_at  timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX audit_texts_object_idx ON audit_texts (object_type, object_id);
