package outreach_test

import (
	"context"
	"io"
	"net/mail"
	"os"
	"path/filepath"
	"strings"
	"testing"

	sender "cohortdesk/web/outreach"
)

// The demo's outbox folder holds what would have gone out: an e-mail as an
// RFC 5322 file a mail program opens (its Message-ID from the message's
// key), a text message as plain text, both readable by the server's user
// only (they hold PHI), and a message tried again overwrites its own file.
func TestFolderWritesWhatWouldGoOut(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "outbox")
	f, err := sender.NewFolder(dir, "Study team <team@example.org>")
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	mailOut := sender.Outgoing{Key: "0b6e2f4c-1d2a-4c5e-9f10-7a8b9c0d1e2f", To: "wren.p1@example.org",
		Subject: "A message from your study team", Body: "Please contact the study team: call 555-0100 on working days."}
	for range 2 { // the second try overwrites the first
		if _, err := f.Send(ctx, mailOut); err != nil {
			t.Fatal(err)
		}
	}
	textOut := sender.Outgoing{Key: "5c4d3e2f-0a1b-4c2d-8e3f-9a0b1c2d3e4f", To: "555-0101", Body: "Please contact the study team."}
	if _, err := f.Send(ctx, textOut); err != nil {
		t.Fatal(err)
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(entries) != 2 {
		t.Fatalf("%d files in the outbox, want 2 (one per message)", len(entries))
	}
	if st, _ := os.Stat(dir); st.Mode().Perm() != 0o700 {
		t.Errorf("outbox folder mode %v, want 0700", st.Mode().Perm())
	}
	eml := filepath.Join(dir, mailOut.Key+".eml")
	raw, err := os.Open(eml)
	if err != nil {
		t.Fatal(err)
	}
	defer raw.Close()
	msg, err := mail.ReadMessage(raw)
	if err != nil {
		t.Fatalf("the .eml file is not an RFC 5322 message: %v", err)
	}
	body, _ := io.ReadAll(msg.Body)
	h := msg.Header
	if h.Get("To") != "<wren.p1@example.org>" && h.Get("To") != "wren.p1@example.org" {
		t.Errorf("To %q", h.Get("To"))
	}
	if h.Get("Subject") != mailOut.Subject || !strings.Contains(h.Get("From"), "team@example.org") {
		t.Errorf("Subject %q, From %q", h.Get("Subject"), h.Get("From"))
	}
	if want := "<" + mailOut.Key + "@example.org>"; h.Get("Message-Id") != want {
		t.Errorf("Message-ID %q, want %q (from the message's key)", h.Get("Message-Id"), want)
	}
	if !strings.Contains(string(body), "call 555-0100 on working days") {
		t.Errorf("body %q", body)
	}
	for _, name := range []string{eml, filepath.Join(dir, textOut.Key+".txt")} {
		st, err := os.Stat(name)
		if err != nil {
			t.Fatal(err)
		}
		if st.Mode().Perm() != 0o600 {
			t.Errorf("%s: mode %v, want 0600", name, st.Mode().Perm())
		}
	}
	txt, err := os.ReadFile(filepath.Join(dir, textOut.Key+".txt"))
	if err != nil {
		t.Fatal(err)
	}
	if want := "To: 555-0101\nKey: " + textOut.Key + "\n\nPlease contact the study team.\n"; string(txt) != want {
		t.Errorf("text message file %q, want %q", txt, want)
	}
}
