package outreach

import "cohortdesk/cohort/followup"

// DefaultReplyDays is the reply days of the default templates.
const DefaultReplyDays = 5

// defaultText is one purpose's default wording: the subject, the body of an
// e-mail or a letter, and the body of a text message.
type defaultText struct {
	subject, long, text string
}

// The default wording follows the study's wording rule: a message says that
// the study team would like to hear from the person and how to reach them,
// and nothing about their health, a diagnosis or a screening result;
// subjects are plain and the same for everyone.
var defaultTexts = map[Purpose]defaultText{
	PurposeFirstContact: {
		subject: "A message from your study team",
		long: `Dear {{first_name}},

Thank you for taking part in the {{study_name}}. A member of the study team would like to speak with you about your participation.

Please contact the study team by {{reply_by}}: {{contact_line}}.

When you get in touch, please quote your study number, {{study_number}}.

With thanks,
The study team`,
		text: `{{first_name}}, the {{study_name}} team would like to speak with you. Please contact us by {{reply_by}}: {{contact_line}}. Study number {{study_number}}.`,
	},
	PurposeReminder: {
		subject: "Your study team would like to hear from you",
		long: `Dear {{first_name}},

We have tried to reach you recently and would still like to speak with you about your participation in the {{study_name}}.

Please contact the study team when you can: {{contact_line}}. Your study number is {{study_number}}.

With thanks,
The study team`,
		text: `{{first_name}}, the {{study_name}} team is still hoping to speak with you. Please contact us: {{contact_line}}. Study number {{study_number}}.`,
	},
	PurposeRecorderOut: {
		subject: "Your study parcel is on its way",
		long: `Dear {{first_name}},

As agreed, we have sent you a small recording device with instructions for its use. Its tracking number is {{tracking_number}}.

If it has not arrived within a few days, or if you have any questions, please contact the study team: {{contact_line}}. Your study number is {{study_number}}.

With thanks,
The study team`,
		text: `{{first_name}}, your {{study_name}} parcel is on its way (tracking {{tracking_number}}). Questions: {{contact_line}}.`,
	},
	PurposeRecorderReturn: {
		subject: "A reminder from your study team",
		long: `Dear {{first_name}},

Thank you for receiving the recording device we sent you. Please follow the instructions in the parcel and send the device back by {{reply_by}} in the envelope provided.

If anything is unclear, please contact the study team: {{contact_line}}. Your study number is {{study_number}}.

With thanks,
The study team`,
		text: `{{first_name}}, a reminder from the {{study_name}}: please send the recording device back by {{reply_by}}. Questions: {{contact_line}}.`,
	},
	PurposeTalkNextSteps: {
		subject: "Please contact your study team",
		long: `Dear {{first_name}},

Thank you for sending back the recording device. A member of the study team would like to talk with you about the next steps.

Please contact the study team: {{contact_line}}. Your study number is {{study_number}}.

With thanks,
The study team`,
		text: `{{first_name}}, thank you for sending the device back. Please contact the {{study_name}} team about the next steps: {{contact_line}}.`,
	},
}

// DefaultTemplates are the templates a study starts with: every purpose on
// every channel the desk sends on.
func DefaultTemplates() []Template {
	var out []Template
	for _, p := range Purposes() {
		d := defaultTexts[p]
		for _, c := range SendableChannels() {
			t := Template{Purpose: p, Channel: c, Subject: d.subject, Body: d.long, ReplyDays: DefaultReplyDays}
			if c == followup.ChannelText {
				t.Subject, t.Body = "", d.text
			}
			out = append(out, t)
		}
	}
	return out
}
