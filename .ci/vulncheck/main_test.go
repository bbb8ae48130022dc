package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestBuildWritesTheV1Layout: the index files govulncheck's client looks for
// (golang.org/x/vuln internal/client: index/modules.json marks a v1
// database) and one file per entry.
func TestBuildWritesTheV1Layout(t *testing.T) {
	src, dst := t.TempDir(), t.TempDir()
	entry := `{"id":"GO-2099-0001","modified":"2099-01-02T00:00:00Z","aliases":["CVE-2099-1"],
		"affected":[{"package":{"name":"example.org/lib"},"ranges":[{"type":"SEMVER","events":[{"introduced":"0"},{"fixed":"1.2.3"},{"introduced":"1.3.0"},{"fixed":"1.10.0"}]}]}]}`
	if err := os.WriteFile(filepath.Join(src, "GO-2099-0001.json"), []byte(entry), 0o644); err != nil {
		t.Fatal(err)
	}
	n, mod, err := build(src, dst)
	if err != nil || n != 1 || mod.Year() != 2099 {
		t.Fatalf("build: %d %v %v", n, mod, err)
	}
	for _, f := range []string{"index/db.json", "index/modules.json", "index/vulns.json", "ID/GO-2099-0001.json"} {
		if _, err := os.Stat(filepath.Join(dst, f)); err != nil {
			t.Errorf("%s: %v", f, err)
		}
	}
	var mods []moduleMeta
	b, _ := os.ReadFile(filepath.Join(dst, "index/modules.json"))
	if err := json.Unmarshal(b, &mods); err != nil || len(mods) != 1 || mods[0].Path != "example.org/lib" || mods[0].Vulns[0].Fixed != "1.10.0" {
		t.Fatalf("modules index %s (%v)", b, err)
	}
}

// TestJudge: a reachable finding in a third-party module fails the run, one in
// the standard library is listed, an imported-only one is counted.
func TestJudge(t *testing.T) {
	stream := `{"config":{"protocol_version":"v1.0.0"}}
{"finding":{"osv":"GO-1","fixed_version":"v1.2.0","trace":[{"module":"example.org/lib","version":"v1.1.0","package":"example.org/lib/x","function":"Parse"}]}}
{"finding":{"osv":"GO-1","fixed_version":"v1.2.0","trace":[{"module":"example.org/lib","version":"v1.1.0","package":"example.org/lib/x","function":"Parse"},{"module":"cohortdesk","package":"cohortdesk/web","function":"f"}]}}
{"finding":{"osv":"GO-2","fixed_version":"v1.26.9","trace":[{"module":"stdlib","version":"v1.26.8","package":"net/http","function":"Get","receiver":"Header"}]}}
{"finding":{"osv":"GO-3","fixed_version":"v0.2.0","trace":[{"module":"example.org/other","version":"v0.1.0","package":"example.org/other"}]}}
`
	third, std, imported := judge(strings.NewReader(stream))
	if len(third) != 1 || !strings.HasPrefix(third[0], "GO-1") || len(std) != 1 || !strings.Contains(std[0], "net/http.Header.Get") || imported != 1 {
		t.Fatalf("third %v, std %v, imported %d", third, std, imported)
	}
}
