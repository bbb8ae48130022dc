package outreach

import (
	"fmt"
	"slices"
	"strings"
	"unicode"

	"cohortdesk/cohort"
)

// WordList is the study's list of words that must not reach a participant's
// message unread: names of diagnoses and words that state a screening
// result. A term is one or more words, matched without regard to letter case
// at word boundaries; a term ending in "*" matches every word that starts
// with it ("diagnos*" finds "diagnosis" and "diagnosed"). Administrators keep
// the list; the template editor warns on its words in a body and refuses them
// in a subject.
type WordList struct {
	Terms []string
}

// DefaultWords is the list a study starts with (common practice in screening
// studies: say nothing of the condition or the result; ask the person to
// contact the study team). Wording of our own.
func DefaultWords() WordList {
	return WordList{Terms: []string{
		"atrial", "fibrillation", "afib", "AF", "arrhythmi*", "irregular*", "abnormal*",
		"diagnos*", "positive", "negative", "result*", "flag*", "confirm*",
		"stroke", "heart", "cardiac", "condition", "disease", "urgent*", "emergenc*",
	}}
}

// Limits of the word list.
const (
	MaxWords   = 200
	MaxTermLen = 60
)

// ParseWords reads a list written one term per line (blank lines ignored)
// and refuses a term that is not words and hyphens (with an optional final
// "*"), or a list that is too long, naming the line.
func ParseWords(text string) (WordList, error) {
	var ve cohort.ValidationError
	var out WordList
	for i, line := range strings.Split(text, "\n") {
		term := strings.TrimSpace(line)
		if term == "" {
			continue
		}
		core := strings.TrimSuffix(term, "*")
		ok := core != "" && len(term) <= MaxTermLen
		for _, r := range core {
			if !unicode.IsLetter(r) && !unicode.IsDigit(r) && r != '-' && r != ' ' && r != '\'' {
				ok = false
			}
		}
		if !ok {
			ve.Add("words", fmt.Sprintf("line %d: %q is not a word or phrase (letters, digits, hyphens and spaces, at most %d characters, optionally ending in *)", i+1, term, MaxTermLen))
			continue
		}
		if !slices.ContainsFunc(out.Terms, func(t string) bool { return strings.EqualFold(t, term) }) {
			out.Terms = append(out.Terms, term)
		}
	}
	if len(out.Terms) > MaxWords {
		ve.Add("words", fmt.Sprintf("use at most %d terms", MaxWords))
	}
	return out, ve.Err()
}

// Text writes the list one term per line, as ParseWords reads it.
func (w WordList) Text() string { return strings.Join(w.Terms, "\n") }

// Hit is a term of the list found in a text.
type Hit struct {
	Term string
	At   int // byte offset of the match
}

// words splits text into its words with their byte offsets: runs of letters
// and digits (a hyphen or an apostrophe inside a word splits it, so
// "non-urgent" holds "urgent").
func words(text string) (ws []string, at []int) {
	start := -1
	for i, r := range text {
		inWord := unicode.IsLetter(r) || unicode.IsDigit(r)
		switch {
		case inWord && start < 0:
			start = i
		case !inWord && start >= 0:
			ws, at = append(ws, text[start:i]), append(at, start)
			start = -1
		}
	}
	if start >= 0 {
		ws, at = append(ws, text[start:]), append(at, start)
	}
	return ws, at
}

// Find lists the terms of the list that occur in text, in order of
// occurrence.
func (w WordList) Find(text string) []Hit {
	tw, at := words(text)
	var out []Hit
	for i := range tw {
		for _, term := range w.Terms {
			if matchAt(tw[i:], term) {
				out = append(out, Hit{Term: term, At: at[i]})
			}
		}
	}
	return out
}

// matchAt reports whether the term's words begin the word sequence ws.
func matchAt(ws []string, term string) bool {
	prefix := strings.HasSuffix(term, "*")
	tws, _ := words(strings.TrimSuffix(term, "*"))
	if len(tws) == 0 || len(tws) > len(ws) {
		return false
	}
	for k, t := range tws {
		last := k == len(tws)-1
		switch {
		case last && prefix:
			if len(ws[k]) < len(t) || !strings.EqualFold(ws[k][:len(t)], t) {
				return false
			}
		case !strings.EqualFold(ws[k], t):
			return false
		}
	}
	return true
}
