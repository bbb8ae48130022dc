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
//
// # From a flag to a case
//
// The screen flags participant-weeks. Positive weeks of one participant that lie
// close together (at most the study's episode gap apart, in weeks) belong to
// one episode, and an episode is followed up as one case (AssignToCases; the
// gap is a study setting: 1 merges only back-to-back weeks, the default 2 also
// bridges one negative or missing week). A later
// positive week near an open case extends it; one near a closed case is noted
// on it as a late week; anything else opens a new case, so every case keeps
// one outcome. Episode is the run of screen-positive weeks; case is the
// follow-up work about it.
//
// # Case states
//
// A case starts open and normally passes through contacting (an attempt made),
// reached (the participant agreed to record), recorder sent, recording received
// and over-read (a clinician's interpretable reading exists), then ends in one
// of five final states: referred (a summary went to the participant's
// physician), or closed as not confirmed, unreachable, declined or withdrawn.
// The state table (state.go) lists every allowed move and why; a refused move
// names the moves that are allowed. Contact attempts (channel, outcome, note)
// move a case by themselves where the outcome says so (AfterAttempt): reaching
// the participant moves an open case to reached, a refusal closes it as
// declined. An uninterpretable over-read leaves the case waiting for a repeat
// recording.
//
// # Deadlines and the triage list
//
// A study promises how fast each step happens (ServiceLevels: for example the
// first contact attempt within 2 working days of the flag, the recorder sent
// within 5 days of reaching the participant). From the case's facts and the
// study's calendar (Calendar: time zone, weekends, closure days) NextDue names
// the next action and its deadline: the end of the due day in the study's time
// zone, moved to the next working day when it falls on a day off. The triage
// list orders cases by urgency (Urgency; OrderRule words the rule for the page):
// overdue first, then due today, new unowned flags, recordings waiting for an
// over-read, and the rest by due date.
//
// # Edit conflicts
//
// Two people may edit one case at once. Every edit names the version of the
// case the person saw; when the case has moved on, Diff and Conflict compare
// what they saw, what is stored now and what they meant to set, so the refusal
// can say which fields changed and let them decide again.
package followup
