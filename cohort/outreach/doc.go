// Package outreach holds the rules of the messages the desk sends to
// participants: what a message may say, to whom, on which channel and when.
// It does no I/O: the store (db) queues messages in the same transaction as
// the case's contact attempt, and the sender (web/outreach) delivers them.
//
// # The wording rule
//
// Messages to participants never state a diagnosis or a screening result:
// beyond "please contact the study team" they say nothing about the person's
// health. Subjects never carry health information: a subject is fixed text,
// the same for everyone (no placeholders), and may use no word of the
// study's word list. The default templates follow the rule. The template
// editor warns on every word of the list in a body (WordList, Warnings) and
// refuses one in a subject (Template.Check). The list is the study's to keep;
// DefaultWords is where it starts.
//
// # Templates and placeholders
//
// A template is the wording of one purpose (Purpose: first contact,
// reminder, recorder on its way, recorder return reminder, a call about next
// steps) on one channel (e-mail, text message, letter). Bodies may use the
// placeholders of a fixed set, written {{name}} (Placeholders: first_name,
// family_name, study_name, contact_line, study_number, tracking_number,
// reply_by); each purpose requires some of them (Purpose.Required). Saved
// templates never change: editing one saves the next version, and every
// message records the version it was made from. A message is made out with
// Template.Render; a value it needs that is empty refuses the message with
// the reason.
//
// # Contact preferences
//
// Each participant may have a preferred channel, consent and an opt-out per
// channel, and quiet hours in their own time zone (Preferences). Without
// recorded preferences the Defaults apply. Decide says whether a message may
// go and when: refused with the reason, sent now, or held until the quiet
// hours end (e-mail and text messages; letters are posted).
//
// # Statuses
//
// A message is queued, then sent (accepted by the mail server or the text
// gateway, or a printed letter recorded as posted), delivered (where the
// channel reports it: text gateways), undeliverable (refused for good) or
// failed (temporary failures until the desk gave up, or sending was no
// longer allowed).
//
// # Letters
//
// Letters are printed for window envelopes (Envelopes: DL and C5 for A4, the
// US No. 10 for US Letter); the address block goes in AddressArea, the part
// of the sheet every window shows in every position of the folded sheet.
// Nothing but the address shows through the window.
package outreach
