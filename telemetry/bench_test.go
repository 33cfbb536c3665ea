package telemetry

import (
	"io"
	"strconv"
	"testing"
)

// repeatReader returns the same block of lines for ever, with t advancing across
// blocks only in its first line's digits being unchanged: the parser sees a realistic
// mix of line lengths without any allocation or I/O cost in the reader.
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

// benchBlock returns lines like "t=123456 sp=512 pv=498 u=1" (about 27 to 32 bytes),
// a period of 1000 µs, pv walking around the setpoint and u following it.
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
		b = strconv.AppendInt(b, int64(1000000+1000*k), 10)
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
