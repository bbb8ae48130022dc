//go:build !race

package demoload

// raceEnabled: the tests run under the race detector.
const raceEnabled = false
