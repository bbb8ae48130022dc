package db

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"

	"github.com/jackc/pgx/v5"
)

// DefaultProtocolName is the name of the protocol created from the shipped,
// illustrative defaults.
const DefaultProtocolName = "standard"

// protocolLockKey serialises changes to the set of protocol versions (new
// versions, activation, the default at start-up) across app instances.
const protocolLockKey = 0x636f6870726f746f // "cohproto"

// ProtocolVersion is one stored, versioned screening protocol.
type ProtocolVersion struct {
	ID        int
	Name      string
	Version   int
	Params    screen.Protocol
	Note      string
	BasedOn   int // 0 when the version was not derived from another
	Active    bool
	Used      bool // results exist; the parameters can never change
	CreatedAt time.Time
	CreatedBy string
	// Results is the number of stored participant-week results.
	Results int64
}

// Label names the version on screen, e.g. "standard v2".
func (p ProtocolVersion) Label() string { return screen.VersionLabel(p.Name, p.Version) }

const protocolCols = `id, name, version, params, note, coalesce(based_on, 0), active, used, created_at, created_by`

func scanProtocol(row pgx.Row) (ProtocolVersion, error) {
	var p ProtocolVersion
	var params []byte
	if err := row.Scan(&p.ID, &p.Name, &p.Version, &params, &p.Note, &p.BasedOn, &p.Active, &p.Used, &p.CreatedAt, &p.CreatedBy); err != nil {
		return p, err
	}
	if err := json.Unmarshal(params, &p.Params); err != nil {
		return p, fmt.Errorf("protocol %d: stored parameters: %w", p.ID, err)
	}
	return p, nil
}

// EnsureDefaultProtocol makes sure the shipped protocol "standard" v1 exists
// and that some version is active, activating v1 only when none is. It runs at
// every start-up of every instance, so it is idempotent and serialised by an
// advisory lock; an administrator's choice of active version is never undone.
func (s *Store) EnsureDefaultProtocol(ctx context.Context) (ProtocolVersion, error) {
	var out ProtocolVersion
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `SELECT pg_advisory_xact_lock($1)`, int64(protocolLockKey)); err != nil {
			return err
		}
		params, err := json.Marshal(screen.DefaultProtocol())
		if err != nil {
			return err
		}
		var id int
		err = tx.QueryRow(ctx, `INSERT INTO protocols (name, version, params, note, created_by)
			VALUES ($1, 1, $2, $3, 'system') ON CONFLICT (name, version) DO NOTHING RETURNING id`,
			DefaultProtocolName, params, "Shipped defaults: illustrative, not clinically validated.").Scan(&id)
		switch {
		case errors.Is(err, pgx.ErrNoRows):
			// Already there.
		case err != nil:
			return err
		default:
			if err := audit(ctx, tx, cohort.System, "protocol.create", "protocol", strconv.Itoa(id), nil,
				map[string]any{"name": DefaultProtocolName, "version": 1, "params": json.RawMessage(params)}); err != nil {
				return err
			}
		}
		var active bool
		if err := tx.QueryRow(ctx, `SELECT EXISTS (SELECT 1 FROM protocols WHERE active)`).Scan(&active); err != nil {
			return err
		}
		if !active {
			if err := tx.QueryRow(ctx, `UPDATE protocols SET active = true WHERE name = $1 AND version = 1 RETURNING id`, DefaultProtocolName).Scan(&id); err != nil {
				return err
			}
			if err := audit(ctx, tx, cohort.System, "protocol.activate", "protocol", strconv.Itoa(id), nil, map[string]any{"active": true}); err != nil {
				return err
			}
		}
		out, err = scanProtocol(tx.QueryRow(ctx, `SELECT `+protocolCols+` FROM protocols WHERE active`))
		return err
	})
	return out, mapErr("ensure default protocol", err)
}

// Protocols lists every version, newest first within each name, with the
// number of results each produced (kept as results are written, migration
// 0092: the page never counts the results table).
func (s *Store) Protocols(ctx context.Context) ([]ProtocolVersion, error) {
	rows, err := s.reader(ctx).Query(ctx, `SELECT `+protocolCols+` FROM protocols ORDER BY name, version DESC`)
	if err != nil {
		return nil, mapErr("protocols", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (ProtocolVersion, error) { return scanProtocol(r) })
	if err != nil {
		return nil, mapErr("protocols", err)
	}
	counts, err := s.reader(ctx).Query(ctx, `SELECT protocol_id, sum(n)::bigint FROM protocol_result_counts GROUP BY protocol_id`)
	if err != nil {
		return nil, mapErr("protocol results", err)
	}
	n := map[int]int64{}
	for counts.Next() {
		var id int
		var c int64
		if err := counts.Scan(&id, &c); err != nil {
			counts.Close()
			return nil, mapErr("protocol results", err)
		}
		n[id] = c
	}
	if err := counts.Err(); err != nil {
		return nil, mapErr("protocol results", err)
	}
	for i := range out {
		out[i].Results = n[out[i].ID]
	}
	return out, nil
}

// Protocol returns one version; ErrNotFound when there is none.
func (s *Store) Protocol(ctx context.Context, id int) (ProtocolVersion, error) {
	p, err := scanProtocol(s.reader(ctx).QueryRow(ctx, `SELECT `+protocolCols+` FROM protocols WHERE id = $1`, id))
	if err != nil {
		return p, mapErr("protocol", err)
	}
	err = s.reader(ctx).QueryRow(ctx, `SELECT coalesce(sum(n), 0)::bigint FROM protocol_result_counts WHERE protocol_id = $1`, id).Scan(&p.Results)
	return p, mapErr("protocol", err)
}

// ActiveProtocol returns the active version; ErrNotFound when none is active
// (EnsureDefaultProtocol has not run).
func (s *Store) ActiveProtocol(ctx context.Context) (ProtocolVersion, error) {
	return remember(ctx, "active protocol", func() (ProtocolVersion, error) {
		p, err := scanProtocol(s.reader(ctx).QueryRow(ctx, `SELECT `+protocolCols+` FROM protocols WHERE active`))
		return p, mapErr("active protocol", err)
	})
}

// NewProtocolVersion is a request for a new version derived from an old one.
type NewProtocolVersion struct {
	BasedOn int // the version edited
	Params  screen.Protocol
	Note    string // what changed and why; required
}

// CreateProtocolVersion stores edited parameters as the next version of the
// base's name. The parameters are validated (messages keyed by JSON path, so a
// form can show each beside its field); a version identical to its base is
// refused, since it would be a second name for the same screen. The new version
// is not active until ActivateProtocol.
func (s *Store) CreateProtocolVersion(ctx context.Context, a cohort.Actor, in NewProtocolVersion) (ProtocolVersion, error) {
	var ve cohort.ValidationError
	if err := in.Params.Validate(); err != nil {
		var pe *cohort.ValidationError
		if !errors.As(err, &pe) {
			return ProtocolVersion{}, err
		}
		for k, v := range pe.Fields {
			ve.Add(k, v)
		}
	}
	in.Note = strings.TrimSpace(in.Note)
	if in.Note == "" || len(in.Note) > 1000 {
		ve.Add("note", "say in 1 to 1000 characters what this version changes and why")
	}
	base, err := s.Protocol(ctx, in.BasedOn)
	if err != nil {
		return ProtocolVersion{}, err
	}
	if len(base.Params.Diff(in.Params)) == 0 {
		ve.Add("form", "nothing differs from "+base.Label()+"; change at least one parameter")
	}
	if err := ve.Err(); err != nil {
		return ProtocolVersion{}, err
	}
	params, err := json.Marshal(in.Params)
	if err != nil {
		return ProtocolVersion{}, fmt.Errorf("db: protocol parameters: %w", err)
	}
	var out ProtocolVersion
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `SELECT pg_advisory_xact_lock($1)`, int64(protocolLockKey)); err != nil {
			return err
		}
		var id int
		if err := tx.QueryRow(ctx, `
			INSERT INTO protocols (name, version, params, note, based_on, created_by)
			SELECT $1, coalesce(max(version), 0) + 1, $2, $3, $4, $5 FROM protocols WHERE name = $1
			RETURNING id`, base.Name, params, in.Note, base.ID, a.Label()).Scan(&id); err != nil {
			return err
		}
		out, err = scanProtocol(tx.QueryRow(ctx, `SELECT `+protocolCols+` FROM protocols WHERE id = $1`, id))
		if err != nil {
			return err
		}
		return audit(ctx, tx, a, "protocol.create", "protocol", strconv.Itoa(id), nil, map[string]any{
			"name": out.Name, "version": out.Version, "based_on": base.ID, "note": in.Note,
			"changes": base.Params.Diff(in.Params), "params": json.RawMessage(params)})
	})
	return out, mapErr("create protocol version", err)
}

// ActivateProtocol makes one version the active one: the version new imports
// are screened with and whose results the participant pages and cases use.
// Activating the active version changes nothing.
func (s *Store) ActivateProtocol(ctx context.Context, a cohort.Actor, id int) (ProtocolVersion, error) {
	var out ProtocolVersion
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `SELECT pg_advisory_xact_lock($1)`, int64(protocolLockKey)); err != nil {
			return err
		}
		p, err := scanProtocol(tx.QueryRow(ctx, `SELECT `+protocolCols+` FROM protocols WHERE id = $1`, id))
		if err != nil {
			return err
		}
		if p.Active {
			out = p
			return nil
		}
		var prev *int
		if err := tx.QueryRow(ctx, `UPDATE protocols SET active = false WHERE active RETURNING id`).Scan(&prev); err != nil && !errors.Is(err, pgx.ErrNoRows) {
			return err
		}
		if _, err := tx.Exec(ctx, `UPDATE protocols SET active = true WHERE id = $1`, id); err != nil {
			return err
		}
		p.Active = true
		out = p
		return audit(ctx, tx, a, "protocol.activate", "protocol", strconv.Itoa(id),
			map[string]any{"active_protocol_id": prev}, map[string]any{"active_protocol_id": id, "label": p.Label()})
	})
	return out, mapErr("activate protocol", err)
}

// markProtocolUsed records inside tx that results now exist for the version,
// freezing its parameters (the database trigger enforces it from then on).
func markProtocolUsed(ctx context.Context, tx pgx.Tx, id int) error {
	tag, err := tx.Exec(ctx, `UPDATE protocols SET used = true WHERE id = $1 AND NOT used`, id)
	if err != nil {
		return err
	}
	if tag.RowsAffected() == 1 {
		return audit(ctx, tx, cohort.System, "protocol.used", "protocol", strconv.Itoa(id), map[string]any{"used": false}, map[string]any{"used": true})
	}
	return nil
}
