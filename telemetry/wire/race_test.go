//go:build race

package wire_test

// raceEnabled: the race detector slows the virtual board far below its real-time pace.
const raceEnabled = true
