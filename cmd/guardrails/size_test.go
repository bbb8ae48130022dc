package guardrails

import (
	"bytes"
	"fmt"
	"go/parser"
	"go/token"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// maxLines is the length above which a production file (Go or templ) must
// say at its top why it is not split: a line starting "Size:" in a comment
// before the package clause, followed by the reason.
const maxLines = 600

// sizeMarker starts the line that gives the reason.
const sizeMarker = "Size:"

// lineCount counts the lines of src, a last line without a newline included.
func lineCount(src []byte) int {
	n := bytes.Count(src, []byte{'\n'})
	if len(src) > 0 && src[len(src)-1] != '\n' {
		n++
	}
	return n
}

// sizeReason returns the reason given after sizeMarker in a comment above the
// package clause of a Go or templ file, and false when there is none (or it
// is empty).
func sizeReason(name string, src []byte) (string, bool, error) {
	if strings.HasSuffix(name, ".templ") {
		r, ok := templSizeReason(src)
		return r, ok, nil
	}
	f, err := parser.ParseFile(token.NewFileSet(), name, src, parser.PackageClauseOnly|parser.ParseComments)
	if err != nil {
		return "", false, err
	}
	for _, g := range f.Comments {
		if g.Pos() > f.Package {
			break
		}
		for _, line := range strings.Split(g.Text(), "\n") {
			if rest, ok := strings.CutPrefix(strings.TrimSpace(line), sizeMarker); ok {
				if r := strings.TrimSpace(rest); r != "" {
					return r, true, nil
				}
			}
		}
	}
	return "", false, nil
}

// templSizeReason reads the "// Size:" line of a templ file: templ files are
// not Go, so the lines above the package clause are read as they are.
func templSizeReason(src []byte) (string, bool) {
	for _, line := range strings.Split(string(src), "\n") {
		line = strings.TrimSpace(line)
		if strings.HasPrefix(line, "package ") {
			break
		}
		if rest, ok := strings.CutPrefix(line, "//"); ok {
			if r, ok := strings.CutPrefix(strings.TrimSpace(rest), sizeMarker); ok && strings.TrimSpace(r) != "" {
				return strings.TrimSpace(r), true
			}
		}
	}
	return "", false
}

// sizeProblem says what is wrong with a file's length, or "" when nothing is.
func sizeProblem(name string, src []byte) (string, error) {
	n := lineCount(src)
	if n <= maxLines {
		return "", nil
	}
	if _, ok, err := sizeReason(name, src); err != nil || ok {
		return "", err
	}
	return fmt.Sprintf("%s has %d lines (more than %d) and no reason at its top: split it by concern, or write a line "+
		"starting %q in the comment above the package clause saying why it stays whole", name, n, maxLines, "// "+sizeMarker), nil
}

// productionFile reports whether a path (slash-separated, relative to the
// module root) is a production Go or templ file: not a test, not generated
// templ output, not vendored assets or test data.
func productionFile(rel string) bool {
	goSource := strings.HasSuffix(rel, ".go") && !strings.HasSuffix(rel, "_test.go") && !strings.HasSuffix(rel, "_templ.go")
	if !goSource && !strings.HasSuffix(rel, ".templ") {
		return false
	}
	for _, part := range strings.Split(rel, "/") {
		if part == "testdata" || part == "vendor" || part == "node_modules" || strings.HasPrefix(part, ".") {
			return false
		}
	}
	return true
}

// TestProductionFileSize fails for every production Go or templ file over
// maxLines lines without a reason at its top.
func TestProductionFileSize(t *testing.T) {
	root := moduleRoot(t)
	checked, templs := 0, 0
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, path)
		rel = filepath.ToSlash(rel)
		if d.IsDir() {
			if rel != "." && (strings.HasPrefix(d.Name(), ".") || d.Name() == "testdata" || d.Name() == "node_modules" || rel == "assets/vendor") {
				return filepath.SkipDir
			}
			return nil
		}
		if !productionFile(rel) {
			return nil
		}
		src, err := os.ReadFile(path)
		if err != nil {
			return err
		}
		checked++
		if strings.HasSuffix(rel, ".templ") {
			templs++
		}
		msg, err := sizeProblem(rel, src)
		if err != nil {
			return err
		}
		if msg != "" {
			t.Error(msg)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if checked < 50 || templs < 10 {
		t.Fatalf("only %d production files (%d templ) found under %s; the walk is broken", checked, templs, root)
	}
}

// The checker itself, on planted files.
func TestSizeProblemCatchesPlantedFiles(t *testing.T) {
	body := func(n int) string { return strings.Repeat("var _ = 1\n", n) }
	tests := []struct {
		name    string
		src     string
		problem bool
	}{
		{"short file", "package p\n" + body(10), false},
		{"exactly the limit", "package p\n" + body(maxLines-1), false},
		{"one line over, no reason", "package p\n" + body(maxLines), true},
		{"over, without a final newline", "package p\n" + strings.TrimSuffix(body(maxLines), "\n"), true},
		{"over, reason in the package doc", "// Package p does things.\n//\n// Size: one state table that reads best whole.\npackage p\n" + body(maxLines), false},
		{"over, reason in a comment of its own above", "// Size: generated-looking table kept by hand.\n\n// Package p does things.\npackage p\n" + body(maxLines), false},
		{"over, reason in a block comment", "/*\nSize: the parser is one state machine.\n*/\npackage p\n" + body(maxLines), false},
		{"over, marker without a reason", "// Size:\npackage p\n" + body(maxLines), true},
		{"over, marker below the package clause", "package p\n\n// Size: too late to count.\n" + body(maxLines), true},
		{"over, marker not at the start of a line", "// This file's Size: is large.\npackage p\n" + body(maxLines), true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			msg, err := sizeProblem("p.go", []byte(tt.src))
			if err != nil {
				t.Fatal(err)
			}
			if (msg != "") != tt.problem {
				t.Errorf("problem %q, want a problem: %v", msg, tt.problem)
			}
		})
	}
	templBody := func(n int) string { return strings.Repeat("<p>x</p>\n", n) }
	for _, tt := range []struct {
		name    string
		src     string
		problem bool
	}{
		{"templ at the limit", "package views\n" + templBody(maxLines-1), false},
		{"templ over, no reason", "package views\n" + templBody(maxLines), true},
		{"templ over, reason above the package", "// Size: one form whose fields read best together.\npackage views\n" + templBody(maxLines), false},
		{"templ over, marker below the package", "package views\n// Size: too late.\n" + templBody(maxLines), true},
		{"templ over, marker without a reason", "// Size:\npackage views\n" + templBody(maxLines), true},
	} {
		t.Run(tt.name, func(t *testing.T) {
			msg, err := sizeProblem("p.templ", []byte(tt.src))
			if err != nil {
				t.Fatal(err)
			}
			if (msg != "") != tt.problem {
				t.Errorf("problem %q, want a problem: %v", msg, tt.problem)
			}
		})
	}
	for _, tt := range []struct {
		path string
		want bool
	}{
		{"db/cases.go", true},
		{"views/layout.templ", true},
		{"db/cases_test.go", false},
		{"views/layout_templ.go", false},
		{"assets/vendor/x/x.go", false},
		{"web/testdata/axe/x.go", false},
		{"README.md", false},
	} {
		if got := productionFile(tt.path); got != tt.want {
			t.Errorf("productionFile(%q) = %v, want %v", tt.path, got, tt.want)
		}
	}
}
