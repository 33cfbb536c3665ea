// Package virtual is caploop's virtual board: a simulated microcontroller that makes a DC
// level by charging a capacitor through a resistor, reads it back with its ADC every sample
// period, and reports it in caploop's line protocol, exactly like real firmware would.
//
// The physics come from analysis/loop (exact at sample instants); this package adds what a
// board adds around it: a boot banner of meta lines, a board clock t in microseconds that
// wraps at 2^32, a sequence number n, a setpoint profile, answers to host `set` lines, and
// misbehaviour on request (noise bursts, garbage bytes, a reset mid-line, an unplug and a
// re-plug), all deterministic from the scenario's seed.
//
// A board can write to any io.Writer as fast as possible (captures, tests) or in real time,
// stream into the process (Stream, for the demo screen), or serve a pseudo-terminal behind a
// stable path (Serve), so that any serial program can open it as if a board were on USB:
//
//	sc := virtual.DefaultScenario()
//	sc.Samples = 2000
//	b, err := virtual.NewBoard(sc)
//	if err != nil { ... }
//	err = b.Run(ctx, os.Stdout, false) // meta lines, then 2000 data lines
//
// The demo and test captures in the repository's testdata directory come from Captures;
// regenerate them with `go run ./testdata/gen` from the module root (or go generate here).
package virtual

//go:generate go run ../../testdata/gen -dir ../../testdata
