package migrations_test

import (
	"context"
	"testing"

	"cohortdesk/db"
	"cohortdesk/db/dbtest"
	"cohortdesk/migrations"
)

func TestMain(m *testing.M) { dbtest.Main(m) }

// TestUpOnEmptyDatabase applies every migration to a database with no schema,
// then again to show a second run changes nothing.
func TestUpOnEmptyDatabase(t *testing.T) {
	ctx := context.Background()
	pool, err := db.Open(ctx, dbtest.Empty(t), 2)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	n, err := migrations.Up(ctx, pool)
	if err != nil {
		t.Fatalf("Up: %v", err)
	}
	list, err := migrations.List(ctx, pool)
	if err != nil {
		t.Fatal(err)
	}
	if n != len(list) || n == 0 {
		t.Fatalf("applied %d migrations, know %d", n, len(list))
	}
	for _, s := range list {
		if !s.Applied {
			t.Errorf("migration %d %s not applied", s.Version, s.Name)
		}
	}
	again, err := migrations.Up(ctx, pool)
	if err != nil || again != 0 {
		t.Fatalf("second Up applied %d (err %v), want 0", again, err)
	}
}
