package main

import (
	"os"
	"path/filepath"
	"testing"
)

func TestDemoSecret(t *testing.T) {
	dir := t.TempDir()
	first, err := demoSecret(dir)
	if err != nil || len(first) < 32 {
		t.Fatalf("first secret %q, %v", first, err)
	}
	again, err := demoSecret(dir)
	if err != nil || again != first {
		t.Fatalf("second call gave %q, %v; want the stored secret", again, err)
	}
	path := filepath.Join(dir, demoSecretFile)
	if err := os.Chmod(path, 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := demoSecret(dir); err != nil {
		t.Fatal(err)
	}
	if st, _ := os.Stat(path); st.Mode().Perm() != 0o600 {
		t.Errorf("a readable secret file was left at mode %v", st.Mode().Perm())
	}
	other := t.TempDir()
	if err := os.WriteFile(filepath.Join(other, demoSecretFile), []byte("short\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := demoSecret(other); err == nil {
		t.Error("a short secret file was accepted")
	}
}
