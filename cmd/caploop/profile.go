package main

import (
	"fmt"
	"os"
	"runtime/pprof"
)

// startProfile writes a CPU profile of the whole run to the file named by the hidden
// environment variable CAPLOOP_CPUPROFILE (for developers: see DEVELOPERS.md, Benchmarks)
// and returns the function that ends it; without the variable it does nothing.
func startProfile() (stop func()) {
	path := os.Getenv("CAPLOOP_CPUPROFILE")
	if path == "" {
		return func() {}
	}
	f, err := os.Create(path)
	if err != nil {
		fmt.Fprintln(os.Stderr, "caploop: CAPLOOP_CPUPROFILE:", err)
		return func() {}
	}
	if err := pprof.StartCPUProfile(f); err != nil {
		fmt.Fprintln(os.Stderr, "caploop: CAPLOOP_CPUPROFILE:", err)
		f.Close()
		return func() {}
	}
	return func() {
		pprof.StopCPUProfile()
		f.Close()
	}
}
