package bench

import (
	"bufio"
	"fmt"
	"math/rand/v2"
	"os"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/wear"
)

// The synthetic watch: what one participant-week of wear data looks like.
// The figures are ours, chosen to resemble a consumer watch's export - heart
// rate every few minutes while awake and less often at night, one denser
// stretch each night, steps over quarter hours while awake - so that a week
// holds a couple of thousand readings and the screen's 30-minute windows are
// mostly usable. They are not measurements of any device.
const (
	awakeFrom, awakeTo = 7, 23 // hours of the day
	awakeGapMin        = 5     // minutes between heart-rate readings while awake: 5 to 11
	awakeGapSpan       = 7
	nightGapMin        = 10 // at night: 10 to 20 minutes
	nightGapSpan       = 11
	denseHour          = 2  // the nightly dense stretch starts at 02:00
	denseMinutes       = 30 // and lasts half an hour
	denseEvery         = 15 * time.Second
	stepsEvery         = 15 * time.Minute
	irregularShare     = 3 // per cent of participant-weeks with an AF-like episode
	episodeDay         = 3 // the episode starts on the fourth night of the week
	episodeHour        = 22
	episodeHours       = 8
)

// irregularWeek says whether a participant-week carries an AF-like episode:
// about irregularShare per cent of them, fixed by the seed.
func irregularWeek(seed uint64, participant int64, week int) bool {
	r := rand.New(rand.NewPCG(seed^0x9e3779b97f4a7c15, uint64(participant)<<8|uint64(week)))
	return r.IntN(100) < irregularShare
}

// synthWeek generates one participant-week of fictional readings in UTC from
// start (the week's first instant). The heart rate is a bounded random walk
// around a resting level; in an irregular week it jumps at random between 70
// and 130 bpm for episodeHours, as irregular rhythms make it do.
func synthWeek(seed uint64, participant int64, week int, start time.Time) cohort.Week {
	r := rand.New(rand.NewPCG(seed, uint64(participant)<<8|uint64(week)))
	irregular := irregularWeek(seed, participant, week)
	t0 := start.UnixMilli()
	w := cohort.Week{Week: week, Start: t0, End: t0 + 7*24*3600_000}
	w.HR.T = make([]int64, 0, 2600)
	w.HR.V = make([]int32, 0, 2600)
	rest := int32(58 + r.IntN(16))
	hr := rest
	epStart := t0 + int64(episodeDay*24+episodeHour)*3600_000
	epEnd := epStart + episodeHours*3600_000
	walk := func(at int64, active bool) int32 {
		if irregular && at >= epStart && at < epEnd {
			return int32(70 + r.IntN(61))
		}
		target := rest
		if active {
			target = rest + 35
		}
		hr += int32(r.IntN(5)) - 2 + (target-hr)/6
		return min(max(hr, 40), 180)
	}
	const minute = 60_000
	for day := 0; day < 7; day++ {
		d0 := t0 + int64(day)*24*3600_000
		walkHour := awakeFrom + 2 + r.IntN(10) // one brisk walk a day
		at := d0 + int64(r.IntN(5))*minute
		for at < d0+24*3600_000 {
			h := int((at - d0) / 3600_000)
			awake := h >= awakeFrom && h < awakeTo
			if h == denseHour && at < d0+int64(denseHour)*3600_000+denseMinutes*minute {
				w.HR.Append(at, walk(at, false))
				at += denseEvery.Milliseconds() + int64(r.IntN(2000))
				continue
			}
			w.HR.Append(at, walk(at, awake && h == walkHour))
			if awake {
				at += int64(awakeGapMin+r.IntN(awakeGapSpan))*minute + int64(r.IntN(60_000))
			} else {
				at += int64(nightGapMin+r.IntN(nightGapSpan))*minute + int64(r.IntN(60_000))
			}
			// The dense stretch begins on the hour, whatever the spacing before it.
			if ds := d0 + int64(denseHour)*3600_000; at > ds && at-ds < denseMinutes*minute && h < denseHour {
				at = ds
			}
		}
		for h := awakeFrom; h < awakeTo; h++ {
			for q := int64(0); q < 4; q++ {
				s := d0 + int64(h)*3600_000 + q*stepsEvery.Milliseconds()
				n := int32(r.IntN(120))
				if h == walkHour {
					n = int32(900 + r.IntN(700))
				}
				w.Steps.AppendInterval(s, s+stepsEvery.Milliseconds(), n)
			}
		}
	}
	return w
}

// wearFile is a readings CSV of the participants with wear data.
type wearFile struct {
	Path     string
	Bytes    int64
	Readings int64
	HR       int64 // heart-rate readings among them
	Weeks    int   // participant-weeks
}

// writeWearFile writes every week of every participant in ps as one readings
// CSV in dir, in the documented format.
func writeWearFile(dir string, seed uint64, ps []synthParticipant, weeks int) (wearFile, error) {
	f, err := os.CreateTemp(dir, "synthetic-readings-*.csv")
	if err != nil {
		return wearFile{}, fmt.Errorf("bench: readings file: %w", err)
	}
	out := wearFile{Path: f.Name()}
	bw := bufio.NewWriterSize(f, 1<<20)
	_, _ = bw.WriteString("study_id,time,kind,value,end_time\n")
	var line []byte
	for _, p := range ps {
		for wk := 0; wk < weeks; wk++ {
			start, _ := cohort.WeekBounds(p.Enrolled, time.UTC, wk)
			w := synthWeek(seed, p.ID, wk, start)
			for i, t := range w.HR.T {
				line = appendRow(line[:0], p.StudyID, t, "heart_rate", w.HR.V[i], 0)
				_, _ = bw.Write(line)
			}
			for i, t := range w.Steps.T {
				line = appendRow(line[:0], p.StudyID, t, "steps", w.Steps.V[i], w.Steps.End[i])
				_, _ = bw.Write(line)
			}
			out.HR += int64(w.HR.Len())
			out.Readings += int64(w.HR.Len() + w.Steps.Len())
			out.Weeks++
		}
	}
	if err := bw.Flush(); err != nil {
		f.Close()
		return out, fmt.Errorf("bench: readings file: %w", err)
	}
	st, err := f.Stat()
	if err == nil {
		out.Bytes = st.Size()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return out, fmt.Errorf("bench: readings file: %w", err)
	}
	return out, nil
}

// appendRow formats one CSV line; times in RFC 3339 UTC with milliseconds
// when they have them.
func appendRow(b []byte, studyID string, t int64, kind string, v int32, end int64) []byte {
	b = append(b, studyID...)
	b = append(b, ',')
	b = appendTime(b, t)
	b = append(b, ',')
	b = append(b, kind...)
	b = append(b, ',')
	b = strconv.AppendInt(b, int64(v), 10)
	b = append(b, ',')
	if end != 0 {
		b = appendTime(b, end)
	}
	return append(b, '\n')
}

func appendTime(b []byte, ms int64) []byte {
	t := time.UnixMilli(ms).UTC()
	if ms%1000 != 0 {
		return t.AppendFormat(b, "2006-01-02T15:04:05.000Z07:00")
	}
	return t.AppendFormat(b, time.RFC3339)
}

// plainRows holds parsed readings column by column, compactly, for the COPY
// baseline: parsing is done before the clock starts, so COPY gets rows ready
// to send, the fastest case for it.
type plainRows struct {
	pid  []int64
	t    []int64
	kind []int16
	v    []int32
	end  []int64
}

// parseWearFile reads the readings file back into plainRows, mapping study
// IDs to participant ids.
func parseWearFile(path string, ids map[string]int64, hint int64) (*plainRows, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("bench: %w", err)
	}
	defer f.Close()
	p := &plainRows{pid: make([]int64, 0, hint), t: make([]int64, 0, hint), kind: make([]int16, 0, hint),
		v: make([]int32, 0, hint), end: make([]int64, 0, hint)}
	src := wear.NewCSVReader(bufio.NewReaderSize(f, 1<<20), "synthetic.csv")
	for src.Next() {
		if rej := src.Rejection(); rej != nil {
			return nil, fmt.Errorf("bench: generated row refused at line %d: %s", rej.Line, rej.Msg)
		}
		r := src.Row()
		id, ok := ids[r.StudyID]
		if !ok {
			return nil, fmt.Errorf("bench: unknown study ID %q in the generated file", r.StudyID)
		}
		p.pid = append(p.pid, id)
		p.t = append(p.t, r.T)
		p.kind = append(p.kind, int16(r.Kind))
		p.v = append(p.v, r.V)
		p.end = append(p.end, r.End)
	}
	if err := src.Err(); err != nil {
		return nil, fmt.Errorf("bench: %w", err)
	}
	return p, nil
}

// copySource streams plainRows to pgx CopyFrom, reusing one row buffer.
type copySource struct {
	p   *plainRows
	i   int
	row []any
}

func (c *copySource) Next() bool { c.i++; return c.i <= len(c.p.t) }

func (c *copySource) Values() ([]any, error) {
	i := c.i - 1
	var end any
	if c.p.end[i] != 0 {
		end = c.p.end[i]
	}
	c.row[0], c.row[1], c.row[2], c.row[3], c.row[4] = c.p.pid[i], c.p.t[i], c.p.kind[i], c.p.v[i], end
	return c.row, nil
}

func (c *copySource) Err() error { return nil }
