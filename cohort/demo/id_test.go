package demo

import (
	"fmt"
	"testing"
)

func TestStudyIDRoundTrip(t *testing.T) {
	tests := []struct {
		site string
		seq  int
	}{{"QRW", 1}, {"VLM", 42}, {"DRF", 9999}, {"ABC", 12345}, {"ZZZ", 999999}}
	for _, tt := range tests {
		id := FormatStudyID(tt.site, tt.seq)
		site, seq, err := ParseStudyID(id)
		if err != nil || site != tt.site || seq != tt.seq {
			t.Errorf("ParseStudyID(%q) = %q, %d, %v; want %q, %d", id, site, seq, err, tt.site, tt.seq)
		}
	}
}

func TestCheckLetterCatchesTypos(t *testing.T) {
	// Every single-digit substitution and every swap of two different adjacent
	// digits must change the check letter (the modulus 23 is prime and the
	// weights differ by less than 23).
	for seq := 0; seq < 10000; seq += 7 {
		body := fmt.Sprintf("QRW-%04d", seq)
		want := CheckLetter(body)
		b := []byte(body)
		for i := 4; i < len(b); i++ {
			orig := b[i]
			for c := byte('0'); c <= '9'; c++ {
				if c == orig {
					continue
				}
				b[i] = c
				if CheckLetter(string(b)) == want {
					t.Fatalf("%s -> %s keeps check letter %c", body, b, want)
				}
			}
			b[i] = orig
		}
		for i := 4; i+1 < len(b); i++ {
			if b[i] == b[i+1] {
				continue
			}
			b[i], b[i+1] = b[i+1], b[i]
			if CheckLetter(string(b)) == want {
				t.Fatalf("%s -> %s keeps check letter %c", body, b, want)
			}
			b[i], b[i+1] = b[i+1], b[i]
		}
	}
}

func TestParseStudyIDRejects(t *testing.T) {
	good := FormatStudyID("QRW", 42)
	wrong := good[:len(good)-1] + "A"
	if wrong == good {
		wrong = good[:len(good)-1] + "B"
	}
	for _, in := range []string{"", "QRW", "QRW-0042", "qrw-0042-X", "QR-0042-X", "QRW-042-X", "QRW-00042-X",
		"QRW-0042-XY", "QRW-00A2-X", "QRW-0042-", wrong, good + "-", " " + good} {
		if _, _, err := ParseStudyID(in); err == nil {
			t.Errorf("ParseStudyID(%q): no error", in)
		}
	}
}

func FuzzParseStudyID(f *testing.F) {
	for _, s := range []string{FormatStudyID("QRW", 1), "VLM-0042-K", "QRW-12345-A", "", "---", "ÄBC-0001-A", "QRW-0001-a"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, in string) {
		site, seq, err := ParseStudyID(in)
		if err != nil {
			return
		}
		if got := FormatStudyID(site, seq); got != in {
			t.Errorf("ParseStudyID(%q) = %q, %d, which formats as %q", in, site, seq, got)
		}
	})
}
