//go:build race

package demoload

// raceEnabled: the tests run under the race detector, which makes the larger
// demo loads take minutes.
const raceEnabled = true
