package screen

// WindowClass is what the screen made of one window: the five exclusive
// classes of WindowResult, with usable windows split into regular and
// irregular.
type WindowClass uint8

// The window classes, tested in this order as the screen does.
const (
	WindowEmpty     WindowClass = iota // no reading
	WindowTooFew                       // fewer readings than min_readings
	WindowGappy                        // a gap above max_gap_seconds
	WindowActive                       // more steps than max_steps
	WindowRegular                      // usable, MASD below the threshold
	WindowIrregular                    // usable, MASD at or above the threshold
)

// Classify says how the rule treats one window summary at a given MASD
// threshold (the rule's own, or one raised by a personal baseline), for charts
// that mark windows. It follows the order of the counts in WindowResult, so a
// week's classes add up to its result's counts.
func (r WindowRule) Classify(s WindowSummary, threshold float64) WindowClass {
	switch {
	case s.N == 0:
		return WindowEmpty
	case s.N < int32(r.MinReadings):
		return WindowTooFew
	case int64(s.MaxGap) > int64(r.MaxGapSeconds)*1000:
		return WindowGappy
	case s.Steps > float64(r.MaxSteps):
		return WindowActive
	case s.MASD() >= threshold:
		return WindowIrregular
	}
	return WindowRegular
}
