package cascade

import (
	"slices"
)

// Exit is the participants of a box who did not reach the next box, for one
// reason.
type Exit struct {
	Reason ExitReason
	N      int // participants
	// Participants lists them, sorted, when the cascade was counted from
	// rows (Rows.Cascade); figures kept in storage carry the count only.
	Participants []int64
}

// Box is one box of the screening cascade.
type Box struct {
	Key        string // stable name: see the Cascade doc comment
	Label      string
	Definition string // how the box is counted, in words, for the page
	// N is the number of participants in the box.
	N int
	// CaseN is the number of cases (flagged episodes) in the box, from
	// "screen_positive" on: every case of the protocol version whose own
	// stage reached the box. A participant with two cases counts once in N
	// and twice here.
	CaseN int
	// Exits lists, by reason, the participants in this box but not in the
	// next; empty for the last box. N = next box's N + all exits.
	Exits []Exit
	// Participants and Cases list the box's members, sorted, when the
	// cascade was counted from rows (Rows.Cascade); figures kept in storage
	// carry the counts only, and storage lists a box's members page by page.
	Participants []int64
	Cases        []int64
}

// Count is the number of participants in the box.
func (b Box) Count() int { return b.N }

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
// recorded in the result with its ProtocolID resolved to that version. Each
// person is placed by Stand and the boxes built by Counts.Cascade, as from
// the sums storage keeps; the result also lists every box's members.
func (rs Rows) Cascade(f Filter) Cascade {
	byPerson := map[int64][]Episode{}
	var counts Counts
	casesAt := make([][]int64, StageReferred+1)
	for _, e := range rs.Episodes {
		byPerson[e.ParticipantID] = append(byPerson[e.ParticipantID], e)
		if e.ProtocolID != rs.Protocol.ID {
			continue
		}
		st := e.stage()
		counts.Cases[st]++
		for k := StageFlagged; k <= st; k++ {
			casesAt[k] = append(casesAt[k], e.CaseID)
		}
	}
	stood := make([]Standing, len(rs.People))
	for i, p := range rs.People {
		stood[i] = Stand(p, byPerson[p.ID], rs.Protocol.ID)
		counts.Add(stood[i], 1)
	}
	out := counts.Cascade(f, rs.Protocol, rs.Versions)
	bs := out.Boxes
	for i, p := range rs.People {
		st := stood[i]
		for b := 0; b <= st.Box; b++ {
			bs[b].Participants = append(bs[b].Participants, p.ID)
		}
		if st.Exit == "" {
			continue
		}
		for j := range bs[st.Box].Exits {
			if e := &bs[st.Box].Exits[j]; e.Reason == st.Exit {
				e.Participants = append(e.Participants, p.ID)
			}
		}
	}
	for k := StageFlagged; k <= StageReferred; k++ {
		bs[2+int(k)].Cases = casesAt[k]
	}
	for i := range bs {
		slices.Sort(bs[i].Participants)
		slices.Sort(bs[i].Cases)
		for j := range bs[i].Exits {
			slices.Sort(bs[i].Exits[j].Participants)
		}
	}
	return out
}

// BoxCount is the number of boxes of every cascade.
func BoxCount() int { return len(boxes) }
