package credential

import (
	"bytes"
	"crypto/aes"
	"crypto/cipher"
	"crypto/hmac"
	"crypto/rand"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base32"
	"encoding/base64"
	"errors"
	"fmt"
	"image/png"
	"strings"
	"time"

	"github.com/pquerna/otp"
	"github.com/pquerna/otp/totp"
)

// The second factor is a time-based one-time password (RFC 6238) as the
// common authenticator apps make it: HMAC-SHA-1, 6 digits, a new code every
// 30 seconds (RFC 6238 section 4 and the defaults of the otpauth URI format,
// from memory). Codes are computed by github.com/pquerna/otp.
const (
	TOTPPeriod = 30
	TOTPDigits = 6
	// totpSkew accepts the code of the step before and after the current
	// one, for clocks a little apart and codes typed as they change (RFC 6238
	// section 5.2 recommends at most one step back).
	totpSkew = 1
)

var b32 = base32.StdEncoding.WithPadding(base32.NoPadding)

// NewTOTPSecret returns a fresh random secret of 20 bytes (160 bits, the
// length RFC 4226 section 4 recommends), base32 without padding as
// authenticator apps take it.
func NewTOTPSecret() string {
	b := make([]byte, 20)
	_, _ = rand.Read(b)
	return b32.EncodeToString(b)
}

// TOTPCodeAt is the code of secret (base32) at t with the given digits and
// hash, as RFC 6238 defines it.
func TOTPCodeAt(secret string, t time.Time, digits int, alg otp.Algorithm) (string, error) {
	return totp.GenerateCodeCustom(secret, t, totp.ValidateOpts{Period: TOTPPeriod, Digits: otp.Digits(digits), Algorithm: alg})
}

// TOTPCode is the application's code of secret at t.
func TOTPCode(secret string, t time.Time) (string, error) {
	return TOTPCodeAt(secret, t, TOTPDigits, otp.AlgorithmSHA1)
}

// TOTPMatch finds the time step whose code is code, among the step of now and
// its neighbours. The caller must accept each step at most once per account
// (RFC 6238 section 5.2: a code is good once), by keeping the last step used
// and accepting only later ones.
func TOTPMatch(secret, code string, now time.Time) (step int64, ok bool) {
	code = strings.ReplaceAll(strings.TrimSpace(code), " ", "")
	if len(code) != TOTPDigits {
		return 0, false
	}
	cur := now.Unix() / TOTPPeriod
	for d := int64(-totpSkew); d <= totpSkew; d++ {
		s := cur + d
		want, err := TOTPCode(secret, time.Unix(s*TOTPPeriod, 0))
		if err != nil {
			return 0, false
		}
		if subtle.ConstantTimeCompare([]byte(want), []byte(code)) == 1 {
			return s, true
		}
	}
	return 0, false
}

// TOTPURI is the otpauth URI an authenticator app reads from the QR code.
func TOTPURI(secret, issuer, account string) (string, error) {
	raw, err := b32.DecodeString(secret)
	if err != nil {
		return "", fmt.Errorf("credential: TOTP secret: %w", err)
	}
	key, err := totp.Generate(totp.GenerateOpts{Issuer: issuer, AccountName: account, Period: TOTPPeriod,
		Digits: otp.DigitsSix, Algorithm: otp.AlgorithmSHA1, Secret: raw})
	if err != nil {
		return "", fmt.Errorf("credential: TOTP URI: %w", err)
	}
	return key.URL(), nil
}

// TOTPQR draws the URI as a QR code, a PNG of size x size pixels.
func TOTPQR(uri string, size int) ([]byte, error) {
	key, err := otp.NewKeyFromURL(uri)
	if err != nil {
		return nil, fmt.Errorf("credential: TOTP QR: %w", err)
	}
	img, err := key.Image(size, size)
	if err != nil {
		return nil, fmt.Errorf("credential: TOTP QR: %w", err)
	}
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		return nil, fmt.Errorf("credential: TOTP QR: %w", err)
	}
	return buf.Bytes(), nil
}

// GroupSecret writes a base32 secret in groups of four for typing.
func GroupSecret(secret string) string {
	var parts []string
	for len(secret) > 4 {
		parts = append(parts, secret[:4])
		secret = secret[4:]
	}
	return strings.Join(append(parts, secret), " ")
}

// SealKey derives the key that seals second-factor secrets at rest from the
// deployment secret.
func SealKey(deploymentSecret []byte) []byte {
	m := hmac.New(sha256.New, deploymentSecret)
	m.Write([]byte("cohortdesk second-factor secrets v1"))
	return m.Sum(nil)
}

// Seal encrypts plaintext with AES-256-GCM under key (from SealKey), bound to
// context (the account id), so a sealed secret copied to another account does
// not open.
func Seal(key []byte, plaintext, context string) (string, error) {
	aead, err := gcm(key)
	if err != nil {
		return "", err
	}
	nonce := make([]byte, aead.NonceSize())
	_, _ = rand.Read(nonce)
	return base64.RawStdEncoding.EncodeToString(aead.Seal(nonce, nonce, []byte(plaintext), []byte(context))), nil
}

func gcm(key []byte) (cipher.AEAD, error) {
	block, err := aes.NewCipher(key)
	if err != nil {
		return nil, err
	}
	return cipher.NewGCM(block)
}

// ErrSealed means a sealed value does not open with this key and context.
var ErrSealed = errors.New("credential: sealed value does not open (another deployment secret?)")

// Open reverses Seal.
func Open(key []byte, sealed, context string) (string, error) {
	raw, err := base64.RawStdEncoding.DecodeString(sealed)
	if err != nil {
		return "", ErrSealed
	}
	aead, err := gcm(key)
	if err != nil {
		return "", err
	}
	if len(raw) < aead.NonceSize() {
		return "", ErrSealed
	}
	out, err := aead.Open(nil, raw[:aead.NonceSize()], raw[aead.NonceSize():], []byte(context))
	if err != nil {
		return "", ErrSealed
	}
	return string(out), nil
}

// Recovery codes stand in for the authenticator once each. A code is
// "XXXX-YYYYYYYYYYYY": the first part finds the stored row, the second (12
// letters of the password alphabet, about 69 bits) is kept only as an
// argon2id hash, as NIST SP 800-63B section 5.1.2.2 asks for look-up secrets
// of fewer than 112 bits (from memory), and guesses are throttled like
// passwords.
const RecoveryCodes = 10

// NewRecoveryCode returns a code and its two parts.
func NewRecoveryCode() (code, id, secret string) {
	id, secret = RandomPassword(4), RandomPassword(12)
	return id + "-" + secret, id, secret
}

// SplitRecoveryCode takes a typed code apart; ok is false when it does not
// have the shape of one.
func SplitRecoveryCode(code string) (id, secret string, ok bool) {
	code = strings.ReplaceAll(strings.TrimSpace(code), " ", "")
	id, secret, ok = strings.Cut(code, "-")
	if !ok || len(id) != 4 || len(secret) != 12 {
		return "", "", false
	}
	return id, secret, true
}
