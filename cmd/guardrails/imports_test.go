// Package guardrails holds tests that keep the layout honest: which package
// may depend on which (imports_test.go), how long a production file may
// grow without a written reason (size_test.go), and that no name the demo
// generator makes is on the project's list of names to avoid
// (demonames_test.go). It has no code of its own;
// `go test ./...` runs it with everything else. DEVELOPERS.md describes both
// rules.
package guardrails

import (
	"bytes"
	"encoding/json"
	"errors"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// module is the module path of this repository (go.mod).
const module = "cohortdesk"

// importRule forbids the packages at or below under to depend, directly or
// through other packages, on anything at or below one of forbidden.
type importRule struct {
	under     string
	forbidden []string
}

// importRules are the directions of dependency the design fixes: storage and
// domain code know nothing of HTTP or markup, and the domain is pure (no
// database driver, router, templates, HTTP, SQL interface or processes).
var importRules = []importRule{
	{module + "/db", []string{module + "/web", module + "/views", module + "/cmd"}},
	{module + "/cohort", []string{module + "/web", module + "/views", module + "/db", module + "/cmd",
		"github.com/jackc/pgx", "github.com/go-chi/chi", "github.com/a-h/templ",
		"net/http", "database/sql", "os/exec"}},
}

// goPackage is one package of `go list -deps -json`: its path and the
// packages its production (non-test) files import.
type goPackage struct {
	ImportPath string
	Imports    []string
}

// within reports whether path is p or lies below it ("net/http/httptest" is
// within "net/http"; "cohortdesk/webhooks" is not within "cohortdesk/web").
func within(path, p string) bool {
	return path == p || strings.HasPrefix(path, p+"/")
}

// importViolations checks every rule against the import graph and returns
// one message per package and forbidden dependency, naming the shortest
// chain of imports that leads there. The result is sorted.
func importViolations(pkgs []goPackage, rules []importRule) []string {
	imports := make(map[string][]string, len(pkgs))
	for _, p := range pkgs {
		imports[p.ImportPath] = p.Imports
	}
	var out []string
	for _, p := range pkgs {
		for _, r := range rules {
			if !within(p.ImportPath, r.under) {
				continue
			}
			// Breadth first, so the chain reported is a shortest one.
			prev := map[string]string{p.ImportPath: ""}
			queue := []string{p.ImportPath}
			found := map[string]bool{}
			for len(queue) > 0 {
				cur := queue[0]
				queue = queue[1:]
				for _, next := range imports[cur] {
					if _, seen := prev[next]; seen {
						continue
					}
					prev[next] = cur
					if i := slices.IndexFunc(r.forbidden, func(f string) bool { return within(next, f) }); i >= 0 {
						if !found[r.forbidden[i]] {
							found[r.forbidden[i]] = true
							chain := []string{next}
							for at := cur; at != ""; at = prev[at] {
								chain = append(chain, at)
							}
							slices.Reverse(chain)
							out = append(out, p.ImportPath+" must not depend on "+r.forbidden[i]+": "+strings.Join(chain, " -> "))
						}
						continue // the chain stops at the first forbidden package
					}
					queue = append(queue, next)
				}
			}
		}
	}
	slices.Sort(out)
	return out
}

// moduleRoot is the folder holding go.mod, found upwards from the test's.
func moduleRoot(t *testing.T) string {
	t.Helper()
	dir, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			return dir
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			t.Fatal("no go.mod above the test's folder")
		}
		dir = parent
	}
}

// listPackages runs `go list -deps -json` over the module: every package of
// the module and everything they import, with their production imports.
func listPackages(t *testing.T, root string) []goPackage {
	t.Helper()
	goTool, err := exec.LookPath("go")
	if err != nil {
		t.Fatalf("the go command is needed to list the import graph: %v", err)
	}
	cmd := exec.Command(goTool, "list", "-deps", "-json=ImportPath,Imports", "./...")
	cmd.Dir = root
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, stderr.String())
	}
	var pkgs []goPackage
	dec := json.NewDecoder(bytes.NewReader(out))
	for {
		var p goPackage
		if err := dec.Decode(&p); errors.Is(err, io.EOF) {
			break
		} else if err != nil {
			t.Fatalf("go list output: %v", err)
		}
		pkgs = append(pkgs, p)
	}
	return pkgs
}

// TestImportDirection fails when a package under db/ or cohort/ depends on
// web/ or views/, or a package under cohort/ on a database driver, router,
// templates, HTTP, database/sql or os/exec (see importRules).
func TestImportDirection(t *testing.T) {
	pkgs := listPackages(t, moduleRoot(t))
	// The graph must be the real one, not an empty list that passes.
	byPath := map[string]goPackage{}
	for _, p := range pkgs {
		byPath[p.ImportPath] = p
	}
	for _, want := range []struct{ pkg, imports string }{
		{module + "/db", module + "/cohort"},
		{module + "/web", module + "/db"},
		{module + "/cohort/screen", module + "/cohort"},
	} {
		if !slices.Contains(byPath[want.pkg].Imports, want.imports) {
			t.Fatalf("the listed graph lacks %s -> %s; go list gave %d packages", want.pkg, want.imports, len(pkgs))
		}
	}
	for _, v := range importViolations(pkgs, importRules) {
		t.Error(v)
	}
}

// The checker itself, on synthetic graphs: each planted import must be
// caught, with its chain, and allowed directions must pass.
func TestImportViolationsCatchPlantedImports(t *testing.T) {
	base := []goPackage{
		{module + "/cohort", nil},
		{module + "/cohort/screen", []string{module + "/cohort", "math"}},
		{module + "/db", []string{module + "/cohort", "github.com/jackc/pgx/v5"}},
		{module + "/views", []string{"github.com/a-h/templ"}},
		{module + "/web", []string{module + "/db", module + "/views", "net/http", "github.com/go-chi/chi/v5"}},
		{module + "/cmd/cohortdesk", []string{module + "/web", "os/exec"}},
		{"github.com/jackc/pgx/v5", []string{"net"}},
		{"github.com/go-chi/chi/v5", []string{"net/http"}},
		{"github.com/a-h/templ", []string{"io"}},
		{"net/http", []string{"net"}},
		{"net/http/httptest", []string{"net/http"}},
		{module + "/cohortx", []string{"net/http"}},             // not under cohort/
		{module + "/webhooks", nil},                             // not within web/
		{module + "/db/tidy", []string{module + "/webhooks"}},   // allowed: webhooks is not web
		{module + "/cohort/deid/deidtest", []string{"strings"}}, // a test helper package is checked too
	}
	with := func(extra ...goPackage) []goPackage {
		out := slices.Clone(base)
		for _, e := range extra {
			if i := slices.IndexFunc(out, func(p goPackage) bool { return p.ImportPath == e.ImportPath }); i >= 0 {
				out[i] = e
			} else {
				out = append(out, e)
			}
		}
		return out
	}
	tests := []struct {
		name  string
		pkgs  []goPackage
		wants []string // each must appear in one message, in order of the sorted messages
	}{
		{"the allowed layout", base, nil},
		{"cohort imports net/http", with(goPackage{module + "/cohort/screen", []string{module + "/cohort", "net/http"}}),
			[]string{"cohortdesk/cohort/screen must not depend on net/http: cohortdesk/cohort/screen -> net/http"}},
		{"cohort imports a net/http subpackage", with(goPackage{module + "/cohort/rr", []string{"net/http/httptest"}}),
			[]string{"cohortdesk/cohort/rr must not depend on net/http: cohortdesk/cohort/rr -> net/http/httptest"}},
		{"cohort reaches pgx through db", with(goPackage{module + "/cohort/screen", []string{module + "/db"}}),
			[]string{
				"cohortdesk/cohort/screen must not depend on cohortdesk/db: cohortdesk/cohort/screen -> cohortdesk/db",
			}},
		{"cohort reaches pgx through a helper", with(goPackage{module + "/cohort/screen", []string{module + "/cohort/store"}},
			goPackage{module + "/cohort/store", []string{"github.com/jackc/pgx/v5/pgconn"}}),
			[]string{
				"cohortdesk/cohort/screen must not depend on github.com/jackc/pgx: cohortdesk/cohort/screen -> cohortdesk/cohort/store -> github.com/jackc/pgx/v5/pgconn",
				"cohortdesk/cohort/store must not depend on github.com/jackc/pgx: cohortdesk/cohort/store -> github.com/jackc/pgx/v5/pgconn",
			}},
		{"cohort imports templ, chi, database/sql, os/exec", with(goPackage{module + "/cohort/demo",
			[]string{"github.com/a-h/templ", "github.com/go-chi/chi/v5", "database/sql", "os/exec"}}),
			[]string{"must not depend on database/sql", "must not depend on github.com/a-h/templ",
				"must not depend on github.com/go-chi/chi", "must not depend on os/exec"}},
		{"db imports views", with(goPackage{module + "/db/seed", []string{module + "/db", module + "/views/referralpdf"}}),
			[]string{"cohortdesk/db/seed must not depend on cohortdesk/views: cohortdesk/db/seed -> cohortdesk/views/referralpdf"}},
		{"db reaches web through the entry layer", with(goPackage{module + "/db", []string{module + "/cohort", module + "/cmd/cohortdesk"}}),
			// The first forbidden step is reported; web and views behind it go
			// once it is fixed.
			[]string{"cohortdesk/db must not depend on cohortdesk/cmd: cohortdesk/db -> cohortdesk/cmd/cohortdesk"}},
		{"db reaches web through a helper", with(goPackage{module + "/db", []string{module + "/cohort", module + "/db/render"}},
			goPackage{module + "/db/render", []string{module + "/web"}}),
			[]string{
				"cohortdesk/db must not depend on cohortdesk/web: cohortdesk/db -> cohortdesk/db/render -> cohortdesk/web",
				"cohortdesk/db/render must not depend on cohortdesk/web: cohortdesk/db/render -> cohortdesk/web",
			}},
		{"a test helper package under cohort imports HTTP", with(goPackage{module + "/cohort/deid/deidtest", []string{"net/http"}}),
			[]string{"cohortdesk/cohort/deid/deidtest must not depend on net/http"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := importViolations(tt.pkgs, importRules)
			if len(got) != len(tt.wants) {
				t.Fatalf("%d violations, want %d:\n%s", len(got), len(tt.wants), strings.Join(got, "\n"))
			}
			for i, w := range tt.wants {
				if !strings.Contains(got[i], w) {
					t.Errorf("violation %d:\n got %s\nwant it to contain %s", i, got[i], w)
				}
			}
		})
	}
}
