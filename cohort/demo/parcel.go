package demo

import "fmt"

// TrackingNumber is the invented tracking number of the recorder mailed for
// a case. It is plainly fictional ("DEMO-PARCEL-" and the case number) and
// takes no real carrier's or postal shape; the international postal item
// number (two letters, nine digits, two letters) in particular is avoided.
func TrackingNumber(caseID int64) string {
	return fmt.Sprintf("DEMO-PARCEL-%05d", caseID)
}
