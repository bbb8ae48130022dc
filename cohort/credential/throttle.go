package credential

import "time"

// Throttle is the rule that slows down password guessing against one key (an
// account, a client address, a trusted device, a second-factor code). It
// follows the two texts most deployments use:
//
//   - NIST SP 800-63B, section 5.2.2 "Rate Limiting (Throttling)": the verifier
//     limits consecutive failed attempts on one account; it may slow them with
//     delays that grow with each failure, and should disregard earlier
//     failures once the subscriber authenticates (from memory).
//   - OWASP's Authentication Cheat Sheet, "Protect Against Automated
//     Attacks" / "Account Lockout": lock by account rather than only by
//     address, prefer a lockout that grows (exponential) over a fixed one,
//     and keep the lock from becoming a way to shut the real user out
//     (from memory).
//
// After Free consecutive failures, each further failure locks the key for
// First, then twice as long, up to Cap. An attempt made while the key is
// locked is refused without being tried and changes nothing but a counter,
// so an attacker cannot make the lock last longer by hammering it: the real
// user gets in at the latest Cap after the attacker's last counted guess. A
// key with no failure for Forget starts again from zero.
type Throttle struct {
	Free   int           // failures allowed without any delay
	First  time.Duration // the delay after failure Free
	Cap    time.Duration // the longest delay
	Forget time.Duration // failures older than this no longer count
}

// Account limits guesses at one account: 5 free, then 30 s doubling to 15
// minutes, so 100 guesses take more than 22 hours (NIST SP 800-63B asks
// for no more than 100 consecutive failures; this rate is our reading of
// "effectively limits", common practice).
var Account = Throttle{Free: 5, First: 30 * time.Second, Cap: 15 * time.Minute, Forget: 24 * time.Hour}

// Address limits guesses from one client address across accounts (password
// spraying): 30 free within an hour, then the same growing delay.
var Address = Throttle{Free: 30, First: 30 * time.Second, Cap: 15 * time.Minute, Forget: time.Hour}

// Code limits guesses at one account's second-factor codes (RFC 6238 section
// 5.2 asks the verifier to limit them; a 6-digit code has a million values).
var Code = Throttle{Free: 5, First: 30 * time.Second, Cap: 15 * time.Minute, Forget: 24 * time.Hour}

// Delay is how long the key stays locked after its failures-th consecutive
// failure.
func (t Throttle) Delay(failures int) time.Duration {
	if failures < t.Free {
		return 0
	}
	d := t.First
	for i := t.Free; i < failures && d < t.Cap; i++ {
		d *= 2
	}
	return min(d, t.Cap)
}

// ThrottleState is what is kept per key.
type ThrottleState struct {
	Failures    int
	LastFailure time.Time // zero when none
	LockedUntil time.Time // zero when never locked
}

// Admit decides an attempt at now. A locked key refuses it (ok false) and
// says until when, and the state does not change. Otherwise the attempt is
// counted as a failure at once, before the password is checked, so that
// parallel attempts cannot all pass the check before any of them is counted;
// Refund takes it back when it succeeds.
func (t Throttle) Admit(st ThrottleState, now time.Time) (next ThrottleState, ok bool) {
	if now.Before(st.LockedUntil) {
		return st, false
	}
	if !st.LastFailure.IsZero() && now.Sub(st.LastFailure) >= t.Forget {
		st.Failures = 0
	}
	st.Failures++
	st.LastFailure = now
	if d := t.Delay(st.Failures); d > 0 {
		st.LockedUntil = now.Add(d)
	}
	return st, true
}

// Refund takes back an admitted attempt that turned out not to be a failure
// (one that was never tried, or the right password on a shared key such as
// an address): one failure less, and no lock when the failures left allow
// none. A lock that earlier failures justify stays.
func (t Throttle) Refund(st ThrottleState) ThrottleState {
	if st.Failures > 0 {
		st.Failures--
	}
	if t.Delay(st.Failures) == 0 {
		st.LockedUntil = time.Time{}
	}
	return st
}
