-- +goose Up
-- How many messages stand in each status: the outbox page's figures, kept
-- as messages are written and change status instead of counted from every
-- message ever sent on each request. A signed ledger like the other kept
-- counts (migration 0040), folded by db.CompactLedgers. And the outbox's
-- list of one status reads its newest rows from an index in that order.
CREATE TABLE message_status_counts (
    status text NOT NULL,
    n      bigint NOT NULL
);

-- +goose StatementBegin
CREATE FUNCTION message_status_counts_ins() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO message_status_counts (status, n) SELECT status, count(*) FROM new_rows GROUP BY 1;
    RETURN NULL;
END;
$$;
-- +goose StatementEnd

-- +goose StatementBegin
CREATE FUNCTION message_status_counts_upd() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO message_status_counts (status, n)
    SELECT status, sum(n) FROM (SELECT status, -1 AS n FROM old_rows UNION ALL SELECT status, 1 FROM new_rows) x
    GROUP BY 1 HAVING sum(n) <> 0;
    RETURN NULL;
END;
$$;
-- +goose StatementEnd

-- +goose StatementBegin
CREATE FUNCTION message_status_counts_del() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO message_status_counts (status, n) SELECT status, -count(*) FROM old_rows GROUP BY 1;
    RETURN NULL;
END;
$$;
-- +goose StatementEnd

CREATE TRIGGER messages_count_ins AFTER INSERT ON messages REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION message_status_counts_ins();
CREATE TRIGGER messages_count_upd AFTER UPDATE ON messages REFERENCING OLD TABLE AS old_rows NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION message_status_counts_upd();
CREATE TRIGGER messages_count_del AFTER DELETE ON messages REFERENCING OLD TABLE AS old_rows
    FOR EACH STATEMENT EXECUTE FUNCTION message_status_counts_del();

INSERT INTO message_status_counts (status, n) SELECT status, count(*) FROM messages GROUP BY 1;

CREATE INDEX messages_status_recent_idx ON messages (status, created_at DESC, id DESC);
