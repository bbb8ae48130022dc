package wear

import (
	"fmt"
	"math/rand/v2"
	"strconv"
	"time"

	"cohortdesk/cohort"
)

// Synthetic data for tests and benchmarks. Everything here is invented.

// genStart is an arbitrary Monday in the study period.
var genStart = time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC).UnixMilli()

// realisticHR makes a heart-rate series as a wrist device records it over
// `days` days: every 2 to 10 minutes at rest, every 1 to 5 seconds during one
// 30-60 minute exercise session a day, values wandering a few bpm per reading.
// With msJitter the timestamps carry milliseconds; without, whole seconds.
func realisticHR(rng *rand.Rand, days int, msJitter bool) cohort.Samples {
	var s cohort.Samples
	t := genStart
	hr := int32(62)
	for d := 0; d < days; d++ {
		dayEnd := genStart + int64(d+1)*86400000
		exStart := genStart + int64(d)*86400000 + int64(7+rng.IntN(12))*3600000
		exEnd := exStart + int64(30+rng.IntN(31))*60000
		for t < dayEnd {
			var step int64
			if t >= exStart && t < exEnd {
				step = int64(1+rng.IntN(5)) * 1000
				hr += int32(rng.IntN(5)) - 2
				hr = max(min(hr, 165), 95)
			} else {
				step = int64(120+rng.IntN(481)) * 1000
				hr += int32(rng.IntN(7)) - 3
				hr = max(min(hr, 80), 50)
			}
			if msJitter {
				step += int64(rng.IntN(1000)) - 500
			}
			t += step
			s.Append(t, hr)
		}
	}
	return s
}

// stepsSeries makes per-minute step counts while moving, for `days` days.
func stepsSeries(rng *rand.Rand, days int) cohort.Samples {
	var s cohort.Samples
	for d := 0; d < days; d++ {
		t := genStart + int64(d)*86400000 + 7*3600000
		for i := 0; i < 200; i++ {
			t += int64(1+rng.IntN(5)) * 60000
			s.AppendInterval(t, t+60000, int32(rng.IntN(130)))
		}
	}
	return s
}

// genCSV writes n readings in the readings CSV format: participants in turn,
// each with a run of readings a few seconds to minutes apart, mostly heart
// rate, some steps and RR intervals, offsets of several zones.
func genCSV(n int) []byte {
	rng := rand.New(rand.NewPCG(7, 8))
	b := make([]byte, 0, n*62)
	b = append(b, "study_id,time,kind,value,end_time\n"...)
	offsets := []string{"-05:00", "Z", "+01:00", "-08:00"}
	var t int64
	var id int
	for i := 0; i < n; i++ {
		if i%5000 == 0 {
			id++
			t = genStart + int64(rng.IntN(86400))*1000
		}
		t += int64(1+rng.IntN(300)) * 1000
		off := offsets[id%len(offsets)]
		b = append(b, "S-"...)
		b = strconv.AppendInt(b, int64(10000+id), 10)
		b = append(b, ',')
		b = appendTime(b, t, off)
		switch k := rng.IntN(20); {
		case k < 17:
			b = append(b, ",heart_rate,"...)
			b = strconv.AppendInt(b, int64(55+rng.IntN(60)), 10)
			b = append(b, ",\n"...)
		case k < 19:
			b = append(b, ",steps,"...)
			b = strconv.AppendInt(b, int64(rng.IntN(120)), 10)
			b = append(b, ',')
			b = appendTime(b, t+60000, off)
			b = append(b, '\n')
		default:
			b = append(b, ",rr_interval,"...)
			b = strconv.AppendInt(b, int64(600+rng.IntN(500)), 10)
			b = append(b, ",\n"...)
		}
	}
	return b
}

func appendTime(b []byte, ms int64, off string) []byte {
	loc := time.UTC
	if off != "Z" {
		sign := 1
		if off[0] == '-' {
			sign = -1
		}
		h, _ := strconv.Atoi(off[1:3])
		loc = time.FixedZone("", sign*h*3600)
	}
	return time.UnixMilli(ms).In(loc).AppendFormat(b, time.RFC3339)
}

// genBundle writes a collection Bundle of n Observations, alternately heart
// rate and steps, one entry per line starting on line 2.
func genBundle(n int) []byte {
	b := []byte(`{"resourceType":"Bundle","type":"collection","entry":[` + "\n")
	for i := 0; i < n; i++ {
		t := time.UnixMilli(genStart + int64(i)*5000).UTC()
		if i%2 == 0 {
			b = fmt.Appendf(b, `{"fullUrl":"urn:uuid:gen-%d","resource":{"resourceType":"Observation","status":"final",`+
				`"category":[{"coding":[{"system":"http://terminology.hl7.org/CodeSystem/observation-category","code":"vital-signs"}]}],`+
				`"code":{"coding":[{"system":"http://loinc.org","code":"8867-4","display":"Heart rate"}]},`+
				`"subject":{"reference":"Patient/S-%d"},"effectiveDateTime":"%s",`+
				`"valueQuantity":{"value":%d,"unit":"beats/minute","system":"http://unitsofmeasure.org","code":"/min"}}}`,
				i, 10000+i%50, t.Format(time.RFC3339), 60+i%40)
		} else {
			b = fmt.Appendf(b, `{"fullUrl":"urn:uuid:gen-%d","resource":{"resourceType":"Observation","status":"final",`+
				`"category":[{"coding":[{"system":"http://terminology.hl7.org/CodeSystem/observation-category","code":"activity"}]}],`+
				`"code":{"coding":[{"system":"http://loinc.org","code":"55423-8","display":"Number of steps"}]},`+
				`"subject":{"reference":"Patient/S-%d"},"effectivePeriod":{"start":"%s","end":"%s"},`+
				`"valueQuantity":{"value":%d,"unit":"steps","system":"http://unitsofmeasure.org","code":"{steps}"}}}`,
				i, 10000+i%50, t.Format(time.RFC3339), t.Add(time.Minute).Format(time.RFC3339), i%100)
		}
		if i < n-1 {
			b = append(b, ',')
		}
		b = append(b, '\n')
	}
	return append(b, "]}\n"...)
}
