// Package rr scores beat-to-beat (RR) interval series for an irregular,
// atrial-fibrillation-like rhythm with the combination of normalised RMSSD,
// Shannon entropy and turning point ratio over fixed-length beat segments
// (Dash S, Chon KH, Lu S, Raeder EA. Automatic real time detection of atrial
// fibrillation. Ann Biomed Eng 2009;37(9):1701-9).
//
// The paper itself was not read; the defaults are the values that several
// independent implementations citing it agree on and are marked "from memory".
// A segment scored AF-like is a screening hint, never a diagnosis: AF is
// diagnosed on a clinician-read ECG.
//
// The package is pure: no I/O, no clock, no logging.
//
// # RR intervals
//
// An RR interval is the time from one heartbeat to the next, in milliseconds
// (named after the R wave, the tall spike of each beat on an ECG). Some watches
// report them; package ecg derives them from a recording. In a normal (sinus)
// rhythm successive intervals change slowly, with breathing; in AF they vary
// at random, beat by beat.
//
// # The three measures of a segment
//
// Analyse splits a series into segments of SegmentBeats intervals (128 by
// default) and measures each:
//
//   - Normalised RMSSD: the root mean square of successive differences,
//     sqrt(mean((RR(i) - RR(i-1))^2)), divided by the mean interval, so a
//     fast and a slow heart compare. Large when neighbouring beats differ a lot.
//   - Shannon entropy: the intervals left after dropping the Trim shortest and
//     Trim longest (ectopic beats, detection slips) are sorted into Bins
//     equal-width bins; the entropy of the bin shares, divided by log(Bins),
//     is 1 when the intervals spread evenly and 0 when they are all alike.
//   - Turning point ratio: how many interior intervals are a local peak or
//     trough. For a random series of n values about 2(n-2)/3 are, with
//     variance (16n-29)/90; a count within TPRBandSD standard deviations of
//     that says "as random as chance".
//
// A segment is AF-like when all three agree: normalised RMSSD above NRMSSDMin,
// entropy above EntropyMin, and a turning point count inside the random band
// (Params.AFLike). The screen counts AF-like segments per week (package screen).
package rr
