package main

import (
	"bytes"
	"crypto/rand"
	"encoding/base64"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
)

// demoSecretFile is where the demo keeps its deployment secret, inside its
// data folder, so referral codes stay the same from one demo run to the next.
const demoSecretFile = "referral-secret"

// demoSecret returns the demo's deployment secret, creating a random one
// (32 bytes, base64) readable by its owner only on first use. A file that
// others may read is tightened to 0600; a short one is refused rather than
// replaced, since replacing it would change every referral code.
func demoSecret(dir string) (string, error) {
	path := filepath.Join(dir, demoSecretFile)
	b, err := os.ReadFile(path)
	switch {
	case err == nil:
		s := string(bytes.TrimSpace(b))
		if len(s) < 32 {
			return "", fmt.Errorf("demo: secret file %s holds %d characters, want at least 32; delete it to make a new one (referral codes will change)", path, len(s))
		}
		if st, err := os.Stat(path); err == nil && st.Mode().Perm()&0o077 != 0 {
			if err := os.Chmod(path, 0o600); err != nil {
				return "", fmt.Errorf("demo: secret file %s: %w", path, err)
			}
		}
		return s, nil
	case !errors.Is(err, fs.ErrNotExist):
		return "", fmt.Errorf("demo: secret file: %w", err)
	}
	raw := make([]byte, 32)
	if _, err := rand.Read(raw); err != nil {
		return "", fmt.Errorf("demo: secret: %w", err)
	}
	s := base64.RawURLEncoding.EncodeToString(raw)
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o600)
	if err != nil {
		return "", fmt.Errorf("demo: secret file: %w", err)
	}
	if _, err := f.WriteString(s + "\n"); err != nil {
		f.Close()
		return "", fmt.Errorf("demo: secret file %s: %w", path, err)
	}
	if err := f.Close(); err != nil {
		return "", fmt.Errorf("demo: secret file %s: %w", path, err)
	}
	return s, nil
}
