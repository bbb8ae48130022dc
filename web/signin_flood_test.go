package web

import (
	"context"
	"net/http"
	"runtime"
	rtmetrics "runtime/metrics"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"cohortdesk/cohort/credential"
)

// TestSignInFloodKeepsMemoryBounded (issue 14, finding 3): 40 sign-ins at
// once, each costing a 16 MiB argon2id hash, with two hashing slots. The Go
// heap's peak growth, sampled with runtime/metrics while the flood runs, stays
// within a dozen hashes' memory (without the bound all 40 hashes run at once:
// 640 MiB); the requests that find the slots and the short queue full are
// told 503 with Retry-After, and none fails otherwise.
func TestSignInFloodKeepsMemoryBounded(t *testing.T) {
	const mib = 1 << 20
	cost := credential.Params{Memory: 16 * 1024, Time: 2, Threads: 1, SaltLen: 16, KeyLen: 32}
	a, _ := newAppWith(t, Config{Password: cost, HashConcurrency: 2})
	a.srv.dummyHash() // the unknown-account hash is made once, before the flood

	sample := []rtmetrics.Sample{{Name: "/memory/classes/heap/objects:bytes"}}
	read := func() uint64 { rtmetrics.Read(sample); return sample[0].Value.Uint64() }
	runtime.GC()
	base := read()
	var peak atomic.Uint64
	stop := make(chan struct{})
	sampled := make(chan struct{})
	go func() {
		defer close(sampled)
		for {
			if v := read(); v > peak.Load() {
				peak.Store(v)
			}
			select {
			case <-stop:
				return
			case <-time.After(500 * time.Microsecond):
			}
		}
	}()

	const n = 40
	res := make([]*http.Response, n)
	var wg sync.WaitGroup
	start := make(chan struct{})
	for i := range n {
		wg.Add(1)
		go func() {
			defer wg.Done()
			<-start
			// Forty accounts from forty addresses: no throttle stops them first.
			res[i] = a.signInFrom(a.client(), "198.51.100."+itoa(int64(i+1)), "flood"+itoa(int64(i))+"@example.org", "a guess")
		}()
	}
	close(start)
	wg.Wait()
	close(stop)
	<-sampled

	count := map[int]int{}
	for _, r := range res {
		count[r.StatusCode]++
		if r.StatusCode == http.StatusServiceUnavailable && r.Header.Get("Retry-After") == "" {
			t.Error("a busy answer without Retry-After")
		}
	}
	if count[http.StatusUnauthorized]+count[http.StatusServiceUnavailable] != n {
		t.Errorf("answers %v: want only 401 (tried) and 503 (busy, retry)", count)
	}
	if count[http.StatusServiceUnavailable] == 0 {
		t.Errorf("answers %v: the flood never found the gate full", count)
	}
	growth := int64(peak.Load()) - int64(base)
	t.Logf("answers %v; heap peak %d MiB above the %d MiB before the flood", count, growth/mib, base/mib)
	if limit := int64(12 * 16 * mib); growth > limit {
		t.Errorf("heap grew by %d MiB during the flood, over %d MiB: hashes are not bounded", growth/mib, limit/mib)
	}
	// Refused-as-busy attempts were not tried, so they do not count.
	var audited int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE action = 'signin.failed'`).Scan(&audited)
	if audited != count[http.StatusUnauthorized] {
		t.Errorf("audited failures %d, tried %d", audited, count[http.StatusUnauthorized])
	}
}
