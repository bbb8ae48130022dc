package ecgtest

import (
	"fmt"
	"strings"

	"cohortdesk/cohort/ecg"
)

// EncodeCSV writes w in our waveform CSV format (see ecg.ReadCSV): the rate
// as metadata, then one sample a line in whole microvolts, so ReadCSV gives
// w back to within half a microvolt.
func EncodeCSV(w ecg.Waveform) []byte {
	var b strings.Builder
	fmt.Fprintf(&b, "# sampling_rate_hz=%g\n# unit=uV\nuV\n", w.RateHz)
	for _, v := range w.Samples {
		fmt.Fprintf(&b, "%.0f\n", v*1000)
	}
	return []byte(b.String())
}
