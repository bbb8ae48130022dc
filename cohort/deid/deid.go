package deid

import "errors"

// ErrInvalid marks input the rules cannot apply to (a malformed ZIP code, a
// birth date after the reference date). The wrapped message names the field.
var ErrInvalid = errors.New("invalid input")

// ErrNotAllowed marks an export column that is not on the export's allow-list.
var ErrNotAllowed = errors.New("not on the export allow-list")

// Treatment says how cohortdesk exports handle one class of identifier.
type Treatment string

// The treatments. "Not collected" is the strongest: what the study never
// stores cannot leak.
const (
	Removed      Treatment = "removed"       // stored for study work, never exported
	Generalised  Treatment = "generalised"   // exported only in a coarser form
	NotCollected Treatment = "not collected" // the study does not store it at all
)

// Identifier is one of the 18 identifier classes of 45 CFR
// 164.514(b)(2)(i)(A)-(R), with how cohortdesk treats it.
type Identifier struct {
	Number    int       // 1-18, in the order of the regulation
	Name      string    // the class, in the regulation's words, shortened
	Treatment Treatment // how exports handle this class
	How       string    // what cohortdesk does, for the data protection review
}

// safeHarbor is the table itself. Changing a treatment here is a policy
// decision and must go through review with the rest of the export rules.
var safeHarbor = [18]Identifier{
	{1, "names", Removed, "participant and contact names stay in the PHI store; exports use the referral code"},
	{2, "geographic subdivisions smaller than a state", Generalised, "only the first three ZIP digits, 000 for the restricted prefixes (ZIP3); no street, city or county"},
	{3, "all elements of dates (except year) directly related to an individual; ages over 89", Generalised, "dates become study day and study week; age in whole years, over 89 as \"90 or older\"; year of birth only when it cannot reveal an age over 89"},
	{4, "telephone numbers", Removed, "kept for contacting the participant, never exported"},
	{5, "fax numbers", NotCollected, "no field exists"},
	{6, "electronic mail addresses", Removed, "kept for contacting the participant, never exported"},
	{7, "social security numbers", NotCollected, "no field exists"},
	{8, "medical record numbers", NotCollected, "no field exists"},
	{9, "health plan beneficiary numbers", NotCollected, "no field exists"},
	{10, "account numbers", NotCollected, "no field exists"},
	{11, "certificate/license numbers", NotCollected, "no field exists"},
	{12, "vehicle identifiers and serial numbers, including license plate numbers", NotCollected, "no field exists"},
	{13, "device identifiers and serial numbers", Removed, "watch and recorder serials are kept for logistics, never exported"},
	{14, "web universal resource locators (URLs)", NotCollected, "no participant URL is stored"},
	{15, "internet protocol (IP) address numbers", Removed, "client addresses in the audit trail are never exported"},
	{16, "biometric identifiers, including finger and voice prints", Removed, "dataset exports carry no heart-rate readings, beat intervals or ECG waveforms; a referral summary shows its physician one ECG strip of up to 30 s and binned heart rates of one week, which the human review before release must accept"},
	{17, "full face photographic images and any comparable images", NotCollected, "no images of participants are stored"},
	{18, "any other unique identifying number, characteristic, or code", Removed, "the study ID is replaced by a keyed referral code (Code); whether that code meets 164.514(c) is for the privacy review to confirm"},
}

// Identifiers returns the 18 Safe Harbor identifier classes with cohortdesk's
// treatment of each, for display and for tests that check coverage. It
// returns a copy so no caller can change the policy at run time.
func Identifiers() []Identifier {
	out := make([]Identifier, len(safeHarbor))
	copy(out, safeHarbor[:])
	return out
}
