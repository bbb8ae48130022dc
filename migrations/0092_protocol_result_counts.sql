-- +goose Up
-- How many screening results each protocol version has stored: the figure
-- of the protocols pages, kept as results are written instead of counted
-- from screen_results (millions of rows in a large study) on every
-- request. A signed ledger like the other kept counts (migration 0040),
-- folded by db.CompactLedgers. Results are inserted, upserted on their key
-- (which holds the protocol) and deleted; never moved to another protocol,
-- so an update changes no count.
CREATE TABLE protocol_result_counts (
    protocol_id integer NOT NULL,
    n           bigint NOT NULL
);
CREATE INDEX protocol_result_counts_idx ON protocol_result_counts (protocol_id);

-- +goose StatementBegin
CREATE FUNCTION protocol_result_counts_ins() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO protocol_result_counts (protocol_id, n) SELECT protocol_id, count(*) FROM new_rows GROUP BY 1;
    RETURN NULL;
END;
$$;
-- +goose StatementEnd

-- +goose StatementBegin
CREATE FUNCTION protocol_result_counts_del() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO protocol_result_counts (protocol_id, n) SELECT protocol_id, -count(*) FROM old_rows GROUP BY 1;
    RETURN NULL;
END;
$$;
-- +goose StatementEnd

CREATE TRIGGER screen_results_count_ins AFTER INSERT ON screen_results REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION protocol_result_counts_ins();
CREATE TRIGGER screen_results_count_del AFTER DELETE ON screen_results REFERENCING OLD TABLE AS old_rows
    FOR EACH STATEMENT EXECUTE FUNCTION protocol_result_counts_del();

INSERT INTO protocol_result_counts (protocol_id, n) SELECT protocol_id, count(*) FROM screen_results GROUP BY 1;

