package telemetry

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"testing"
)

// repeatReader returns the same block of lines for ever, so the benchmark measures the
// Scanner alone, with no allocation or I/O cost in the reader. (t jumps back at each
// block boundary; the parser does not care.)
type repeatReader struct {
	block []byte
	off   int
}

func (r *repeatReader) Read(p []byte) (int, error) {
	n := 0
	for n < len(p) {
		c := copy(p[n:], r.block[r.off:])
		n += c
		r.off += c
		if r.off == len(r.block) {
			r.off = 0
		}
	}
	return n, nil
}

// benchBlock returns lines like "t=3000001000 sp=512 pv=498 u=1" (31 or 32 bytes with
// the newline): a board clock well into its 32-bit range, a period of 1000 µs, pv walking
// around the setpoint and u following it.
func benchBlock(lines int) []byte {
	var b []byte
	for k := 0; k < lines; k++ {
		pv := 490 + k%23
		u := 1
		switch {
		case pv > 514:
			u = -1
		case pv > 510:
			u = 0
		}
		b = append(b, "t="...)
		b = strconv.AppendInt(b, int64(3000000000+1000*k), 10)
		b = append(b, " sp=512 pv="...)
		b = strconv.AppendInt(b, int64(pv), 10)
		b = append(b, " u="...)
		b = strconv.AppendInt(b, int64(u), 10)
		b = append(b, '\n')
	}
	return b
}

// BenchmarkScanner measures the Scanner over realistic data lines held in memory.
// Target: at least 25 million lines per second on one core.
//
//	go test -run x -bench Scanner -cpu 1 ./telemetry/
func BenchmarkScanner(b *testing.B) {
	block := benchBlock(4096)
	sc := NewScanner(&repeatReader{block: block})
	b.SetBytes(int64(len(block) / 4096))
	b.ReportAllocs()
	b.ResetTimer()
	var sum float64
	for i := 0; i < b.N; i++ {
		if !sc.Scan() {
			b.Fatalf("scan stopped: %v", sc.Err())
		}
		sum += sc.Sample().PV
	}
	b.StopTimer()
	if sum == 0 {
		b.Fatal("no data")
	}
	ns := float64(b.Elapsed().Nanoseconds()) / float64(b.N)
	b.ReportMetric(ns, "ns/line")
	b.ReportMetric(1e9/ns, "lines/s")
}

var _ io.Reader = (*repeatReader)(nil)

// BenchmarkScannerFile scans a real file of one million data lines (about 30 MB, written
// once to a temporary directory), read through os.File with the Scanner's own buffer.
func BenchmarkScannerFile(b *testing.B) {
	path := filepath.Join(b.TempDir(), "capture.txt")
	block := benchBlock(10000)
	f, err := os.Create(path)
	if err != nil {
		b.Fatal(err)
	}
	const lines = 1000000
	for range lines / 10000 {
		if _, err := f.Write(block); err != nil {
			b.Fatal(err)
		}
	}
	if err := f.Close(); err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(len(block)) * lines / 10000)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		f, err := os.Open(path)
		if err != nil {
			b.Fatal(err)
		}
		sc := NewScanner(f)
		n := 0
		for sc.Scan() {
			n++
		}
		f.Close()
		if sc.Err() != nil || n != lines {
			b.Fatalf("read %d samples, err %v", n, sc.Err())
		}
	}
	ns := float64(b.Elapsed().Nanoseconds()) / float64(b.N) / lines
	b.ReportMetric(ns, "ns/line")
	b.ReportMetric(1e9/ns, "lines/s")
}

// BenchmarkScannerMixed scans lines the fast path does not take: a CSV table with a
// decimal column and key=value lines with an extra channel.
func BenchmarkScannerMixed(b *testing.B) {
	var block []byte
	block = append(block, "t,sp,pv,u\n"...)
	for k := range 1000 {
		block = fmt.Appendf(block, "%d,512,%d.%d,%d\n", 1000*k, 490+k%23, k%10, k%3-1)
		block = fmt.Appendf(block, "t=%d sp=512 pv=%d u=%d temp=21.%d\n", 1000*k+500, 490+k%23, k%3-1, k%10)
	}
	sc := NewScanner(&repeatReader{block: block})
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if !sc.Scan() {
			b.Fatalf("scan stopped: %v", sc.Err())
		}
	}
	ns := float64(b.Elapsed().Nanoseconds()) / float64(b.N)
	b.ReportMetric(ns, "ns/line")
	b.ReportMetric(1e9/ns, "lines/s")
}

// BenchmarkScannerCapture scans a capture: each board line behind its host time.
func BenchmarkScannerCapture(b *testing.B) {
	data := []byte("#caploop-capture v1 start=2026-12-01T23:40:00.000000Z\n")
	var block []byte
	for k, line := range bytes.Split(benchBlock(4096), []byte{'\n'}) {
		if len(line) == 0 {
			continue
		}
		block = fmt.Appendf(block, "%d.%06d < %s\n", k/1000, k%1000*1000, line)
	}
	sc := NewScanner(io.MultiReader(bytes.NewReader(data), &repeatReader{block: block}))
	b.SetBytes(int64(len(block) / 4096))
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if !sc.Scan() {
			b.Fatalf("scan stopped: %v", sc.Err())
		}
	}
	ns := float64(b.Elapsed().Nanoseconds()) / float64(b.N)
	b.ReportMetric(ns, "ns/line")
	b.ReportMetric(1e9/ns, "lines/s")
}
