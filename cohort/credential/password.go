// Package credential holds the credential rules of cohortdesk: password hashing with
// argon2id and the password policy. Sessions, roles and throttling live in the
// web package and the store; this package is pure CPU work.
package credential

import (
	"crypto/rand"
	"crypto/subtle"
	"encoding/base64"
	"errors"
	"fmt"
	"strings"
	"unicode/utf8"

	"golang.org/x/crypto/argon2"
)

// Params are argon2id's cost parameters.
type Params struct {
	Memory  uint32 // KiB
	Time    uint32 // passes
	Threads uint8
	SaltLen int
	KeyLen  uint32
}

// DefaultParams follow RFC 9106 section 4's second recommended option (64 MiB,
// 3 passes) with 2 lanes for a 2-core server, a 16-byte random salt per user and
// a 32-byte key. About 0.1 s per hash on the reference machine.
var DefaultParams = Params{Memory: 64 * 1024, Time: 3, Threads: 2, SaltLen: 16, KeyLen: 32}

// TestParams are cheap parameters for tests only: the format and the check are
// the same, the cost is not.
var TestParams = Params{Memory: 1024, Time: 1, Threads: 1, SaltLen: 16, KeyLen: 32}

// MinPasswordLen is the shortest password accepted (NIST SP 800-63B asks for at
// least 8; we ask for 12 since staff handle health data).
const MinPasswordLen = 12

// CheckPolicy says what is wrong with a new password, or nil: too short, too
// long, or too easy to guess (see weakPassword). context is words the
// password must not be: the person's name and e-mail address.
func CheckPolicy(pw string, context ...string) error {
	if utf8.RuneCountInString(pw) < MinPasswordLen {
		return fmt.Errorf("use at least %d characters", MinPasswordLen)
	}
	if len(pw) > 512 {
		return errors.New("use at most 512 bytes")
	}
	var words []string
	for _, c := range context {
		words = append(words, c)
		if local, _, ok := strings.Cut(c, "@"); ok {
			words = append(words, local)
		}
		words = append(words, strings.Fields(c)...)
	}
	if why := weakPassword(pw, words); why != "" {
		return fmt.Errorf("choose another password: %s", why)
	}
	return nil
}

// Hash returns the PHC string of pw with a fresh random salt.
func Hash(pw string, p Params) (string, error) {
	salt := make([]byte, p.SaltLen)
	if _, err := rand.Read(salt); err != nil {
		return "", fmt.Errorf("auth: salt: %w", err)
	}
	key := argon2.IDKey([]byte(pw), salt, p.Time, p.Memory, p.Threads, p.KeyLen)
	b64 := base64.RawStdEncoding
	return fmt.Sprintf("$argon2id$v=%d$m=%d,t=%d,p=%d$%s$%s", argon2.Version, p.Memory, p.Time, p.Threads,
		b64.EncodeToString(salt), b64.EncodeToString(key)), nil
}

// ErrMalformedHash means a stored hash is not an argon2id PHC string.
var ErrMalformedHash = errors.New("auth: malformed password hash")

// Verify reports whether pw matches the PHC string, in constant time for a
// given hash. The parameters come from the string, so old hashes keep working
// after the defaults change.
func Verify(pw, phc string) (bool, error) {
	parts := strings.Split(phc, "$")
	if len(parts) != 6 || parts[1] != "argon2id" {
		return false, ErrMalformedHash
	}
	var version int
	if _, err := fmt.Sscanf(parts[2], "v=%d", &version); err != nil || version != argon2.Version {
		return false, ErrMalformedHash
	}
	var m, t uint32
	var p uint8
	if _, err := fmt.Sscanf(parts[3], "m=%d,t=%d,p=%d", &m, &t, &p); err != nil || m == 0 || t == 0 || p == 0 {
		return false, ErrMalformedHash
	}
	b64 := base64.RawStdEncoding
	salt, err := b64.DecodeString(parts[4])
	if err != nil {
		return false, ErrMalformedHash
	}
	want, err := b64.DecodeString(parts[5])
	if err != nil || len(want) == 0 {
		return false, ErrMalformedHash
	}
	got := argon2.IDKey([]byte(pw), salt, t, m, p, uint32(len(want)))
	return subtle.ConstantTimeCompare(got, want) == 1, nil
}

// passwordAlphabet is the alphabet of generated passwords: letters and digits
// without look-alike characters (no 0/O, 1/l/I, i, o).
const passwordAlphabet = "abcdefghjkmnpqrstuvwxyzABCDEFGHJKMNPQRSTUVWXYZ23456789"

// RandomPassword makes a password of n characters from an alphabet without
// look-alike characters, for first sign-ins and resets. Every character is
// equally likely: random bytes at or above the largest multiple of the
// alphabet's size (216 for 54 letters) are drawn again instead of being
// reduced modulo the size, which would make the first 40 letters a quarter
// more likely than the rest (rejection sampling, as crypto/rand.Int does).
func RandomPassword(n int) string {
	const size = len(passwordAlphabet)
	const limit = 256 - 256%size // bytes below this map evenly onto the alphabet
	b := make([]byte, 0, n)
	buf := make([]byte, n+n/4+8)
	for len(b) < n {
		_, _ = rand.Read(buf)
		for _, c := range buf {
			if int(c) >= limit {
				continue
			}
			b = append(b, passwordAlphabet[int(c)%size])
			if len(b) == n {
				break
			}
		}
	}
	return string(b)
}
