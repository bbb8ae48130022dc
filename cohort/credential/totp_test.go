package credential

import (
	"encoding/base32"
	"testing"
	"time"

	"github.com/pquerna/otp"
)

// TestTOTPAgainstRFC6238 (issue 14, finding 7): the codes of RFC 6238
// appendix B (verified against the RFC's table: the 8-digit TOTP values for
// its three test seeds, the ASCII strings "1234567890" repeated to 20, 32 and
// 64 bytes, at six times).
func TestTOTPAgainstRFC6238(t *testing.T) {
	seed := func(n int) string {
		b := make([]byte, n)
		for i := range b {
			b[i] = "1234567890"[i%10]
		}
		return base32.StdEncoding.EncodeToString(b)
	}
	sha1, sha256, sha512 := seed(20), seed(32), seed(64)
	vectors := []struct {
		unix             int64
		sha1, s256, s512 string
	}{
		{59, "94287082", "46119246", "90693936"},
		{1111111109, "07081804", "68084774", "25091201"},
		{1111111111, "14050471", "67062674", "99943326"},
		{1234567890, "89005924", "91819424", "93441116"},
		{2000000000, "69279037", "90698825", "38618901"},
		{20000000000, "65353130", "77737706", "47863826"},
	}
	for _, v := range vectors {
		at := time.Unix(v.unix, 0).UTC()
		for _, c := range []struct {
			secret string
			alg    otp.Algorithm
			want   string
		}{{sha1, otp.AlgorithmSHA1, v.sha1}, {sha256, otp.AlgorithmSHA256, v.s256}, {sha512, otp.AlgorithmSHA512, v.s512}} {
			got, err := TOTPCodeAt(c.secret, at, 8, c.alg)
			if err != nil || got != c.want {
				t.Errorf("T=%d %v: %q, %v; want %q", v.unix, c.alg, got, err, c.want)
			}
		}
		// The application's 6-digit SHA-1 code is the same value modulo 10^6:
		// the last six digits (RFC 4226 section 5.3).
		got, err := TOTPCode(sha1, at)
		if err != nil || got != v.sha1[2:] {
			t.Errorf("T=%d six digits: %q, want %q", v.unix, got, v.sha1[2:])
		}
		// TOTPMatch finds the step, and its neighbours' codes only.
		if step, ok := TOTPMatch(sha1, v.sha1[2:], at.Add(30*time.Second)); !ok || step != v.unix/30 {
			t.Errorf("T=%d: match %d %v", v.unix, step, ok)
		}
		if _, ok := TOTPMatch(sha1, v.sha1[2:], at.Add(3*time.Minute)); ok {
			t.Errorf("T=%d: a code three minutes old matches", v.unix)
		}
	}
}

func TestSealOpens(t *testing.T) {
	key := SealKey([]byte("a deployment secret of thirty-two characters"))
	s, err := Seal(key, "JBSWY3DPEHPK3PXP", "user:7")
	if err != nil {
		t.Fatal(err)
	}
	if got, err := Open(key, s, "user:7"); err != nil || got != "JBSWY3DPEHPK3PXP" {
		t.Fatalf("open: %q %v", got, err)
	}
	if _, err := Open(key, s, "user:8"); err == nil {
		t.Error("opened for another account")
	}
	if _, err := Open(SealKey([]byte("another secret")), s, "user:7"); err == nil {
		t.Error("opened with another key")
	}
}

func TestRecoveryCodeShape(t *testing.T) {
	code, id, secret := NewRecoveryCode()
	gid, gsecret, ok := SplitRecoveryCode(" " + code + " ")
	if !ok || gid != id || gsecret != secret || len(code) != 17 {
		t.Fatalf("code %q split %q %q %v", code, gid, gsecret, ok)
	}
	if _, _, ok := SplitRecoveryCode("123456"); ok {
		t.Error("a TOTP code taken for a recovery code")
	}
}
