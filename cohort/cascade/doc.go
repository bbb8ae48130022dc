// Package cascade counts the screening cascade of a study and the agreement
// of its flags with the clinicians' over-reads, from rows read once.
//
// A participant enters the cascade when enrolled and moves through it box by
// box: a week with enough wear data for the screen to give a verdict, a
// screen-positive week, a follow-up case (a flagged episode) in which the
// participant was reached, a recording returned, an over-read that settles an
// interpretable rhythm on a recording long enough for a diagnostic read, atrial
// fibrillation confirmed, and a referral to the participant's physician. For
// every box the participants who did not reach the next one are listed by the
// reason they stopped, telling a final exit (declined, unreachable, not AF)
// from a wait that may still move on (still being contacted, recording not
// back yet). The diagram is drawn in the manner of a CONSORT 2010 flow
// diagram (Schulz, Altman and Moher, BMJ 2010;340:c332).
//
// The agreement statistics count the same episodes: the positive predictive
// value of the flag (AF confirmed among the episodes with a diagnostic
// over-read) with Wilson and Clopper-Pearson intervals, the days from flag to
// over-read as a Kaplan-Meier curve (episodes still open are censored), the
// same figures by site, sex and age band, and Cohen's kappa between the
// recorder's automatic interpretation and the settled over-read.
//
// Every figure is a sum over participants and their episodes, and each
// participant's part depends on that participant's rows only: Stand places
// a participant in the cascade, Episode.Figure gives an episode's figures,
// Recording.KappaCell a recording's cell of the kappa table. Storage keeps
// these per participant as the rows change and adds them up (Counts.Cascade,
// Sums.Agreement), so a page costs what it shows, not what the study holds;
// Rows.Cascade and Rows.Agreement count the same functions over rows read
// whole (participants, their cases, the cases' recordings with the effective
// conclusion of their readings), which is how the kept figures are checked. Whether a recording counts as over-read is
// overread.Conclusion.Diagnostic, the one rule for it. Everything here is
// pure: no I/O and no clock; the "as of" day comes in with the rows.
//
// The figures describe a research cohort. They do not diagnose anyone; a flag
// is not a diagnosis, and a PPV from a small number of over-reads has a wide
// interval, which is why every proportion is shown with one.
package cascade
