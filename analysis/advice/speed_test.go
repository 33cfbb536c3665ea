package advice

import (
	"path/filepath"
	"runtime"
	"syscall"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis/loop"
)

// cpuTime is the process's user + system CPU time: the budget figure on a shared machine,
// where wall time also counts other programs.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// e96Request is `caploop design --series E96`: E96 resistors with E24 capacitors.
func e96Request() Request {
	return Request{SupplyV: 5, Bits: 10, PeriodS: 1e-3, Mode: loop.ThreeState,
		Goals: Goals{RippleV: 0.1, R: Parts{Series: "E96"}, C: Parts{Series: "E24"}}}
}

// BenchmarkDesignE96 is `design --series E96` (about 37 000 pairs). Targets: under 300 ms
// and 64 MiB. It reports the CPU time per op beside the wall time, and the bytes
// allocated per op (an upper bound of the heap it needs).
func BenchmarkDesignE96(b *testing.B) {
	req := e96Request()
	b.ReportAllocs()
	c0 := cpuTime()
	for b.Loop() {
		if _, err := Design(req); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(cpuTime()-c0)/1e6/float64(b.N), "cpu-ms/op")
}

// BenchmarkSummaryAdvice is the advice's share of `caploop summary` on a 6000-line
// capture: the summary alone, then the advice on it. Target: the advice under 40 ms.
func BenchmarkSummaryAdvice(b *testing.B) {
	path := filepath.Join("..", "..", "testdata", "three-state-good.txt")
	t := &testing.T{}
	c0 := cpuTime()
	s := summarize(t, path)
	sum := float64(cpuTime()-c0) / 1e6
	b.ResetTimer()
	c0 = cpuTime()
	for b.Loop() {
		if _, err := FromSummary(s, Goals{}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(cpuTime()-c0)/1e6/float64(b.N), "advice-cpu-ms/op")
	b.ReportMetric(sum, "summary-cpu-ms")
}

// The E96 search stays inside its memory budget: everything it allocates in one design
// (an upper bound of the heap it needs at once) is under 64 MiB.
func TestDesignE96Memory(t *testing.T) {
	if testing.Short() {
		t.Skip("-short: the E96 search takes a few hundred ms")
	}
	var m0, m1 runtime.MemStats
	runtime.ReadMemStats(&m0)
	a, err := Design(e96Request())
	runtime.ReadMemStats(&m1)
	if err != nil {
		t.Fatal(err)
	}
	alloc := m1.TotalAlloc - m0.TotalAlloc
	t.Logf("E96: %d pairs tried, %.1f MiB allocated", a.Search.PairsTried, float64(alloc)/(1<<20))
	if a.Search.PairsTried < 30000 {
		t.Errorf("only %d pairs tried: not the full E96 x E24 search", a.Search.PairsTried)
	}
	if alloc > 64<<20 {
		t.Errorf("E96 design allocated %.1f MiB, budget 64 MiB", float64(alloc)/(1<<20))
	}
}
