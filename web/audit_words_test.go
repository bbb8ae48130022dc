package web

import (
	"testing"

	"cohortdesk/db"
)

// Audit events written before the threshold sweep had its one name
// (migration 0010) keep their stored keys; the audit page words them as the
// sweep they were.
func TestAuditWordsForEventsFromBeforeTheSweepsName(t *testing.T) {
	for _, action := range []string{"exploration.start", "sweep.start"} {
		if got, want := auditActionLabel(action), "started a threshold sweep"; got != want {
			t.Errorf("auditActionLabel(%q) = %q, want %q", action, got, want)
		}
	}
	for _, kind := range []string{"exploration", "sweep"} {
		if got, want := auditObjectLabel(db.AuditEvent{ObjectType: kind, ObjectID: "7"}), "sweep 7"; got != want {
			t.Errorf("auditObjectLabel(%s 7) = %q, want %q", kind, got, want)
		}
	}
	// An action nobody has worded reads as its key with spaces.
	if got, want := auditActionLabel("thing.did_it"), "thing did it"; got != want {
		t.Errorf("auditActionLabel(thing.did_it) = %q, want %q", got, want)
	}
}
