package web

import (
	"context"
	"testing"
	"time"

	"cohortdesk/db/dbtest"
)

// TestSessionStoreWritesOncePerRefresh: a session whose data is unchanged is
// written again only when its expiry has moved on by the refresh interval
// (a thirtieth of the idle timeout), so page views do not each commit a
// write; changed data is written at once, and deletion forgets it.
func TestSessionStoreWritesOncePerRefresh(t *testing.T) {
	ctx := context.Background()
	pool := dbtest.Pool(t)
	st := newSessionStore(pool, 30*time.Minute) // refresh: 1 minute
	stored := func() (string, time.Time) {
		t.Helper()
		var data []byte
		var exp time.Time
		if err := pool.QueryRow(ctx, `SELECT data, expiry FROM sessions WHERE token = 'tok'`).Scan(&data, &exp); err != nil {
			t.Fatal(err)
		}
		return string(data), exp
	}
	t0 := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC).Add(24 * 365 * time.Hour * 2)
	if err := st.CommitCtx(ctx, "tok", []byte("signed in"), t0); err != nil {
		t.Fatal(err)
	}
	if _, exp := stored(); !exp.Equal(t0) {
		t.Fatalf("first write: expiry %v", exp)
	}
	// The expiry moves on by 59 s: not written.
	if err := st.CommitCtx(ctx, "tok", []byte("signed in"), t0.Add(59*time.Second)); err != nil {
		t.Fatal(err)
	}
	if _, exp := stored(); !exp.Equal(t0) {
		t.Errorf("a refresh within the minute was written: expiry %v", exp)
	}
	// By a minute: written.
	if err := st.CommitCtx(ctx, "tok", []byte("signed in"), t0.Add(time.Minute)); err != nil {
		t.Fatal(err)
	}
	if _, exp := stored(); !exp.Equal(t0.Add(time.Minute)) {
		t.Errorf("a refresh after a minute was not written: expiry %v", exp)
	}
	// Changed data: written at once.
	if err := st.CommitCtx(ctx, "tok", []byte("flash message"), t0.Add(time.Minute+time.Second)); err != nil {
		t.Fatal(err)
	}
	if data, _ := stored(); data != "flash message" {
		t.Errorf("changed data not written: %q", data)
	}
	b, found, err := st.FindCtx(ctx, "tok")
	if err != nil || !found || string(b) != "flash message" {
		t.Errorf("find: %q %v %v", b, found, err)
	}
	if err := st.DeleteCtx(ctx, "tok"); err != nil {
		t.Fatal(err)
	}
	if _, found, _ := st.FindCtx(ctx, "tok"); found {
		t.Error("a deleted session was found")
	}
	// After deletion the same data is written again (nothing remembered).
	if err := st.CommitCtx(ctx, "tok", []byte("flash message"), t0.Add(2*time.Minute)); err != nil {
		t.Fatal(err)
	}
	if _, found, _ := st.FindCtx(ctx, "tok"); !found {
		t.Error("a session written after its deletion is missing")
	}
}
