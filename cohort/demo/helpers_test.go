package demo

import (
	"sync"
	"testing"
)

// mustStudy generates a study or stops the test.
func mustStudy(tb testing.TB, cfg Config) *Study {
	tb.Helper()
	s, err := New(cfg)
	if err != nil {
		tb.Fatalf("New(%+v): %v", cfg, err)
	}
	return s
}

// defaultStudy is the default demo study, generated once for the tests that
// only read it.
var defaultStudy = sync.OnceValues(func() (*Study, error) { return New(Config{}) })

func mustDefault(tb testing.TB) *Study {
	tb.Helper()
	s, err := defaultStudy()
	if err != nil {
		tb.Fatalf("New(default): %v", err)
	}
	return s
}
