package outreach

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
)

// Folder writes messages to files instead of sending them: the demo's
// outbox, where an administrator can read what would have gone out. E-mails
// are written as RFC 5322 files (.eml) by the SMTP client's own message
// writer, text messages as plain text (.txt). A message tried again
// overwrites its own file: the name is its key.
type Folder struct {
	Dir  string
	Mail *SMTP // builds the e-mail as it would go on the wire; nil writes text messages only
}

// NewFolder creates the folder (mode 0700: the files hold PHI) and returns
// a transport writing e-mails (as from `from`) and text messages into it.
func NewFolder(dir, from string) (*Folder, error) {
	if err := os.MkdirAll(dir, 0o700); err != nil {
		return nil, fmt.Errorf("outreach: outbox folder: %w", err)
	}
	s, err := NewSMTP(SMTPConfig{Host: "localhost", Security: SecurityNone, From: from})
	if err != nil {
		return nil, err
	}
	return &Folder{Dir: dir, Mail: s}, nil
}

// Send writes m: an e-mail when it has a subject, else a text message.
func (f *Folder) Send(_ context.Context, m Outgoing) (Receipt, error) {
	if m.Subject != "" && f.Mail != nil {
		msg, err := f.Mail.Message(m)
		if err != nil {
			return Receipt{}, err
		}
		name := filepath.Join(f.Dir, m.Key+".eml")
		if err := msg.WriteToFile(name); err != nil {
			return Receipt{}, &Refusal{Detail: err.Error()}
		}
		_ = os.Chmod(name, 0o600)
		return Receipt{Detail: "written to " + name}, nil
	}
	name := filepath.Join(f.Dir, m.Key+".txt")
	body := "To: " + m.To + "\nKey: " + m.Key + "\n\n" + strings.TrimSpace(m.Body) + "\n"
	if err := os.WriteFile(name, []byte(body), 0o600); err != nil {
		return Receipt{}, &Refusal{Detail: err.Error()}
	}
	return Receipt{Detail: "written to " + name}, nil
}
