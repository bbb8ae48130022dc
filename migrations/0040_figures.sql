-- +goose Up
-- Figures kept, not recomputed. The progress page, the screening cascade,
-- the agreement statistics, data sufficiency, the start page and triage used
-- to count every participant-week and case of the study on each request, so
-- their cost grew with the study. They now read sums kept current as the rows
-- beneath them change.
--
-- Two layers:
--
-- 1. Per participant (keyed by participant, like the rows they come from):
--    where each participant stands in the cascade of each protocol version
--    (figure_standings), each case's figures for the agreement statistics
--    (figure_episodes) and each recording's cell of the kappa table
--    (figure_recordings). The application computes them with the rules of
--    cohort/cascade (Stand, Episode.Figure, Recording.KappaCell) and writes
--    them in the same transaction as the change (db/figures_keep.go).
--    Triggers below only mark which participants changed (figures_dirty);
--    a change made outside the application's transactions (a bulk load by
--    SQL) is picked up by a background pass, and pages say so while that
--    lasts.
--
-- 2. Sums (small tables whose size depends on the study's sites, days and
--    categories, not on its participants): ledgers of signed counts (n is
--    an integer, so a sum is a bigint). A
--    trigger adds a row +n for rows inserted and -n for rows deleted, so no
--    transaction ever updates a shared row (no waits, no deadlocks on hot
--    counters); readers add up the rows of a key, and a background pass
--    folds each ledger into one row per key (db/figures_ledger.go).

-- Participants whose figures must be computed again: marked by triggers in
-- the transaction that changed their rows. A transaction computes the
-- participants it marked itself before it commits (rows of its own xid);
-- rows that reach a commit (bulk loads by SQL) wait for the background pass.
CREATE TABLE figures_dirty (
    participant_id bigint NOT NULL,
    xid            xid8 NOT NULL DEFAULT pg_current_xact_id(),
    marked_at      timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX figures_dirty_xid_idx ON figures_dirty (xid);
CREATE INDEX figures_dirty_participant_idx ON figures_dirty (participant_id);

-- The participants the calling transaction marked, taken off the list. A
-- transaction that wrote nothing has no xid and takes nothing, without
-- writing (so it also works in a read-only transaction).
-- +goose StatementBegin
CREATE FUNCTION figures_take_marked() RETURNS SETOF bigint LANGUAGE plpgsql AS $$
BEGIN
    IF pg_current_xact_id_if_assigned() IS NULL THEN
        RETURN;
    END IF;
    RETURN QUERY DELETE FROM figures_dirty WHERE xid = pg_current_xact_id_if_assigned() RETURNING participant_id;
END;
$$;
-- +goose StatementEnd

-- One row: whether the per-participant figures have been built from the
-- rows at least once (a database that held a study before this migration
-- builds them at start-up; an empty one needs nothing).
CREATE TABLE figures_state (
    id       smallint PRIMARY KEY DEFAULT 1 CHECK (id = 1),
    built_at timestamptz
);
INSERT INTO figures_state (built_at) SELECT CASE WHEN EXISTS (SELECT 1 FROM participants) THEN NULL ELSE now() END;

-- Where a participant stands in the cascade of one protocol version
-- (cascade.Stand): the furthest box (0 enrolled ... 7 referred) and the exit
-- reason. Only participants with a screening result or a case under the
-- version have a row; the others stand in box 0 (no wear data, or withdrew
-- before any) and are counted from enrolment_counts.
CREATE TABLE figure_standings (
    participant_id   bigint NOT NULL,
    protocol_id      integer NOT NULL,
    site_id          integer NOT NULL,
    enrolled_on      date NOT NULL,
    withdrawn_on     date,
    box              smallint NOT NULL CHECK (box BETWEEN 0 AND 7),
    exit             text NOT NULL,
    -- study weeks with a positive or negative verdict under the version
    -- (data sufficiency)
    sufficient_weeks smallint[] NOT NULL DEFAULT '{}',
    PRIMARY KEY (participant_id, protocol_id)
);
-- A box's members, page by page.
CREATE INDEX figure_standings_box_idx ON figure_standings (protocol_id, box, participant_id);

-- One flagged episode (case) as the agreement statistics count it
-- (cascade.Episode.Figure), with its participant's subgroup.
CREATE TABLE figure_episodes (
    participant_id  bigint NOT NULL,
    case_id         bigint NOT NULL,
    protocol_id     integer NOT NULL,
    site_id         integer NOT NULL,
    enrolled_on     date NOT NULL,
    sex             char(1) NOT NULL,
    age_band        text NOT NULL,
    stage           smallint NOT NULL CHECK (stage BETWEEN 0 AND 5),
    settled         boolean NOT NULL,
    uninterpretable boolean NOT NULL,
    flag_day        date NOT NULL,
    event           boolean NOT NULL,
    closed          boolean NOT NULL,
    days            integer NOT NULL,
    PRIMARY KEY (participant_id, case_id)
);
-- Figures for a period of enrolment are added up from these rows.
CREATE INDEX figure_episodes_period_idx ON figure_episodes (protocol_id, enrolled_on);

-- One recording's cell of the kappa table (cascade.Recording.KappaCell);
-- recordings outside the table have no row.
CREATE TABLE figure_recordings (
    participant_id bigint NOT NULL,
    recording_id   bigint NOT NULL,
    protocol_id    integer NOT NULL,
    site_id        integer NOT NULL,
    enrolled_on    date NOT NULL,
    auto           text NOT NULL,
    rhythm         text NOT NULL,
    PRIMARY KEY (participant_id, recording_id)
);
CREATE INDEX figure_recordings_period_idx ON figure_recordings (protocol_id, enrolled_on);

-- What triage counts of a participant: recordings of cases still being
-- worked that nobody has read yet. Only participants with some have a row.
CREATE TABLE figure_people (
    participant_id    bigint PRIMARY KEY,
    unread_recordings integer NOT NULL
);

-- The ledgers. Their keys are sites, days and categories; n is signed.
CREATE TABLE figure_unread_counts (
    n integer NOT NULL
);

CREATE TABLE enrolment_counts (
    site_id      integer NOT NULL,
    enrolled_on  date NOT NULL,
    withdrawn_on date,
    n            integer NOT NULL
);
CREATE INDEX enrolment_counts_idx ON enrolment_counts (enrolled_on, site_id);

CREATE TABLE figure_box_counts (
    protocol_id integer NOT NULL,
    site_id     integer NOT NULL,
    enrolled_on date NOT NULL,
    withdrawn   boolean NOT NULL,
    box         smallint NOT NULL,
    exit        text NOT NULL,
    n           integer NOT NULL
);
CREATE INDEX figure_box_counts_idx ON figure_box_counts (protocol_id, enrolled_on);

CREATE TABLE figure_week_counts (
    protocol_id  integer NOT NULL,
    enrolled_on  date NOT NULL,
    withdrawn_on date,
    week         smallint NOT NULL,
    n            integer NOT NULL
);
CREATE INDEX figure_week_counts_idx ON figure_week_counts (protocol_id);

CREATE TABLE figure_stage_counts (
    protocol_id     integer NOT NULL,
    site_id         integer NOT NULL,
    sex             char(1) NOT NULL,
    age_band        text NOT NULL,
    stage           smallint NOT NULL,
    settled         boolean NOT NULL,
    uninterpretable boolean NOT NULL,
    n               integer NOT NULL
);

CREATE TABLE figure_time_counts (
    protocol_id integer NOT NULL,
    site_id     integer NOT NULL,
    sex         char(1) NOT NULL,
    age_band    text NOT NULL,
    event       boolean NOT NULL,
    closed      boolean NOT NULL,
    days        integer NOT NULL,
    flag_day    date,          -- open episodes only
    n           integer NOT NULL
);

CREATE TABLE figure_kappa_counts (
    protocol_id integer NOT NULL,
    site_id     integer NOT NULL,
    auto        text NOT NULL,
    rhythm      text NOT NULL,
    n           integer NOT NULL
);

-- Cases by state, whether someone has taken them on, and the hour (UTC) of
-- their deadline: the start page's counts and triage's groups.
CREATE TABLE case_counts (
    state    text NOT NULL,
    owned    boolean NOT NULL,
    due_hour timestamp,
    n        integer NOT NULL
);
CREATE INDEX case_counts_idx ON case_counts (state, due_hour);

-- Triage lists each group's first rows from an index: new flags nobody has
-- taken on by flag time, recordings waiting for an over-read by arrival.
CREATE INDEX cases_new_idx ON cases (flagged_at, id) WHERE state = 'open' AND owner_id IS NULL;
CREATE INDEX cases_waiting_idx ON cases (recording_back_at, id) WHERE state = 'recording_received';

-- The latest reading of each participant, for the list of participants gone
-- silent: read by enrolment day and silence, so the list costs what it shows.
CREATE TABLE participant_activity (
    participant_id bigint PRIMARY KEY REFERENCES participants(id) ON DELETE CASCADE,
    study_id       text NOT NULL,
    enrolled_on    date NOT NULL,
    withdrawn      boolean NOT NULL,
    last_ms        bigint
);
CREATE INDEX participant_activity_silence_idx ON participant_activity (enrolled_on, (coalesce(last_ms, 0)), study_id) WHERE NOT withdrawn;

-- Triggers: statement-level, over the rows the statement changed.

-- +goose StatementBegin
CREATE FUNCTION figures_mark_ins() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO figures_dirty (participant_id) SELECT DISTINCT participant_id FROM new_rows;
    RETURN NULL;
END;
$$;
CREATE FUNCTION figures_mark_del() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO figures_dirty (participant_id) SELECT DISTINCT participant_id FROM old_rows;
    RETURN NULL;
END;
$$;

-- +goose StatementEnd

-- An update marks the participants whose rows changed in a way the figures
-- see (both the old and the new participant when a row moves).
-- +goose StatementBegin
CREATE FUNCTION screen_results_mark_upd() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO figures_dirty (participant_id)
    SELECT DISTINCT n.participant_id FROM old_rows o JOIN new_rows n
      ON n.participant_id = o.participant_id AND n.protocol_id = o.protocol_id AND n.week = o.week
    WHERE n.verdict IS DISTINCT FROM o.verdict;
    RETURN NULL;
END;
$$;
CREATE FUNCTION cases_mark_upd() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO figures_dirty (participant_id)
    SELECT DISTINCT x.pid FROM old_rows o JOIN new_rows n ON n.id = o.id
    CROSS JOIN LATERAL (VALUES (o.participant_id), (n.participant_id)) x(pid)
    WHERE (o.participant_id, o.protocol_id, o.state, o.flagged_at, o.reached_at, o.closed_at)
          IS DISTINCT FROM (n.participant_id, n.protocol_id, n.state, n.flagged_at, n.reached_at, n.closed_at);
    INSERT INTO case_counts (state, owned, due_hour, n)
    SELECT state, owned, due_hour, sum(n) FROM (
      SELECT o.state, o.owner_id IS NOT NULL AS owned, date_trunc('hour', o.due_at AT TIME ZONE 'UTC') AS due_hour, -1 AS n
      FROM old_rows o JOIN new_rows n ON n.id = o.id
      WHERE (o.state, o.owner_id IS NOT NULL, o.due_at) IS DISTINCT FROM (n.state, n.owner_id IS NOT NULL, n.due_at)
      UNION ALL
      SELECT n.state, n.owner_id IS NOT NULL, date_trunc('hour', n.due_at AT TIME ZONE 'UTC'), 1
      FROM old_rows o JOIN new_rows n ON n.id = o.id
      WHERE (o.state, o.owner_id IS NOT NULL, o.due_at) IS DISTINCT FROM (n.state, n.owner_id IS NOT NULL, n.due_at)) d
    GROUP BY 1, 2, 3 HAVING sum(n) <> 0;
    RETURN NULL;
END;
$$;
CREATE FUNCTION cases_count_ins() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO figures_dirty (participant_id) SELECT DISTINCT participant_id FROM new_rows;
    INSERT INTO case_counts (state, owned, due_hour, n)
    SELECT state, owner_id IS NOT NULL, date_trunc('hour', due_at AT TIME ZONE 'UTC'), count(*) FROM new_rows GROUP BY 1, 2, 3;
    RETURN NULL;
END;
$$;
CREATE FUNCTION cases_count_del() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO figures_dirty (participant_id) SELECT DISTINCT participant_id FROM old_rows;
    INSERT INTO case_counts (state, owned, due_hour, n)
    SELECT state, owner_id IS NOT NULL, date_trunc('hour', due_at AT TIME ZONE 'UTC'), -count(*) FROM old_rows GROUP BY 1, 2, 3;
    RETURN NULL;
END;
$$;
CREATE FUNCTION recordings_mark_upd() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO figures_dirty (participant_id)
    SELECT DISTINCT x.pid FROM old_rows o JOIN new_rows n ON n.id = o.id
    CROSS JOIN LATERAL (VALUES (o.participant_id), (n.participant_id)) x(pid)
    WHERE (o.participant_id, o.case_id, o.auto_interpretation, o.too_short)
          IS DISTINCT FROM (n.participant_id, n.case_id, n.auto_interpretation, n.too_short);
    RETURN NULL;
END;
$$;
CREATE FUNCTION over_reads_mark_upd() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO figures_dirty (participant_id)
    SELECT DISTINCT x.pid FROM old_rows o JOIN new_rows n ON n.id = o.id
    CROSS JOIN LATERAL (VALUES (o.participant_id), (n.participant_id)) x(pid)
    WHERE (o.participant_id, o.recording_id, o.role, o.rhythm, o.read_on)
          IS DISTINCT FROM (n.participant_id, n.recording_id, n.role, n.rhythm, n.read_on);
    RETURN NULL;
END;
$$;
CREATE FUNCTION participants_count_ins() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO enrolment_counts (site_id, enrolled_on, withdrawn_on, n)
    SELECT site_id, enrolled_on, withdrawn_on, count(*) FROM new_rows GROUP BY 1, 2, 3;
    INSERT INTO participant_activity (participant_id, study_id, enrolled_on, withdrawn)
    SELECT id, study_id, enrolled_on, withdrawn_on IS NOT NULL FROM new_rows
    ON CONFLICT (participant_id) DO UPDATE SET study_id = excluded.study_id, enrolled_on = excluded.enrolled_on, withdrawn = excluded.withdrawn;
    RETURN NULL;
END;
$$;
CREATE FUNCTION participants_count_upd() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO enrolment_counts (site_id, enrolled_on, withdrawn_on, n)
    SELECT site_id, enrolled_on, withdrawn_on, sum(n) FROM (
      SELECT o.site_id, o.enrolled_on, o.withdrawn_on, -1 AS n FROM old_rows o JOIN new_rows n ON n.id = o.id
      WHERE (o.site_id, o.enrolled_on, o.withdrawn_on) IS DISTINCT FROM (n.site_id, n.enrolled_on, n.withdrawn_on)
      UNION ALL
      SELECT n.site_id, n.enrolled_on, n.withdrawn_on, 1 FROM old_rows o JOIN new_rows n ON n.id = o.id
      WHERE (o.site_id, o.enrolled_on, o.withdrawn_on) IS DISTINCT FROM (n.site_id, n.enrolled_on, n.withdrawn_on)) d
    GROUP BY 1, 2, 3 HAVING sum(n) <> 0;
    UPDATE participant_activity a SET study_id = n.study_id, enrolled_on = n.enrolled_on, withdrawn = n.withdrawn_on IS NOT NULL
    FROM new_rows n WHERE a.participant_id = n.id
      AND (a.study_id, a.enrolled_on, a.withdrawn) IS DISTINCT FROM (n.study_id, n.enrolled_on, n.withdrawn_on IS NOT NULL);
    INSERT INTO figures_dirty (participant_id)
    SELECT n.id FROM old_rows o JOIN new_rows n ON n.id = o.id
    WHERE (o.site_id, o.sex, o.age_at_enrolment, o.enrolled_on, o.withdrawn_on)
          IS DISTINCT FROM (n.site_id, n.sex, n.age_at_enrolment, n.enrolled_on, n.withdrawn_on);
    RETURN NULL;
END;
$$;
CREATE FUNCTION participants_count_del() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO enrolment_counts (site_id, enrolled_on, withdrawn_on, n)
    SELECT site_id, enrolled_on, withdrawn_on, -count(*) FROM old_rows GROUP BY 1, 2, 3;
    INSERT INTO figures_dirty (participant_id) SELECT id FROM old_rows;
    RETURN NULL;
END;
$$;
CREATE FUNCTION wear_weeks_activity() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    UPDATE participant_activity a SET last_ms = w.last_ms
    FROM (SELECT participant_id, max(last_ms) AS last_ms FROM new_rows GROUP BY 1) w
    WHERE a.participant_id = w.participant_id AND (a.last_ms IS NULL OR a.last_ms < w.last_ms);
    RETURN NULL;
END;
$$;
-- The study's time zone sets the day of every flag and close: a change
-- marks every participant with a case.
CREATE FUNCTION study_zone_mark() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF TG_OP = 'INSERT' OR NEW.time_zone IS DISTINCT FROM OLD.time_zone THEN
        INSERT INTO figures_dirty (participant_id) SELECT DISTINCT participant_id FROM cases;
    END IF;
    RETURN NULL;
END;
$$;

-- Ledgers of the per-participant figures: +1 per row inserted, -1 per row
-- deleted (the application replaces a participant's rows as a whole).
CREATE FUNCTION figure_standings_ledger() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF TG_OP = 'INSERT' THEN
        INSERT INTO figure_box_counts (protocol_id, site_id, enrolled_on, withdrawn, box, exit, n)
        SELECT protocol_id, site_id, enrolled_on, withdrawn_on IS NOT NULL, box, exit, count(*) FROM new_rows GROUP BY 1, 2, 3, 4, 5, 6;
        INSERT INTO figure_week_counts (protocol_id, enrolled_on, withdrawn_on, week, n)
        SELECT protocol_id, enrolled_on, withdrawn_on, w, count(*) FROM new_rows CROSS JOIN LATERAL unnest(sufficient_weeks) w GROUP BY 1, 2, 3, 4;
    ELSE
        INSERT INTO figure_box_counts (protocol_id, site_id, enrolled_on, withdrawn, box, exit, n)
        SELECT protocol_id, site_id, enrolled_on, withdrawn_on IS NOT NULL, box, exit, -count(*) FROM old_rows GROUP BY 1, 2, 3, 4, 5, 6;
        INSERT INTO figure_week_counts (protocol_id, enrolled_on, withdrawn_on, week, n)
        SELECT protocol_id, enrolled_on, withdrawn_on, w, -count(*) FROM old_rows CROSS JOIN LATERAL unnest(sufficient_weeks) w GROUP BY 1, 2, 3, 4;
    END IF;
    RETURN NULL;
END;
$$;
CREATE FUNCTION figure_episodes_ledger() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF TG_OP = 'INSERT' THEN
        INSERT INTO figure_stage_counts (protocol_id, site_id, sex, age_band, stage, settled, uninterpretable, n)
        SELECT protocol_id, site_id, sex, age_band, stage, settled, uninterpretable, count(*) FROM new_rows GROUP BY 1, 2, 3, 4, 5, 6, 7;
        INSERT INTO figure_time_counts (protocol_id, site_id, sex, age_band, event, closed, days, flag_day, n)
        SELECT protocol_id, site_id, sex, age_band, event, closed, days, CASE WHEN event OR closed THEN NULL ELSE flag_day END, count(*)
        FROM new_rows GROUP BY 1, 2, 3, 4, 5, 6, 7, 8;
    ELSE
        INSERT INTO figure_stage_counts (protocol_id, site_id, sex, age_band, stage, settled, uninterpretable, n)
        SELECT protocol_id, site_id, sex, age_band, stage, settled, uninterpretable, -count(*) FROM old_rows GROUP BY 1, 2, 3, 4, 5, 6, 7;
        INSERT INTO figure_time_counts (protocol_id, site_id, sex, age_band, event, closed, days, flag_day, n)
        SELECT protocol_id, site_id, sex, age_band, event, closed, days, CASE WHEN event OR closed THEN NULL ELSE flag_day END, -count(*)
        FROM old_rows GROUP BY 1, 2, 3, 4, 5, 6, 7, 8;
    END IF;
    RETURN NULL;
END;
$$;
CREATE FUNCTION figure_recordings_ledger() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF TG_OP = 'INSERT' THEN
        INSERT INTO figure_kappa_counts (protocol_id, site_id, auto, rhythm, n)
        SELECT protocol_id, site_id, auto, rhythm, count(*) FROM new_rows GROUP BY 1, 2, 3, 4;
    ELSE
        INSERT INTO figure_kappa_counts (protocol_id, site_id, auto, rhythm, n)
        SELECT protocol_id, site_id, auto, rhythm, -count(*) FROM old_rows GROUP BY 1, 2, 3, 4;
    END IF;
    RETURN NULL;
END;
$$;
CREATE FUNCTION figure_people_ledger() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF TG_OP = 'INSERT' THEN
        INSERT INTO figure_unread_counts (n) SELECT sum(unread_recordings) FROM new_rows HAVING count(*) > 0;
    ELSE
        INSERT INTO figure_unread_counts (n) SELECT -sum(unread_recordings) FROM old_rows HAVING count(*) > 0;
    END IF;
    RETURN NULL;
END;
$$;
-- +goose StatementEnd

CREATE TRIGGER screen_results_mark_ins AFTER INSERT ON screen_results REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION figures_mark_ins();
CREATE TRIGGER screen_results_mark_upd AFTER UPDATE ON screen_results REFERENCING OLD TABLE AS old_rows NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION screen_results_mark_upd();
CREATE TRIGGER screen_results_mark_del AFTER DELETE ON screen_results REFERENCING OLD TABLE AS old_rows FOR EACH STATEMENT EXECUTE FUNCTION figures_mark_del();

CREATE TRIGGER cases_count_ins AFTER INSERT ON cases REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION cases_count_ins();
CREATE TRIGGER cases_mark_upd AFTER UPDATE ON cases REFERENCING OLD TABLE AS old_rows NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION cases_mark_upd();
CREATE TRIGGER cases_count_del AFTER DELETE ON cases REFERENCING OLD TABLE AS old_rows FOR EACH STATEMENT EXECUTE FUNCTION cases_count_del();

CREATE TRIGGER recordings_mark_ins AFTER INSERT ON recordings REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION figures_mark_ins();
CREATE TRIGGER recordings_mark_upd AFTER UPDATE ON recordings REFERENCING OLD TABLE AS old_rows NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION recordings_mark_upd();
CREATE TRIGGER recordings_mark_del AFTER DELETE ON recordings REFERENCING OLD TABLE AS old_rows FOR EACH STATEMENT EXECUTE FUNCTION figures_mark_del();

CREATE TRIGGER over_reads_mark_ins AFTER INSERT ON over_reads REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION figures_mark_ins();
CREATE TRIGGER over_reads_mark_upd AFTER UPDATE ON over_reads REFERENCING OLD TABLE AS old_rows NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION over_reads_mark_upd();
CREATE TRIGGER over_reads_mark_del AFTER DELETE ON over_reads REFERENCING OLD TABLE AS old_rows FOR EACH STATEMENT EXECUTE FUNCTION figures_mark_del();

CREATE TRIGGER participants_count_ins AFTER INSERT ON participants REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION participants_count_ins();
CREATE TRIGGER participants_count_upd AFTER UPDATE ON participants REFERENCING OLD TABLE AS old_rows NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION participants_count_upd();
CREATE TRIGGER participants_count_del AFTER DELETE ON participants REFERENCING OLD TABLE AS old_rows FOR EACH STATEMENT EXECUTE FUNCTION participants_count_del();

CREATE TRIGGER wear_weeks_activity_ins AFTER INSERT ON wear_weeks REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION wear_weeks_activity();
CREATE TRIGGER wear_weeks_activity_upd AFTER UPDATE ON wear_weeks REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION wear_weeks_activity();

CREATE TRIGGER study_zone_mark AFTER INSERT OR UPDATE ON study FOR EACH ROW EXECUTE FUNCTION study_zone_mark();

CREATE TRIGGER figure_standings_ledger_ins AFTER INSERT ON figure_standings REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION figure_standings_ledger();
CREATE TRIGGER figure_standings_ledger_del AFTER DELETE ON figure_standings REFERENCING OLD TABLE AS old_rows FOR EACH STATEMENT EXECUTE FUNCTION figure_standings_ledger();
CREATE TRIGGER figure_episodes_ledger_ins AFTER INSERT ON figure_episodes REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION figure_episodes_ledger();
CREATE TRIGGER figure_episodes_ledger_del AFTER DELETE ON figure_episodes REFERENCING OLD TABLE AS old_rows FOR EACH STATEMENT EXECUTE FUNCTION figure_episodes_ledger();
CREATE TRIGGER figure_recordings_ledger_ins AFTER INSERT ON figure_recordings REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION figure_recordings_ledger();
CREATE TRIGGER figure_people_ledger_ins AFTER INSERT ON figure_people REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION figure_people_ledger();
CREATE TRIGGER figure_people_ledger_del AFTER DELETE ON figure_people REFERENCING OLD TABLE AS old_rows FOR EACH STATEMENT EXECUTE FUNCTION figure_people_ledger();
CREATE TRIGGER figure_recordings_ledger_del AFTER DELETE ON figure_recordings REFERENCING OLD TABLE AS old_rows FOR EACH STATEMENT EXECUTE FUNCTION figure_recordings_ledger();

-- The sums kept by triggers on the study's own tables start from what is
-- stored now; the per-participant figures are built by the application
-- (figures_state.built_at is NULL when there is anything to build).
INSERT INTO enrolment_counts (site_id, enrolled_on, withdrawn_on, n)
SELECT site_id, enrolled_on, withdrawn_on, count(*) FROM participants GROUP BY 1, 2, 3;
INSERT INTO participant_activity (participant_id, study_id, enrolled_on, withdrawn, last_ms)
SELECT p.id, p.study_id, p.enrolled_on, p.withdrawn_on IS NOT NULL, (SELECT max(w.last_ms) FROM wear_weeks w WHERE w.participant_id = p.id) FROM participants p;
INSERT INTO case_counts (state, owned, due_hour, n)
SELECT state, owner_id IS NOT NULL, date_trunc('hour', due_at AT TIME ZONE 'UTC'), count(*) FROM cases GROUP BY 1, 2, 3;
