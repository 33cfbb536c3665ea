package analysis

import (
	"os"
	"testing"

	"github.com/caploop/caploop/telemetry"
)

// BenchmarkSummarizeFile measures the whole-file pass over the capture named by the
// environment variable CAPLOOP_BENCH_FILE (for example the file testdata/bench/wholefile.sh
// makes); ns/op is per line. It skips when the variable is unset.
func BenchmarkSummarizeFile(b *testing.B) {
	name := benchFile(b)
	var lines int64
	for done := 0; done < b.N; done += int(lines) {
		f, err := os.Open(name)
		if err != nil {
			b.Fatal(err)
		}
		sc := telemetry.NewScanner(f)
		_, err = Summarize(sc, Options{})
		f.Close()
		if err != nil {
			b.Fatal(err)
		}
		lines = max(1, sc.Stats().Lines)
	}
}

// BenchmarkScanFile measures the parse alone over the same capture (the lower bound of
// the whole-file pass); ns/op is per line.
func BenchmarkScanFile(b *testing.B) {
	name := benchFile(b)
	var lines int64
	for done := 0; done < b.N; done += int(lines) {
		f, err := os.Open(name)
		if err != nil {
			b.Fatal(err)
		}
		sc := telemetry.NewScanner(f)
		var sum float64
		for sc.Scan() {
			if sc.Kind() == telemetry.RecSample {
				sum += sc.Sample().PV
			}
		}
		f.Close()
		if sc.Err() != nil {
			b.Fatal(sc.Err())
		}
		lines = max(1, sc.Stats().Lines)
	}
}

// benchFile returns the capture named by CAPLOOP_BENCH_FILE, or skips the benchmark.
func benchFile(b *testing.B) string {
	name := os.Getenv("CAPLOOP_BENCH_FILE")
	if name == "" {
		b.Skip("CAPLOOP_BENCH_FILE is not set: no capture to read")
	}
	return name
}
