package cascade

import (
	"cmp"
	"slices"
)

// Exit is the participants of a box who did not reach the next box, for one
// reason.
type Exit struct {
	Reason       ExitReason
	Participants []int64 // sorted
}

// Box is one box of the screening cascade.
type Box struct {
	Key        string // stable name: see the Cascade doc comment
	Label      string
	Definition string // how the box is counted, in words, for the page
	// Participants in the box, sorted. Count is its length.
	Participants []int64
	// Cases (flagged episodes) in the box, from "screen_positive" on: every
	// case of the protocol version whose own stage reached the box, sorted.
	// A participant with two cases counts once in Participants and twice here.
	Cases []int64
	// Exits lists, by reason, the participants in this box but not in the
	// next; empty for the last box. Count = next box's Count + all exits.
	Exits []Exit
}

// Count is the number of participants in the box.
func (b Box) Count() int { return len(b.Participants) }

// Cascade is the screening cascade in the manner of a CONSORT 2010 flow
// diagram: eight nested boxes of participants, each with the reasons for
// leaving. The boxes, by Key:
//
//   - enrolled: participants enrolled at the site(s) in the window.
//   - sufficient_wear: of those, participants with at least one week with a
//     verdict (positive or negative, not "insufficient data") under the
//     protocol version, or a case opened by it.
//   - screen_positive: participants with at least one screen-positive week
//     under the version, or a case opened by it. Cases from here on are the
//     version's cases of these participants (flagged episodes).
//   - reached: participants with a case that ever reached the "reached"
//     state (its reached time is set, or its state lies beyond "reached"), or
//     that has a recording.
//   - recording_returned: participants with a case holding at least one
//     stored recording (of any length).
//   - over_read: participants with a case on which a recording of at least
//     30 s has readings that settle an interpretable rhythm (overread.Resolve:
//     one reading, two that agree, or an adjudication). Counted from the
//     readings, not from the case's state.
//   - af_confirmed: participants with a case whose settled rhythm on such a
//     recording is AF.
//   - referred: participants with an AF-confirmed case in the "referred"
//     state. A referral for another rhythm is not counted here; that case
//     shows among the "not confirmed" exits of af_confirmed.
//
// A participant's exit reason comes from their case that went furthest (the
// latest flagged among equals); see ExitReason for the reasons.
type Cascade struct {
	Filter   Filter // as given, with ProtocolID resolved
	Protocol ProtocolRef
	Versions []ProtocolRef // every version, for choosing
	Boxes    []Box
}

// Box returns the box with the given key, or a zero box.
func (c Cascade) Box(key string) Box {
	for _, b := range c.Boxes {
		if b.Key == key {
			return b
		}
	}
	return Box{}
}

var boxes = []struct{ key, label, def string }{
	{"enrolled", "Enrolled", "participants enrolled in the period at the chosen site(s)"},
	{"sufficient_wear", "With enough wear data", "at least one week with a screening verdict (positive or negative) under the protocol version"},
	{"screen_positive", "Screen-positive", "at least one screen-positive week under the protocol version (flagged episodes are its cases)"},
	{"reached", "Reached", "a case that ever reached the 'reached' state"},
	{"recording_returned", "Recording returned", "a case with at least one stored ECG recording"},
	{"over_read", "Over-read", "a case with an interpretable over-read settled on a recording of at least 30 s"},
	{"af_confirmed", "AF confirmed", "a case whose settled over-read is atrial fibrillation"},
	{"referred", "Referred", "an AF-confirmed case that was referred to the participant's physician"},
}

// Cascade counts the cascade of the rows' chosen protocol version; f is
// recorded in the result with its ProtocolID resolved to that version.
func (rs Rows) Cascade(f Filter) Cascade {
	f.ProtocolID = rs.Protocol.ID
	out := Cascade{Filter: f, Protocol: rs.Protocol, Versions: rs.Versions}
	// Each participant's furthest case under the version.
	type best struct {
		stage Stage
		ep    *Episode
	}
	furthest := map[int64]best{}
	casesAt := make([][]int64, StageReferred+1)
	for i := range rs.Episodes {
		e := &rs.Episodes[i]
		if e.ProtocolID != rs.Protocol.ID {
			continue
		}
		st := e.stage()
		for k := StageFlagged; k <= st; k++ {
			casesAt[k] = append(casesAt[k], e.CaseID)
		}
		b, ok := furthest[e.ParticipantID]
		if !ok || st > b.stage || (st == b.stage && !e.Flagged.Before(b.ep.Flagged)) {
			furthest[e.ParticipantID] = best{st, e}
		}
	}
	bs := make([]Box, len(boxes))
	for i, b := range boxes {
		bs[i] = Box{Key: b.key, Label: b.label, Definition: b.def}
	}
	exits := make([]map[ExitReason][]int64, len(bs))
	for i := range exits {
		exits[i] = map[ExitReason][]int64{}
	}
	for _, p := range rs.People {
		bs[0].Participants = append(bs[0].Participants, p.ID)
		b, hasCase := furthest[p.ID]
		if !p.Sufficient && !hasCase {
			r := ExitNoWearData
			if p.Withdrawn {
				r = ExitWithdrawnEarly
			}
			exits[0][r] = append(exits[0][r], p.ID)
			continue
		}
		bs[1].Participants = append(bs[1].Participants, p.ID)
		if !p.Positive && !hasCase {
			exits[1][ExitScreenNegative] = append(exits[1][ExitScreenNegative], p.ID)
			continue
		}
		bs[2].Participants = append(bs[2].Participants, p.ID)
		if !hasCase {
			exits[2][ExitNoCase] = append(exits[2][ExitNoCase], p.ID)
			continue
		}
		// Box 2 holds stage StageFlagged; box 2+k holds stage k.
		for k := StageReached; k <= b.stage; k++ {
			bs[2+int(k)].Participants = append(bs[2+int(k)].Participants, p.ID)
		}
		if b.stage < StageReferred {
			r := b.ep.exit()
			exits[2+int(b.stage)][r] = append(exits[2+int(b.stage)][r], p.ID)
		}
	}
	for k := StageFlagged; k <= StageReferred; k++ {
		bs[2+int(k)].Cases = casesAt[k]
	}
	for i := range bs {
		slices.Sort(bs[i].Participants)
		slices.Sort(bs[i].Cases)
		for r, ids := range exits[i] {
			slices.Sort(ids)
			bs[i].Exits = append(bs[i].Exits, Exit{Reason: r, Participants: ids})
		}
		slices.SortFunc(bs[i].Exits, func(a, b Exit) int {
			return cmp.Or(cmp.Compare(len(b.Participants), len(a.Participants)), cmp.Compare(a.Reason, b.Reason))
		})
	}
	out.Boxes = bs
	return out
}
