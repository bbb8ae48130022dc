// Package screen is the irregular-rhythm screen over one participant-week of
// wear data: cleaning, the windowed successive-difference screen on heart-rate
// readings, the beat-interval method (package rr) on RR intervals when a week
// has them, personal baselines, a per-week verdict with a plain-words reason,
// and the threshold sweep: verdicts recomputed across values of one parameter,
// with their agreement with over-read ECGs.
//
// A positive verdict is a screen, not a diagnosis: it asks for a clinician-read
// ECG. A negative verdict does not rule out atrial fibrillation. The default
// protocol is illustrative and not clinically validated.
//
// The package is pure: time is passed in, nothing is read, written or logged.
// Results are deterministic: the same readings and protocol give byte-identical
// JSON.
//
// # What the screen looks at
//
// A smartwatch reports the heart rate every few minutes at rest and more often
// when it is busy. In atrial fibrillation (AF) the heartbeat is irregularly
// irregular, so even a sparse series of heart-rate readings jumps about more
// than it does in a steady rhythm. The screen measures that jumpiness and
// nothing else; it cannot tell AF from other irregular rhythms, from artefacts,
// or from ordinary changes, which is why a flag only starts follow-up.
//
// The unit of screening is the participant-week: study week N of a participant
// covers calendar days 7N to 7N+6 after their enrolment day, counted in their
// own time zone (cohort.StudyWeek), so a week across a daylight-saving change is
// 167 or 169 hours long.
//
// # From readings to a verdict
//
//  1. Clean (Clean): readings outside the protocol's plausible range
//     (MinBPM-MaxBPM), exact duplicates and readings from the future are
//     dropped, and every drop is counted by reason.
//  2. Windows (Prepare): the week is cut into fixed windows of each window size
//     the protocol lists (5 and 30 minutes by default). In each window the mean
//     absolute successive difference (MASD) of the heart-rate readings is the
//     average of |r(i) - r(i-1)|. A window is usable when it has enough readings,
//     no gap between readings longer than the protocol allows (a long gap would
//     compare two unrelated moments) and no more steps than the activity limit
//     (exercise changes the heart rate for ordinary reasons). A usable window is
//     irregular when its MASD is at or above the window size's threshold.
//  3. Week (Evaluate): a week with less usable wear than MinWearHours is
//     Insufficient. Otherwise it is Positive when, for some window size, enough
//     consecutive windows are irregular (RunLength) or a large enough share of
//     its usable windows is (MinShare), or when the beat-interval method finds
//     enough AF-like segments; else Negative. The result carries the counts,
//     the longest run, the share and a sentence saying why.
//
// The three verdicts are the screen's words (Verdict: positive, negative,
// insufficient) and are stored as such; external algorithms' verdicts on a
// participant-week, imported from files, use the same type.
//
// # Beat intervals
//
// Some watches also send RR intervals: the time between successive beats.
// When a week has them and the protocol turns the method on, runs of
// consecutive beats are cut into segments and each segment is scored by
// package rr. Its thresholds are those of a published method (see package rr).
//
// # Personal baselines
//
// Some people's heart rate is jumpy in ordinary life. With baselines on, the
// participant's first K weeks set their own level per window size (the median
// MASD of their negative baseline weeks), and a window's threshold becomes the
// larger of the protocol's threshold and Factor times that level. Thresholds are
// only ever raised, never lowered, and a baseline is only used once all K weeks
// were negative (Baseline.Established).
//
// # Protocols and versions
//
// Protocol holds every parameter. A protocol version is immutable once it has
// produced results: changing anything makes a new version, and each stored
// result names its version and carries a digest of its input readings, so any
// verdict can be recomputed and compared byte for byte. A correction to how
// the screen computes is an algorithm revision (Protocol.Revision): it
// reaches results only through a new version that names it, so a stored
// result always recomputes under its own. Revision 1 measures usable wear
// as the time the readings cover and bins the entropy exactly; versions
// stored before revisions read as revision 0. The defaults
// (DefaultProtocol) are illustrative choices of ours, to be shown as such.
//
// # The threshold sweep
//
// Sweep re-evaluates prepared weeks across several values of one parameter
// (SweepParams lists those it can vary; CheckSweep checks a request), and
// SweepTally counts, per value, how many weeks would flag and how those flags
// agree with the over-read ECGs of the study's cases, so an investigator can
// weigh a change before an administrator makes a new protocol version. Its
// PPV is per participant-week, where the agreement statistics' is per
// flagged episode (PPVUnits words the difference); both take as reference
// only recordings long enough for a diagnostic read
// (overread.Conclusion.Diagnostic).
package screen
