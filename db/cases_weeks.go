package db

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"cohortdesk/cohort/screen"

	"github.com/jackc/pgx/v5"
)

// The screen-positive weeks of a participant as the case page shows them.

// Metric is one value of a screening result, for display.
type Metric struct {
	Name  string
	Value string
}

// FlaggedWeek is one screen-positive participant-week with its metrics.
type FlaggedWeek struct {
	ProtocolID      int
	ProtocolName    string
	ProtocolVersion int
	Week            int
	Reason          string // the stored technical account
	Why             string // in plain words (screen.Explain); the reason when the result cannot be read
	WearHours       float64
	Metrics         []Metric // the result's scalar values, by name
	CaseID          int64    // the case holding the week, 0 when none does
	Late            bool     // recorded on a case after it was closed
}

// FlaggedWeeks lists a participant's screen-positive weeks under every
// protocol version, with the case holding each.
func (s *Store) FlaggedWeeks(ctx context.Context, participantID int64) ([]FlaggedWeek, error) {
	rows, err := s.reader(ctx).Query(ctx, `
		SELECT sr.protocol_id, pr.name, pr.version, sr.week, sr.reason, sr.wear_hours, sr.result, pr.params,
		       coalesce(cw.case_id, 0), coalesce(cw.late, false)
		FROM screen_results sr
		JOIN protocols pr ON pr.id = sr.protocol_id
		LEFT JOIN case_weeks cw ON cw.participant_id = sr.participant_id AND cw.protocol_id = sr.protocol_id AND cw.week = sr.week
		WHERE sr.participant_id = $1 AND sr.verdict = 'positive'
		ORDER BY sr.week, sr.protocol_id`, participantID)
	if err != nil {
		return nil, mapErr("flagged weeks", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (FlaggedWeek, error) {
		var w FlaggedWeek
		var week int16
		var hours float32
		var raw, params []byte
		if err := r.Scan(&w.ProtocolID, &w.ProtocolName, &w.ProtocolVersion, &week, &w.Reason, &hours, &raw, &params, &w.CaseID, &w.Late); err != nil {
			return w, err
		}
		w.Week, w.WearHours = int(week), float64(hours)
		w.Metrics = metrics(raw)
		w.Why = w.Reason
		var res screen.Result
		var p screen.Protocol
		if json.Unmarshal(raw, &res) == nil && json.Unmarshal(params, &p) == nil && len(res.Windows) == len(p.Windows) && res.Verdict != "" {
			res.Verdict = screen.Positive // the stored verdict, which these rows all have
			w.Why = screen.Explain(res, p)
		}
		return w, nil
	})
	return out, mapErr("flagged weeks", err)
}

// metrics words a stored result's figures for the flagged-weeks table: for
// each window size the irregular windows among the usable ones, the longest
// run and the windows' MASD against the threshold applied; the beat-interval
// figures when the week had beats; how a personal baseline entered. The
// verdict's own wording is the week's reason, shown beside these.
func metrics(raw []byte) []Metric {
	var res screen.Result
	if json.Unmarshal(raw, &res) != nil || (len(res.Windows) == 0 && res.RR == nil) {
		return scalars(raw)
	}
	var out []Metric
	for _, w := range res.Windows {
		if w.Usable == 0 {
			out = append(out, Metric{fmt.Sprintf("%d-minute windows", w.Minutes), "no usable window"})
			continue
		}
		out = append(out, Metric{fmt.Sprintf("%d-minute windows", w.Minutes), fmt.Sprintf(
			"%d of %d usable irregular (%s%%), longest run %d; MASD mean %s, median %s bpm, threshold %s",
			w.Irregular, w.Usable, formatNumber(math.Round(1000*w.Share)/10), w.LongestRun,
			formatNumber(w.MeanMASD), formatNumber(w.MedianMASD), formatNumber(w.Threshold))})
	}
	if r := res.RR; r != nil && r.Beats > 0 {
		out = append(out, Metric{"beat intervals", fmt.Sprintf(
			"%d beats over %s h; %d of %d segments AF-like; mean normalised RMSSD %s, entropy %s, turning point ratio %s",
			r.Beats, formatNumber(r.Hours), r.AFLike, r.Segments, formatNumber(r.MeanNRMSSD), formatNumber(r.MeanEntropy), formatNumber(r.MeanTPR))})
	}
	if b := res.Baseline; b != nil {
		unit := "weeks"
		if b.Weeks == 1 {
			unit = "week"
		}
		out = append(out, Metric{"personal baseline", fmt.Sprintf("%s (%d negative %s)", strings.ReplaceAll(b.Status, "_", " "), b.Weeks, unit)})
	}
	return out
}

// maxScalars bounds the values scalars shows.
const maxScalars = 24

// scalars flattens the scalar values of a result document of another shape
// (one level of nesting, named "outer.inner"), sorted by name, so a result
// the screening code did not write still shows its figures.
func scalars(raw []byte) []Metric {
	var doc map[string]any
	if json.Unmarshal(raw, &doc) != nil {
		return nil
	}
	var out []Metric
	var walk func(prefix string, v any, depth int)
	walk = func(prefix string, v any, depth int) {
		switch x := v.(type) {
		case float64:
			out = append(out, Metric{prefix, formatNumber(x)})
		case string:
			if len(x) <= 80 {
				out = append(out, Metric{prefix, x})
			}
		case bool:
			out = append(out, Metric{prefix, strconv.FormatBool(x)})
		case map[string]any:
			if depth > 0 {
				return
			}
			for k, e := range x {
				walk(prefix+"."+k, e, depth+1)
			}
		}
	}
	for k, v := range doc {
		walk(k, v, 0)
	}
	slices.SortFunc(out, func(a, b Metric) int { return strings.Compare(a.Name, b.Name) })
	if len(out) > maxScalars {
		out = out[:maxScalars]
	}
	return out
}

func formatNumber(x float64) string {
	if x == math.Trunc(x) && math.Abs(x) < 1e15 {
		return strconv.FormatFloat(x, 'f', 0, 64)
	}
	return strconv.FormatFloat(x, 'g', 4, 64)
}
