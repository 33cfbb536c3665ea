package live

import (
	"bufio"
	"bytes"
	"io"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui/internal/gen"
)

// BenchmarkLiveRecordPTY is `caploop live --record` minus the drawing: generated lines
// go through a real pseudo-terminal (which makes the writer wait while the reader is
// behind, as flow control does) into the Link, which records every line, and on to the
// parser, the analysis and the advice; a consumer takes the snapshots as the screen
// does. It reports the lines per second through the whole path, the lines lost before
// the analysis (Stats.Lost: recorded, not analysed) and the lines missing from the
// capture (must be 0). A benchmark, not a timed test:
//
//	go test ./tui/live -run - -bench LiveRecordPTY -benchtime 1x
func BenchmarkLiveRecordPTY(b *testing.B) {
	const n = 1_000_000
	for i := 0; i < b.N; i++ {
		pt, err := wire.OpenPTY()
		if err != nil {
			b.Skipf("no pseudo-terminal: %v", err)
		}
		rec := filepath.Join(b.TempDir(), "bench.cap")
		p := NewPort(PortOptions{Serial: wire.SerialConfig{Path: pt.Path()}, Record: rec})
		var st Stats
		take := func() {
			<-p.Ready()
			if s := p.Take(); s.Stats != nil {
				st = *s.Stats
			}
		}
		for deadline := time.Now().Add(5 * time.Second); st.State != "connected"; take() {
			if time.Now().After(deadline) {
				b.Fatalf("the link did not connect; state %q", st.State)
			}
		}
		g, err := gen.NewSource(n, 1e-4)
		if err != nil {
			b.Fatal(err)
		}
		start := time.Now()
		werr := make(chan error, 1)
		go func() {
			_, err := io.Copy(pt.Master(), g)
			werr <- err
		}()
		deadline := start.Add(5 * time.Minute)
		for st.Samples+st.Lost < n {
			if time.Now().After(deadline) {
				b.Fatalf("analysed %d and lost %d of %d lines in 5 min", st.Samples, st.Lost, n)
			}
			take()
		}
		el := time.Since(start)
		if err := <-werr; err != nil {
			b.Fatalf("write to the pseudo-terminal: %v", err)
		}
		if err := p.Close(); err != nil {
			b.Fatalf("close: %v", err)
		}
		pt.Close()
		recorded := countData(b, rec)
		b.ReportMetric(float64(n)/el.Seconds(), "lines/s")
		b.ReportMetric(float64(st.Lost), "lost-lines")
		b.ReportMetric(float64(n-recorded), "unrecorded-lines")
		if recorded != n {
			b.Errorf("the capture holds %d of %d data lines", recorded, n)
		}
	}
}

// countData counts the board data lines ("t=" after the capture's time and direction
// fields) in a capture file.
func countData(tb testing.TB, path string) int64 {
	tb.Helper()
	f, err := os.Open(path)
	if err != nil {
		tb.Fatal(err)
	}
	defer f.Close()
	var c int64
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		if bytes.Contains(sc.Bytes(), []byte(" t=")) || bytes.HasPrefix(sc.Bytes(), []byte("t=")) {
			c++
		}
	}
	return c
}
