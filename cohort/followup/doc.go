// Package followup holds the rules of a follow-up case, from a screen-positive
// episode to a referral or a closing: the case states and the moves between
// them (state.go), the steps a case offers in each state and to which roles
// (steps.go: the one answer for the case page, the triage rows and the
// store), entering a state and the wording of a refused stale copy
// (edit.go), what a person may enter for each step (entry.go), how positive
// weeks merge into episodes and episodes into cases, what a contact attempt
// implies, the study's settings and working-day calendar, the service levels
// that set when the next action is due, the order of the triage list, and the
// field comparison behind a clear edit-conflict message.
//
// Everything here is pure: no I/O, no logging, no clock. The caller passes the
// current time and the study's calendar in, so the same facts always give the
// same answer and tests can pin any moment, time zone or daylight-saving change.
// The one lookup is of time zone names, in the standard time zone database
// (time.LoadLocation), as the study settings name their zone.
//
// The state names, action names, defaults and ordering rule are ours; only
// trade terms (participant, over-read) are borrowed. The service-level defaults
// are illustrative, not taken from any guideline.
package followup
