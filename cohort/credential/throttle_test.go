package credential

import (
	"testing"
	"time"
)

func TestThrottleDelayGrowsToItsCap(t *testing.T) {
	want := map[int]time.Duration{0: 0, 4: 0, 5: 30 * time.Second, 6: time.Minute, 7: 2 * time.Minute, 8: 4 * time.Minute,
		9: 8 * time.Minute, 10: 15 * time.Minute, 11: 15 * time.Minute, 100: 15 * time.Minute}
	for f, d := range want {
		if got := Account.Delay(f); got != d {
			t.Errorf("Account.Delay(%d) = %v, want %v", f, got, d)
		}
	}
	// 100 guesses at one account take more than 22 hours: the 95 after the
	// free ones wait 30 s + 1 + 2 + 4 + 8 minutes, then 15 minutes each.
	var total time.Duration
	for f := 1; f < 100; f++ {
		total += Account.Delay(f)
	}
	if total < 22*time.Hour {
		t.Errorf("100 guesses take %v", total)
	}
}

// TestThrottleRefusedAttemptsDoNotExtendTheLock: hammering a locked key
// changes nothing; the first attempt after the lock is admitted.
func TestThrottleRefusedAttemptsDoNotExtendTheLock(t *testing.T) {
	now := time.Date(2026, 3, 2, 9, 0, 0, 0, time.UTC)
	var st ThrottleState
	for i := 0; i < 5; i++ {
		var ok bool
		st, ok = Account.Admit(st, now)
		if !ok {
			t.Fatalf("attempt %d refused", i+1)
		}
	}
	locked := st.LockedUntil
	if locked != now.Add(30*time.Second) {
		t.Fatalf("locked until %v", locked)
	}
	for s := 0; s < 30; s++ {
		next, ok := Account.Admit(st, now.Add(time.Duration(s)*time.Second))
		if ok || next != st {
			t.Fatalf("attempt at +%ds while locked: admitted %v, state %+v", s, ok, next)
		}
	}
	if _, ok := Account.Admit(st, now.Add(30*time.Second)); !ok {
		t.Fatal("refused once the delay has passed")
	}
	// A refund takes back one failure; the lock goes once the failures left
	// allow none.
	admitted, _ := Account.Admit(st, now.Add(30*time.Second))
	if r := Account.Refund(admitted); r.Failures != 5 || r.LockedUntil.IsZero() {
		t.Errorf("refund: %+v", r)
	}
	var fresh ThrottleState
	fresh, _ = Account.Admit(fresh, now)
	if r := Account.Refund(fresh); r.Failures != 0 || !r.LockedUntil.IsZero() {
		t.Errorf("refund of the first attempt: %+v", r)
	}
	// A day without failures starts again from zero.
	again, ok := Account.Admit(st, now.Add(25*time.Hour))
	if !ok || again.Failures != 1 || again.LockedUntil.After(now.Add(25*time.Hour)) {
		t.Errorf("after a day: %+v", again)
	}
}
