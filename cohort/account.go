package cohort

import (
	"fmt"
	"strings"
)

// The rules of a staff account as an administrator enters it.

// MaxEmailLen is the longest e-mail address: RFC 5321 (section 4.5.3.1.3)
// allows a path of 256 octets including the angle brackets, so 254.
const MaxEmailLen = 254

// CheckAccount refuses a new account: an e-mail address (with an @ and no
// spaces), a name of 1 to 120 characters, and a known role.
func CheckAccount(email, name string, r Role) error {
	var ve ValidationError
	if !strings.Contains(email, "@") || strings.ContainsAny(email, " \t") {
		ve.Add("email", "enter an e-mail address such as name@example.org")
	} else if len(strings.TrimSpace(email)) > MaxEmailLen {
		ve.Add("email", fmt.Sprintf("an e-mail address has at most %d characters", MaxEmailLen))
	}
	checkName(&ve, name)
	if !r.Valid() {
		ve.Add("role", "choose a role")
	}
	return ve.Err()
}

// CheckAccountChange refuses an edit of an account: a name and a known role,
// and, when the administrator edits their own account (self), no loss of the
// administrator role and no deactivation, so a study never loses its last
// way in by accident.
func CheckAccountChange(name string, r Role, active, self bool) error {
	var ve ValidationError
	checkName(&ve, name)
	if !r.Valid() {
		ve.Add("role", "choose a role")
	}
	if self && (r != Admin || !active) {
		ve.Add("role", "you cannot remove your own administrator role or deactivate yourself; ask another administrator")
	}
	return ve.Err()
}

func checkName(ve *ValidationError, name string) {
	switch n := strings.TrimSpace(name); {
	case n == "":
		ve.Add("name", "enter the person's name")
	case len(name) > 120:
		ve.Add("name", "use at most 120 characters")
	}
}
