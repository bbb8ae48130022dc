package deid

import (
	"fmt"
	"strings"
	"testing"
)

var testSecret = []byte("0123456789abcdef")

// Known answers computed independently with Python's standard hmac and
// hashlib modules and a separate implementation of the truncation and check
// character (computed). They pin the algorithm: a change here changes every
// code already printed on referral letters.
func TestCodeKnownAnswers(t *testing.T) {
	tests := []struct {
		secret  string
		studyID string
		want    string
	}{
		{"0123456789abcdef", "CD-0001", "XQ39-JGN6-HFQ"},
		{"0123456789abcdef", "CD-0002", "WPB2-B5L7-SZG"},
		{"another secret, 32 bytes long!!!", "CD-0001", "WJ3U-2H43-265"},
	}
	for _, tt := range tests {
		if got := Code([]byte(tt.secret), tt.studyID); got != tt.want {
			t.Errorf("Code(%q, %q) = %q, want %q", tt.secret, tt.studyID, got, tt.want)
		}
	}
}

// The Luhn mod N worked example in base 6 with alphabet "abcdef": input
// "abcdef" has check character "e" (from memory, the usual worked example of
// the mod N generalisation; worked by hand: 5*2 -> 1+4, 4, 3*2 -> 1+0, 2,
// 1*2 -> 2, 0 gives 14, and (6 - 14 mod 6) mod 6 = 4, "e").
func TestCheckDigitBaseSix(t *testing.T) {
	if got := checkDigit([]int{0, 1, 2, 3, 4, 5}, 6); got != 4 {
		t.Errorf("check digit of abcdef in base 6 = %d, want 4 (e)", got)
	}
}

func TestCodeStableAndKeyed(t *testing.T) {
	other := []byte("a different deployment secret")
	seen := map[string]string{}
	for i := range 1000 {
		id := fmt.Sprintf("CD-%04d", i)
		a, b := Code(testSecret, id), Code(testSecret, id)
		if a != b {
			t.Fatalf("Code not stable for %s: %s, %s", id, a, b)
		}
		if c := Code(other, id); c == a {
			t.Errorf("same code %s under two secrets for %s", a, id)
		}
		if prev, dup := seen[a]; dup {
			t.Errorf("codes collide: %s and %s -> %s", prev, id, a)
		}
		seen[a] = id
		if len(a) != CodeLen+2 || a[4] != '-' || a[9] != '-' {
			t.Errorf("format of %q, want XXXX-XXXX-XXX", a)
		}
		if !ValidCode(a) {
			t.Errorf("generated code %q does not validate", a)
		}
	}
}

// Every single-character substitution in 1,000 codes is caught (11
// positions x 31 other characters each): the doubling step of the mod N
// scheme is a permutation, so any one change shifts the sum mod 32.
func TestCheckCatchesEverySubstitution(t *testing.T) {
	for i := range 1000 {
		raw, err := NormalizeCode(Code(testSecret, fmt.Sprintf("P%d", i)))
		if err != nil {
			t.Fatal(err)
		}
		for pos := range CodeLen {
			for _, c := range []byte(codeAlphabet) {
				if c == raw[pos] {
					continue
				}
				bad := raw[:pos] + string(c) + raw[pos+1:]
				if ValidCode(bad) {
					t.Fatalf("substitution %q -> %q at %d not caught", raw, bad, pos)
				}
			}
		}
	}
}

// Adjacent transpositions are caught except swapping "2" and "Z" (values 0
// and 31): for mod 32 the doubled-minus-plain difference is d for d < 16 and
// d + 1 for d >= 16, equal only for 0 and 31. We check over every pair of
// alphabet characters at every adjacent position (also the check character)
// that exactly that pair escapes.
func TestCheckTranspositions(t *testing.T) {
	base, err := NormalizeCode(Code(testSecret, "CD-0042"))
	if err != nil {
		t.Fatal(err)
	}
	for pos := range CodeLen - 1 {
		for _, a := range []byte(codeAlphabet) {
			for _, b := range []byte(codeAlphabet) {
				if a == b {
					continue
				}
				// Build a valid code with a, b at pos, pos+1 by fixing the
				// check character (or, at the last pair, a data character).
				s := []byte(base)
				s[pos], s[pos+1] = a, b
				if !fixCheck(s, pos) {
					continue
				}
				swapped := append([]byte(nil), s...)
				swapped[pos], swapped[pos+1] = b, a
				escaped := ValidCode(string(swapped))
				pair := string([]byte{min(a, b), max(a, b)})
				if escaped != (pair == "2Z") {
					t.Errorf("transposition %s -> %s at %d: escaped %v", s, swapped, pos, escaped)
				}
			}
		}
	}
}

// fixCheck makes s valid by changing one character outside positions pos and
// pos+1; it reports false when no such position exists.
func fixCheck(s []byte, pos int) bool {
	fix := CodeLen - 1
	if fix == pos || fix == pos+1 {
		fix = 0
		if pos == 0 {
			fix = 2
		}
	}
	for _, c := range []byte(codeAlphabet) {
		s[fix] = c
		if ValidCode(string(s)) {
			return true
		}
	}
	return false
}

func TestNormalizeCode(t *testing.T) {
	code := Code(testSecret, "CD-0001") // XQ39-JGN6-HFQ
	raw := strings.ReplaceAll(code, "-", "")
	for _, in := range []string{code, raw, strings.ToLower(code), " xq39 jgn6 hfq "} {
		got, err := NormalizeCode(in)
		if err != nil || got != raw {
			t.Errorf("NormalizeCode(%q) = %q, %v; want %q", in, got, err, raw)
		}
	}
	for _, in := range []string{"", "XQ39-JGN6-HF", "XQ39-JGN6-HFQQ", "XQ39-JGN0-HFQ", "XQ39-JGNI-HFQ", "XQ39-JGN6-HFR", "XQ39-JGN6-HFÉ"} {
		_, err := NormalizeCode(in)
		wantInvalid(t, fmt.Sprintf("NormalizeCode(%q)", in), err)
	}
	if got := FormatCode(raw); got != code {
		t.Errorf("FormatCode(%q) = %q, want %q", raw, got, code)
	}
	if got := FormatCode("ABC"); got != "ABC" {
		t.Errorf("FormatCode of a short string = %q", got)
	}
}

func TestCodeSecret(t *testing.T) {
	wantInvalid(t, "short secret", CheckSecret([]byte("short")))
	if err := CheckSecret(testSecret); err != nil {
		t.Errorf("16-byte secret: %v", err)
	}
	defer func() {
		if recover() == nil {
			t.Error("Code with an empty secret did not panic")
		}
	}()
	Code(nil, "CD-0001")
}

func FuzzNormalizeCode(f *testing.F) {
	for _, s := range []string{"XQ39-JGN6-HFQ", "xq39jgn6hfq", "", "----", "ZZZZ-ZZZZ-ZZZ"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		raw, err := NormalizeCode(s)
		if err != nil {
			return
		}
		if len(raw) != CodeLen || !ValidCode(FormatCode(raw)) {
			t.Fatalf("NormalizeCode(%q) = %q does not round-trip", s, raw)
		}
	})
}

// go test -bench Code ./cohort/deid
func BenchmarkCode(b *testing.B) {
	for b.Loop() {
		_ = Code(testSecret, "CD-0001")
	}
}
