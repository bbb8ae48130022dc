package db_test

import (
	"context"
	"errors"
	"fmt"
	"io"
	"syscall"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/db"

	"github.com/jackc/pgx/v5/pgconn"
)

// TestUnavailable sorts errors into "the database cannot serve now" (503) and
// the rest. SQLSTATE codes from PostgreSQL 15's errcodes.txt, the source of
// its documentation's Appendix A (verified, read in
// /usr/share/postgresql/15/errcodes.txt): 25006 read_only_sql_transaction, 53100 disk_full, 53200
// out_of_memory, class 08 connection exceptions, 57P01 admin_shutdown, 57P03
// cannot_connect_now; 23505 unique_violation and 22P02
// invalid_text_representation are request faults.
func TestUnavailable(t *testing.T) {
	pg := func(code string) error { return fmt.Errorf("db: op: %w", &pgconn.PgError{Code: code}) }
	for _, c := range []struct {
		name string
		err  error
		want bool
	}{
		{"nil", nil, false},
		{"sentinel", fmt.Errorf("x: %w", db.ErrUnavailable), true},
		{"read-only", pg("25006"), true},
		{"disk full", pg("53100"), true},
		{"out of memory", pg("53200"), true},
		{"connection failure", pg("08006"), true},
		{"admin shutdown", pg("57P01"), true},
		{"starting up", pg("57P03"), true},
		{"unique violation", pg("23505"), false},
		{"bad input", pg("22P02"), false},
		{"connection refused", fmt.Errorf("dial: %w", syscall.ECONNREFUSED), true},
		{"connection lost", fmt.Errorf("receive: %w", io.ErrUnexpectedEOF), true},
		{"client gone", context.Canceled, false},
		{"deadline", fmt.Errorf("query: %w", context.DeadlineExceeded), false},
		{"not found", cohort.ErrNotFound, false},
		{"other", errors.New("something else"), false},
	} {
		if got := db.Unavailable(c.err); got != c.want {
			t.Errorf("%s: Unavailable(%v) = %v, want %v", c.name, c.err, got, c.want)
		}
	}
}
