package ecg

// Unexported parts that the external tests (package ecg_test) check directly.
var (
	LowPass        = lowPass
	Median         = median
	SynthesizeStep = synthesize
)
