package ecg

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"
)

// The times of an EDF file: the header's start date and time, and the
// onsets of EDF+ time-keeping annotations.

var edfMonths = map[string]time.Month{
	"JAN": 1, "FEB": 2, "MAR": 3, "APR": 4, "MAY": 5, "JUN": 6,
	"JUL": 7, "AUG": 8, "SEP": 9, "OCT": 10, "NOV": 11, "DEC": 12,
}

// edfStart reads the start date (dd.mm.yy) and time (hh.mm.ss). Two-digit
// years 85-99 are 1985-1999 and 00-84 are 2000-2084 (the EDF+ clipping rule,
// from memory);
// in EDF+ the recording field "Startdate dd-MMM-yyyy" gives the full year, and
// "Startdate X" says the date is unknown, which yields the zero time.
func edfStart(dateF, timeF []byte, plus bool, recording string, loc *time.Location) (time.Time, error) {
	if loc == nil {
		loc = time.UTC
	}
	two := func(b []byte) (int, bool) {
		if b[0] < '0' || b[0] > '9' || b[1] < '0' || b[1] > '9' {
			return 0, false
		}
		return int(b[0]-'0')*10 + int(b[1]-'0'), true
	}
	fullYear := 0
	if plus {
		fs := strings.Fields(recording)
		if len(fs) >= 2 && fs[0] == "Startdate" {
			if fs[1] == "X" {
				return time.Time{}, nil
			}
			p := strings.Split(fs[1], "-")
			if len(p) == 3 && len(p[2]) == 4 {
				if y, err := strconv.Atoi(p[2]); err == nil {
					if _, ok := edfMonths[strings.ToUpper(p[1])]; ok {
						fullYear = y
					}
				}
			}
		}
	}
	if dateF[2] != '.' || dateF[5] != '.' {
		return time.Time{}, &fieldErr{"startdate", edfOffStartDate, fmt.Errorf("%q, want dd.mm.yy", edfText(dateF))}
	}
	day, ok1 := two(dateF[0:2])
	mon, ok2 := two(dateF[3:5])
	yy, ok3 := two(dateF[6:8])
	if !ok3 && string(dateF[6:8]) == "yy" && fullYear != 0 {
		ok3 = true
	}
	if !ok1 || !ok2 || !ok3 {
		return time.Time{}, &fieldErr{"startdate", edfOffStartDate, fmt.Errorf("%q, want dd.mm.yy", edfText(dateF))}
	}
	year := 1900 + yy
	if yy < 85 {
		year = 2000 + yy
	}
	if fullYear != 0 {
		year = fullYear
	}
	if timeF[2] != '.' || timeF[5] != '.' {
		return time.Time{}, &fieldErr{"starttime", edfOffStartTime, fmt.Errorf("%q, want hh.mm.ss", edfText(timeF))}
	}
	hh, ok1 := two(timeF[0:2])
	mm, ok2 := two(timeF[3:5])
	ss, ok3 := two(timeF[6:8])
	if !ok1 || !ok2 || !ok3 || hh > 23 || mm > 59 || ss > 59 {
		return time.Time{}, &fieldErr{"starttime", edfOffStartTime, fmt.Errorf("%q, want hh.mm.ss", edfText(timeF))}
	}
	t := time.Date(year, time.Month(mon), day, hh, mm, ss, 0, loc)
	if mon < 1 || mon > 12 || t.Day() != day {
		return time.Time{}, &fieldErr{"startdate", edfOffStartDate, fmt.Errorf("%q is not a calendar date", edfText(dateF))}
	}
	return t, nil
}

// talOnset reads the onset of the first time-stamped annotation list in an
// EDF+ annotation signal: a sign, decimal seconds, then byte 20 or 21.
func talOnset(b []byte) (float64, error) {
	if len(b) == 0 || (b[0] != '+' && b[0] != '-') {
		return 0, errors.New("does not start with + or -")
	}
	end := -1
	for i := 1; i < len(b) && i < 64; i++ {
		if b[i] == 20 || b[i] == 21 {
			end = i
			break
		}
		if !(b[i] >= '0' && b[i] <= '9' || b[i] == '.') {
			return 0, fmt.Errorf("onset contains byte %d", b[i])
		}
	}
	if end < 2 {
		return 0, errors.New("onset is not terminated")
	}
	v, err := strconv.ParseFloat(string(b[:end]), 64)
	if err != nil {
		return 0, fmt.Errorf("onset %q is not a number", string(b[:end]))
	}
	return v, nil
}
