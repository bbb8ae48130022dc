package guardrails

import (
	"bytes"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"cohortdesk/cohort/demo"
)

// namecheckPath finds the project's name checker: in CI and in the shared
// workspace the repository sits beside a "shared" folder, so the tool is
// ../shared/tools/namecheck from the module root (the folder with go.mod).
func namecheckPath(t *testing.T) string {
	t.Helper()
	dir, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			break
		}
		up := filepath.Dir(dir)
		if up == dir {
			t.Fatal("no go.mod above the test's folder")
		}
		dir = up
	}
	tool := filepath.Join(dir, "..", "shared", "tools", "namecheck")
	if _, err := os.Stat(tool); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("the name checker is missing: want it at %s (the repository beside ../shared), %v", tool, err)
		}
		t.Skipf("the name checker is not at %s; under CI=true this fails", tool)
	}
	return tool
}

// demoNames lists every name the demo generator makes: the study, its sites
// and towns, staff (names, logins, e-mail local parts), office closures, and
// for every participant of the default demo the names, e-mail local part,
// street, town, watch model and withdrawal reason; then every name the
// syllable tables can form at all (each given name with each family name, as
// a full name and as an e-mail local part, and every street), so a seed that
// draws another combination cannot bring a listed name in either.
func demoNames(t *testing.T) []string {
	t.Helper()
	s, err := demo.New(demo.Config{})
	if err != nil {
		t.Fatal(err)
	}
	local := func(email string) string { l, _, _ := strings.Cut(email, "@"); return l }
	out := []string{s.Name, s.Code}
	for _, st := range s.Sites {
		out = append(out, st.Code, st.Name, st.Town)
	}
	for _, u := range s.Users {
		out = append(out, u.Name, u.Login, local(u.Email))
	}
	for _, c := range s.Closures {
		out = append(out, c.Name)
	}
	for _, w := range demo.Watches {
		out = append(out, w.Name, w.Prefix)
	}
	for _, p := range s.Participants {
		out = append(out, p.GivenName+" "+p.FamilyName, local(p.Email), p.Street, p.City, p.Watch, p.WithdrawalReason)
	}
	n := demo.Names
	for _, gs := range n.GivenStarts {
		for _, ge := range n.GivenEnds {
			for _, fs := range n.FamilyStems {
				for _, fe := range n.FamilyEnds {
					out = append(out, gs+ge+" "+fs+fe, strings.ToLower(gs+ge+"."+fs+fe))
				}
			}
		}
	}
	for _, ss := range n.StreetStems {
		for _, se := range n.StreetEnds {
			for _, sk := range n.StreetKinds {
				out = append(out, ss+se+" "+sk)
			}
		}
	}
	out = append(out, demo.TrackingNumber(1))
	return out
}

// TestDemoNamesAreNotOnTheList runs every generated name through the
// project's name checker (it reads standard input and exits 1 on a hit) and
// fails with the names it finds.
func TestDemoNamesAreNotOnTheList(t *testing.T) {
	tool := namecheckPath(t)
	names := demoNames(t)
	if len(names) < 100000 {
		t.Fatalf("only %d names collected; the tables should form over 100,000", len(names))
	}
	var outb, errb bytes.Buffer
	cmd := exec.Command(tool, "-")
	cmd.Stdin = strings.NewReader(strings.Join(names, "\n") + "\n")
	cmd.Stdout, cmd.Stderr = &outb, &errb
	err := cmd.Run()
	var exit *exec.ExitError
	switch {
	case err == nil:
	case errors.As(err, &exit) && exit.ExitCode() == 1:
		hits := strings.Split(strings.TrimSpace(outb.String()), "\n")
		if len(hits) > 20 {
			hits = append(hits[:20], "...")
		}
		t.Errorf("generated demo names are on the list of names to avoid (line numbers count the names given, from 1):\n%s", strings.Join(hits, "\n"))
	default:
		t.Fatalf("run %s: %v\n%s", tool, err, errb.String())
	}
}
