package tui

import (
	"syscall"
	"time"
)

// threadCPU returns the CPU time (user and system) of the calling thread; the caller
// locks its goroutine to the thread. On a loaded machine it measures the work, not the
// wait for a core.
func threadCPU() time.Duration {
	var ru syscall.Rusage
	const rusageThread = 1 // RUSAGE_THREAD, Linux
	if err := syscall.Getrusage(rusageThread, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
