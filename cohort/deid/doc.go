// Package deid holds cohortdesk's de-identification rules for referral
// summaries and data exports, as data and small pure functions, following the
// HIPAA Safe Harbor method (45 CFR 164.514(b)(2)).
//
// The rules remove or generalise the listed identifiers; they cannot see what
// a reader might otherwise know. Safe Harbor also requires that the releasing
// party has no actual knowledge that what remains could identify the person,
// so a human must review every export before release.
//
// # PHI and who sees it
//
// Protected health information (PHI) is anything that ties health data to a
// person: name, contact details, birth date, street and ZIP code, device serial
// numbers and the like. Inside the application PHI is shown only to roles that
// may see it (cohort.Role.SeesPHI: not monitors), and every view of it is
// audited. Participants' calendar dates and the free text staff write are
// shown only to roles with cohort.Role.SeesDatesAndFreeText; the others see
// study time (StudyTimeOf, RecruitmentWeek) and no free text. Anything that
// leaves the application goes through this package.
//
// # What an export keeps
//
//   - Participants are named by a pseudonymous referral code (Code): a keyed
//     hash of the study ID with the deployment's secret, 10 characters and a
//     check character, written XXXX-XXXX-XXX. Without the secret the code
//     cannot be traced back; with it the study can find the participant again.
//   - Dates become study time (StudyTimeAt, StudyTimeOf): days and weeks since
//     the participant's enrolment day, which keep intervals without dates.
//   - Ages become bands, and every age over 89 becomes the single category
//     "90 or older" (AgeOf, Age.Band).
//   - ZIP codes keep their first three digits, or 000 where that area is too
//     small (ZIP3; the prefixes are HHS's list, RestrictedZIP3).
//   - Each export has an allow-list of columns (CheckFields); free text typed
//     by staff is on none of them and never leaves.
//
// The tests prove it on the demo: identifiers planted in the demo's PHI
// ("canaries") must appear in no export, summary or monitor page
// (deidtest.Leaks finds them in any of their written forms).
package deid
