// Package overread holds the rules of clinicians' over-reads of ECG
// recordings: the verdict categories, the recorder's own reading, the order in which readings may be entered (a first reading,
// an optional second reading by another investigator, and an adjudication when
// the two disagree) and the conclusion those readings reach.
//
// The categories of the over-read (AF, atrial flutter, sinus rhythm, other
// arrhythmia, uninterpretable) are the trade's. The rules for entering readings
// and the conclusion are ours (a common design for blinded double
// reading with adjudication; no single source).
//
// The package is pure: no I/O, no clock, no logging.
//
// # Why over-reads
//
// A flagged participant makes a short single-lead ECG with a handheld recorder
// mailed to them. The recorder often gives its own reading (Auto; our words
// say plainly that it is the device's call: "device suggests AF", "device
// suggests a regular rhythm", "device made no rhythm call", "device could
// not analyse the trace", or "no device reading"), but only a clinician's
// reading of the tracing, the over-read, decides what the study
// counts. The reader gives a rhythm (Rhythm) and how sure they are
// (Confidence). AF is diagnosed on at least 30 seconds of ECG, so a shorter
// recording never counts as diagnostic whatever its reading.
//
// # Readings and the conclusion
//
// A recording takes at most three readings, in this order: a first reading; an
// optional second reading by another investigator; and, only when the two
// disagree on the rhythm, an adjudication (Check enforces the order; Next says
// which reading is due). Resolve turns the readings into a Conclusion: the
// single reading, the rhythm two readers agree on, or the adjudication; two
// readers who disagree leave the recording without a conclusion until it is
// adjudicated.
//
// Words used across the code: a Verdict (package screen) is the screen's call on
// a participant-week; a Rhythm is one reader's call on one recording; a
// Conclusion is what a recording's readings settle on. Conclusion.Diagnostic is
// the one rule for a diagnostic recording (settled, interpretable, long enough):
// it moves a case to "over-read" and it is what the study's figures count as an
// over-read.
//
// # Comparing the recorder with the readers
//
// The recorder knows fewer rhythms than a clinician, so the two are compared in
// a coarser common set of categories (AutoCategory, RhythmCategory), which the
// agreement statistics (Cohen's kappa) use.
package overread
