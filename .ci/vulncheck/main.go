// Command vulncheck runs govulncheck offline, as .ci/run does: it builds a
// vulnerability database in the v1 layout govulncheck reads
// (https://go.dev/security/vuln/database#api: index/db.json,
// index/modules.json, index/vulns.json, ID/<id>.json) from the OSV entries of
// the golang.org/x/vulndb module (its data/osv folder, as the Go module proxy
// serves it), runs govulncheck against it, and judges the findings:
// vulnerabilities whose vulnerable code this program calls in a third-party
// module fail the run; those in the standard library are listed (they are
// fixed by the Go toolchain the binary is built with: README, "Production").
//
//	go run ./.ci/vulncheck -vulndb "$(go mod download -json golang.org/x/vulndb@VERSION | ...Dir)" -govulncheck golang.org/x/vuln/cmd/govulncheck@v1.9.0
package main

import (
	"bufio"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"time"
)

type osvEntry struct {
	ID       string    `json:"id"`
	Modified time.Time `json:"modified"`
	Aliases  []string  `json:"aliases"`
	Summary  string    `json:"summary"`
	Affected []struct {
		Package struct {
			Name string `json:"name"`
		} `json:"package"`
		Ranges []struct {
			Type   string `json:"type"`
			Events []struct {
				Introduced string `json:"introduced"`
				Fixed      string `json:"fixed"`
			} `json:"events"`
		} `json:"ranges"`
	} `json:"affected"`
}

type moduleVuln struct {
	ID       string    `json:"id"`
	Modified time.Time `json:"modified"`
	Fixed    string    `json:"fixed,omitempty"`
}

type moduleMeta struct {
	Path  string       `json:"path"`
	Vulns []moduleVuln `json:"vulns"`
}

type vulnMeta struct {
	ID       string    `json:"id"`
	Modified time.Time `json:"modified"`
	Aliases  []string  `json:"aliases,omitempty"`
}

func main() {
	src := flag.String("vulndb", "", "folder of the golang.org/x/vulndb module")
	tool := flag.String("govulncheck", "golang.org/x/vuln/cmd/govulncheck@v1.9.0", "govulncheck to run with go run")
	out := flag.String("out", "", "folder for the built database (default: a temporary one)")
	flag.Parse()
	if *src == "" {
		fail("give -vulndb, the folder of the golang.org/x/vulndb module")
	}
	dir := *out
	if dir == "" {
		d, err := os.MkdirTemp("", "vulndb-")
		if err != nil {
			fail(err.Error())
		}
		defer os.RemoveAll(d)
		dir = d
	}
	n, modified, err := build(filepath.Join(*src, "data", "osv"), dir)
	if err != nil {
		fail(err.Error())
	}
	if modified.IsZero() {
		fmt.Printf("vulnerability database: %d entries (undated in the module)\n", n)
	} else {
		fmt.Printf("vulnerability database: %d entries, last modified %s\n", n, modified.Format("2006-01-02"))
	}
	pkgs := flag.Args()
	if len(pkgs) == 0 {
		pkgs = []string{"./..."}
	}
	args := append([]string{"run", *tool, "-db", "file://" + dir, "-format", "json"}, pkgs...)
	cmd := exec.Command("go", args...)
	cmd.Stderr = os.Stderr
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		fail(err.Error())
	}
	if err := cmd.Start(); err != nil {
		fail(err.Error())
	}
	third, std, imported := judge(stdout)
	if err := cmd.Wait(); err != nil {
		if ee, ok := err.(*exec.ExitError); !ok || ee.ExitCode() != 3 { // 3: vulnerabilities found
			fail("govulncheck: " + err.Error())
		}
	}
	fmt.Printf("reachable in the standard library (fixed by a newer Go toolchain): %d\n", len(std))
	for _, l := range std {
		fmt.Println("  " + l)
	}
	fmt.Printf("in imported third-party code but not called: %d\n", imported)
	fmt.Printf("reachable in third-party modules: %d\n", len(third))
	for _, l := range third {
		fmt.Println("  " + l)
	}
	if len(third) > 0 {
		os.Exit(1)
	}
}

func fail(msg string) {
	fmt.Fprintln(os.Stderr, "vulncheck:", msg)
	os.Exit(2)
}

// build writes the v1 database of the OSV files in osvDir into dir.
func build(osvDir, dir string) (int, time.Time, error) {
	files, err := filepath.Glob(filepath.Join(osvDir, "*.json"))
	if err != nil || len(files) == 0 {
		return 0, time.Time{}, fmt.Errorf("no OSV entries in %s (%v)", osvDir, err)
	}
	for _, d := range []string{"ID", "index"} {
		if err := os.MkdirAll(filepath.Join(dir, d), 0o755); err != nil {
			return 0, time.Time{}, err
		}
	}
	modules := map[string]*moduleMeta{}
	var vulns []vulnMeta
	var latest time.Time
	for _, f := range files {
		raw, err := os.ReadFile(f)
		if err != nil {
			return 0, time.Time{}, err
		}
		var e osvEntry
		if err := json.Unmarshal(raw, &e); err != nil {
			return 0, time.Time{}, fmt.Errorf("%s: %w", f, err)
		}
		if e.ID == "" {
			return 0, time.Time{}, fmt.Errorf("%s: no id", f)
		}
		if err := os.WriteFile(filepath.Join(dir, "ID", e.ID+".json"), raw, 0o644); err != nil {
			return 0, time.Time{}, err
		}
		if e.Modified.After(latest) {
			latest = e.Modified
		}
		vulns = append(vulns, vulnMeta{ID: e.ID, Modified: e.Modified, Aliases: e.Aliases})
		for _, a := range e.Affected {
			m := modules[a.Package.Name]
			if m == nil {
				m = &moduleMeta{Path: a.Package.Name}
				modules[a.Package.Name] = m
			}
			fixed := ""
			for _, r := range a.Ranges {
				for _, ev := range r.Events {
					if ev.Fixed != "" && semverLess(fixed, ev.Fixed) {
						fixed = ev.Fixed
					}
				}
			}
			m.Vulns = append(m.Vulns, moduleVuln{ID: e.ID, Modified: e.Modified, Fixed: fixed})
		}
	}
	mods := make([]*moduleMeta, 0, len(modules))
	for _, m := range modules {
		sort.Slice(m.Vulns, func(i, j int) bool { return m.Vulns[i].ID < m.Vulns[j].ID })
		mods = append(mods, m)
	}
	sort.Slice(mods, func(i, j int) bool { return mods[i].Path < mods[j].Path })
	sort.Slice(vulns, func(i, j int) bool { return vulns[i].ID < vulns[j].ID })
	for name, v := range map[string]any{"db": map[string]time.Time{"modified": latest}, "modules": mods, "vulns": vulns} {
		b, err := json.Marshal(v)
		if err != nil {
			return 0, time.Time{}, err
		}
		if err := os.WriteFile(filepath.Join(dir, "index", name+".json"), b, 0o644); err != nil {
			return 0, time.Time{}, err
		}
	}
	return len(files), latest, nil
}

// semverLess compares two versions without the leading v ("" is lowest).
func semverLess(a, b string) bool {
	if a == "" {
		return b != ""
	}
	pa, pb := strings.SplitN(a, "-", 2), strings.SplitN(b, "-", 2)
	na, nb := strings.Split(pa[0], "."), strings.Split(pb[0], ".")
	for i := 0; i < 3; i++ {
		var x, y int
		if i < len(na) {
			fmt.Sscan(na[i], &x)
		}
		if i < len(nb) {
			fmt.Sscan(nb[i], &y)
		}
		if x != y {
			return x < y
		}
	}
	return len(pa) > len(pb) // a pre-release is lower than its release
}

// judge reads govulncheck's JSON stream: reachable findings (their trace
// ends in a function) by module, and how many were only imported.
func judge(r io.Reader) (third, std []string, imported int) {
	type frame struct {
		Module   string `json:"module"`
		Version  string `json:"version"`
		Package  string `json:"package"`
		Function string `json:"function"`
		Receiver string `json:"receiver"`
	}
	type finding struct {
		OSV          string  `json:"osv"`
		FixedVersion string  `json:"fixed_version"`
		Trace        []frame `json:"trace"`
	}
	seen := map[string]bool{}
	importedSeen := map[string]bool{}
	dec := json.NewDecoder(bufio.NewReader(r))
	for {
		var msg struct {
			Finding *finding `json:"finding"`
		}
		if err := dec.Decode(&msg); err == io.EOF {
			break
		} else if err != nil {
			fail("reading govulncheck's output: " + err.Error())
		}
		f := msg.Finding
		if f == nil || len(f.Trace) == 0 {
			continue
		}
		top := f.Trace[0]
		if top.Function == "" {
			if top.Package != "" && top.Module != "stdlib" && !importedSeen[f.OSV] {
				importedSeen[f.OSV] = true
				imported++
			}
			continue
		}
		if seen[f.OSV] {
			continue
		}
		seen[f.OSV] = true
		fn := top.Function
		if top.Receiver != "" {
			fn = top.Receiver + "." + fn
		}
		line := fmt.Sprintf("%s  %s@%s %s.%s (fixed in %s)", f.OSV, top.Module, top.Version, top.Package, fn, f.FixedVersion)
		if top.Module == "stdlib" || top.Module == "toolchain" {
			std = append(std, line)
		} else {
			third = append(third, line)
		}
	}
	sort.Strings(third)
	sort.Strings(std)
	return third, std, imported
}
