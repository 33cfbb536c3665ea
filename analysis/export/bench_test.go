package export_test

import (
	"bytes"
	"io"
	"strconv"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis/export"
	"github.com/caploop/caploop/telemetry"
)

const benchLines = 500_000

// benchInput makes benchLines lines of a three-state loop in the canonical layout (or as
// a capture, or with two extra channels), with the meta line first.
func benchInput(kind string) []byte {
	var b bytes.Buffer
	b.Grow(benchLines * 60)
	var cw *telemetry.CaptureWriter
	if kind == "capture" {
		cw, _ = telemetry.NewCaptureWriter(&b, time.Date(2026, 3, 1, 9, 0, 0, 0, time.UTC))
	}
	line := func(at int, s string) {
		if cw != nil {
			cw.Write(time.Duration(at)*time.Millisecond, telemetry.FromBoard, []byte(s))
			return
		}
		b.WriteString(s)
		b.WriteByte('\n')
	}
	line(0, "# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=9")
	pv := 200
	var l []byte
	for i := 1; i < benchLines; i++ {
		sp := 246 + 164*(i/2000%3)
		u := 0
		switch {
		case pv < sp-9:
			u, pv = 1, pv+7
		case pv > sp+9:
			u, pv = -1, pv-6
		default:
			pv -= i % 3 / 2
		}
		l = append(l[:0], "t="...)
		l = strconv.AppendInt(l, int64(1000*i+i%7), 10)
		l = append(l, " n="...)
		l = strconv.AppendInt(l, int64(i), 10)
		l = append(l, " sp="...)
		l = strconv.AppendInt(l, int64(sp), 10)
		l = append(l, " pv="...)
		l = strconv.AppendInt(l, int64(pv), 10)
		l = append(l, " u="...)
		l = strconv.AppendInt(l, int64(u), 10)
		if kind == "extras" {
			l = append(l, " temp_c=21."...)
			l = strconv.AppendInt(l, int64(i%10), 10)
			l = append(l, " i_ma="...)
			l = strconv.AppendInt(l, int64(i%50), 10)
		}
		line(i, string(l))
	}
	if cw != nil {
		cw.Flush()
	}
	return b.Bytes()
}

var benchInputs sync.Map

func benchExport(b *testing.B, kind string, writeOnly bool) {
	v, ok := benchInputs.Load(kind)
	if !ok {
		v, _ = benchInputs.LoadOrStore(kind, benchInput(kind))
	}
	in := v.([]byte)
	l, err := export.Survey(telemetry.NewScanner(bytes.NewReader(in)))
	if err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(len(in)))
	cpu0 := cpuTime()
	b.ResetTimer()
	for range b.N {
		if !writeOnly {
			if l, err = export.Survey(telemetry.NewScanner(bytes.NewReader(in))); err != nil {
				b.Fatal(err)
			}
		}
		res, err := export.Write(io.Discard, telemetry.NewScanner(bytes.NewReader(in)), l, export.Options{})
		if err != nil || res.Rows != benchLines-1 {
			b.Fatalf("%+v %v", res, err)
		}
	}
	b.StopTimer()
	b.ReportMetric(float64(b.N)*benchLines/b.Elapsed().Seconds(), "lines/s")
	// The same per second of this process's CPU time, which a busy machine disturbs
	// less than the wall clock.
	if cpu := cpuTime() - cpu0; cpu > 0 {
		b.ReportMetric(float64(b.N)*benchLines/cpu.Seconds(), "lines/cpu-s")
	}
}

// cpuTime returns the user and system CPU time of the process so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// BenchmarkExport times both passes (survey and write) of a plain telemetry file: the
// lines/s figure is lines of input per second for the whole export.
func BenchmarkExport(b *testing.B)        { benchExport(b, "plain", false) }
func BenchmarkExportCapture(b *testing.B) { benchExport(b, "capture", false) }
func BenchmarkExportExtras(b *testing.B)  { benchExport(b, "extras", false) }

// BenchmarkExportWrite times the second pass alone (parse, format, write).
func BenchmarkExportWrite(b *testing.B) { benchExport(b, "plain", true) }
