package telemetry

import (
	"errors"
	"fmt"
	"io"
	"math"
	"reflect"
	"runtime"
	"strings"
	"testing"
	"testing/iotest"
	"time"
)

func TestScannerStrict(t *testing.T) {
	sc := NewScanner(strings.NewReader("sp=1 pv=2\nsp=1 pv=oops\nsp=3 pv=4\n"))
	sc.Name = "bench.txt"
	sc.Strict = true
	var n int
	for sc.Scan() {
		n++
	}
	if n != 1 {
		t.Errorf("read %d samples before the bad line, want 1", n)
	}
	var pe *ParseError
	if err := sc.Err(); !errors.As(err, &pe) || !errors.Is(err, ErrBadNumber) {
		t.Fatalf("Err() = %v, want a *ParseError wrapping ErrBadNumber", err)
	}
	if pe.Line != 2 || pe.Field != "pv" || pe.Name != "bench.txt" {
		t.Errorf("ParseError = %+v, want bench.txt line 2 field pv", pe)
	}
	if sc.Kind() != RecRejected {
		t.Errorf("Kind() = %v after a strict stop, want rejected", sc.Kind())
	}
	if sc.Scan() {
		t.Error("Scan() = true after a strict stop")
	}
}

func TestScannerReadErrors(t *testing.T) {
	errUnplug := errors.New("port gone")
	tests := []struct {
		name     string
		r        io.Reader
		samples  int
		wantErr  error
		partial  int64
		rejected int64
	}{
		{
			// Lines before the error are still returned; the piece after the last
			// newline was cut by the error and is dropped.
			name:     "error mid-line",
			r:        io.MultiReader(strings.NewReader("sp=1 pv=2\nsp=3 pv=4\nsp=5 pv=4"), iotest.ErrReader(errUnplug)),
			samples:  2,
			wantErr:  errUnplug,
			partial:  1,
			rejected: 1,
		},
		{
			name:    "error with the data",
			r:       iotest.DataErrReader(strings.NewReader("sp=1 pv=2\n")),
			samples: 1,
		},
		{
			name:    "one byte at a time",
			r:       iotest.OneByteReader(strings.NewReader("t=1 sp=1 pv=2\r\nt=2 sp=1 pv=2")),
			samples: 2,
		},
		{
			name:    "reader that never makes progress",
			r:       zeroReader{},
			wantErr: io.ErrNoProgress,
		},
		{
			// Any read error other than io.EOF stops the scan, after the lines read.
			name:    "timeout reader",
			r:       iotest.TimeoutReader(strings.NewReader("sp=1 pv=2\nsp=1 pv=2\n")),
			samples: 2,
			wantErr: iotest.ErrTimeout,
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			sc := NewScanner(tc.r)
			n := 0
			for sc.Scan() {
				n++
			}
			if n != tc.samples {
				t.Errorf("samples = %d, want %d", n, tc.samples)
			}
			if err := sc.Err(); !errors.Is(err, tc.wantErr) || (tc.wantErr == nil && err != nil) {
				t.Errorf("Err() = %v, want %v", err, tc.wantErr)
			}
			st := sc.Stats()
			checkStats(t, st)
			if st.Partial != tc.partial || st.Rejected != tc.rejected {
				t.Errorf("partial, rejected = %d, %d, want %d, %d", st.Partial, st.Rejected, tc.partial, tc.rejected)
			}
		})
	}
}

type zeroReader struct{}

func (zeroReader) Read([]byte) (int, error) { return 0, nil }

// hugeLineReader yields size bytes of 'a' with no newline, then tail, without ever
// holding more than one small block: the input of a 1 GB line is never in memory.
type hugeLineReader struct {
	left int64
	tail *strings.Reader
}

func (r *hugeLineReader) Read(p []byte) (int, error) {
	if r.left == 0 {
		return r.tail.Read(p)
	}
	n := int64(len(p))
	if n > r.left {
		n = r.left
	}
	for i := range p[:n] {
		p[i] = 'a'
	}
	r.left -= n
	return int(n), nil
}

func TestScannerHugeLineBoundedMemory(t *testing.T) {
	size := int64(1 << 30) // 1 GiB with no newline
	if testing.Short() {
		size = 64 << 20
	}
	r := &hugeLineReader{left: size, tail: strings.NewReader("\nsp=1 pv=2\n")}
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	sc := NewScanner(r)
	n := 0
	for sc.Scan() {
		n++
	}
	runtime.ReadMemStats(&after)
	if err := sc.Err(); err != nil {
		t.Fatalf("Err() = %v", err)
	}
	st := sc.Stats()
	if n != 1 || st.Rejected != 1 || st.Lines != 2 {
		t.Errorf("samples %d, stats %+v, want 1 sample, 1 rejected, 2 lines", n, st)
	}
	if len(st.FirstRejects) != 1 || !errors.Is(st.FirstRejects[0], ErrTooLong) || len(st.FirstRejects[0].Text) > 100 {
		t.Errorf("rejects = %v, want one short ErrTooLong", st.FirstRejects)
	}
	// The scanner's buffer is 256 KiB; allow 1 MiB of allocation in all.
	if got := after.TotalAlloc - before.TotalAlloc; got > 1<<20 {
		t.Errorf("allocated %d bytes for a %d-byte line, want at most 1 MiB", got, size)
	}
}

func TestScannerNoAllocs(t *testing.T) {
	block := benchBlock(1000)
	for range 20 { // the other kinds of lines must not allocate either
		block = append(block, "sp=1 pv=2 temp=20.5\n# a comment about the bench reference\n\nt,sp,pv\n1,2,3.5\nsp=1.5 pv=x\n"...)
	}
	sc := NewScanner(&repeatReader{block: block})
	for range 5000 { // warm up: buffer, interned names
		sc.Scan()
	}
	allocs := testing.AllocsPerRun(10000, func() {
		if !sc.Scan() {
			t.Fatal("scan stopped")
		}
	})
	if allocs != 0 {
		t.Errorf("Scan allocates %v times per line, want 0", allocs)
	}
	// AllocsPerRun rounds down; count every allocation over 20000 lines too.
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	for range 20000 {
		sc.Scan()
	}
	runtime.ReadMemStats(&after)
	if n := after.Mallocs - before.Mallocs; n != 0 {
		t.Errorf("20000 scans allocated %d times, want 0", n)
	}
}

func TestScannerDeterministic(t *testing.T) {
	in := "#caploop-capture v1 start=2026-12-01T23:40:00Z\n" +
		"0.001 < # vref=5 adc_bits=10 period_us=1000\n"
	for k := range 500 {
		in += fmt.Sprintf("%d.%06d < t=%d sp=512 pv=%d u=%d\n", k/1000, (k%1000)*1000+7, 4294960000+uint32(k*1000), 500+k%20, k%3-1)
		if k%97 == 0 {
			in += fmt.Sprintf("%d.%06d ! mark %d\n", k/1000, (k%1000)*1000+9, k)
		}
	}
	a, b := scanAll(t, in), scanAll(t, in)
	if !reflect.DeepEqual(a, b) {
		t.Error("two passes over the same capture differ")
	}
	if len(a.samples) != 500 || len(a.events) != 6 {
		t.Errorf("got %d samples and %d events, want 500 and 6", len(a.samples), len(a.events))
	}
	// The clock wrapped once (4294960000 + 7000 µs passes 2^32): t must keep rising.
	for i := 1; i < len(a.samples); i++ {
		if d := a.samples[i].T - a.samples[i-1].T; d != 1000 {
			t.Fatalf("sample %d: t step %d, want 1000 across the wrap", i, d)
		}
	}
	if ok, start := NewScannerCapture(in); !ok || !start.Equal(time.Date(2026, 12, 1, 23, 40, 0, 0, time.UTC)) {
		t.Errorf("Capture() = %v %v, want true 2026-12-01T23:40:00Z", ok, start)
	}
}

// NewScannerCapture scans in and returns what Capture says at the end.
func NewScannerCapture(in string) (bool, time.Time) {
	sc := NewScanner(strings.NewReader(in))
	for sc.Scan() {
	}
	return sc.Capture()
}

func TestFormatRoundTrip(t *testing.T) {
	tests := []struct {
		name string
		s    Sample
		want string
	}{
		{"full", Sample{T: 123456, N: 7, SP: 512, PV: 498, U: Charge, Flags: HasT | HasN | HasU}, "t=123456 n=7 sp=512 pv=498 u=1"},
		{"minimal", Sample{SP: 1, PV: 2}, "sp=1 pv=2"},
		{"fractional counts", Sample{SP: 512.5, PV: 1e-7, U: Discharge, Flags: HasU}, "sp=512.5 pv=1e-07 u=-1"},
		{"hold and large t", Sample{T: 1 << 40, SP: -3, PV: 0, U: Hold, Flags: HasT | HasU}, "t=1099511627776 sp=-3 pv=0 u=0"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			line := AppendData(nil, tc.s)
			if string(line) != tc.want {
				t.Errorf("AppendData = %q, want %q", line, tc.want)
			}
			var p Parser
			r := p.Parse(line)
			back := r.Sample
			back.Line = 0
			if r.Kind != RecSample || back != tc.s {
				t.Errorf("read back %v %+v, want %+v", r.Kind, back, tc.s)
			}
		})
	}
	m := Meta{Vref: 5, ADCBits: 10, Period: 1e-3, Mode: ThreeState, Deadband: 21, Supply: 5, R: 47e3, C: 1e-6, Load: 1e6,
		Set: FieldVref | FieldADCBits | FieldPeriod | FieldMode | FieldDeadband | FieldSupply | FieldR | FieldC | FieldLoad}
	line := AppendMeta(nil, m)
	const want = "# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=21 supply=5 r=47000 c=1e-06 load=1000000"
	if string(line) != want {
		t.Errorf("AppendMeta = %q, want %q", line, want)
	}
	var p Parser
	if r := p.Parse(line); r.Kind != RecMeta || !metasEqual([]Meta{r.Meta}, []Meta{m}) {
		t.Errorf("meta read back %v %+v, want %+v", r.Kind, r.Meta, m)
	}
	if got := string(AppendMeta(nil, Meta{Period: 0.1234567e-3, Set: FieldPeriod})); got != "# period_us=123.457" {
		t.Errorf("AppendMeta(period) = %q, want %q", got, "# period_us=123.457")
	}
	ex := AppendExtras([]byte("sp=1 pv=2"), []Extra{{"temp", 21.5}})
	if string(ex) != "sp=1 pv=2 temp=21.5" {
		t.Errorf("AppendExtras = %q", ex)
	}
	if n := testing.AllocsPerRun(100, func() { line = AppendData(line[:0], Sample{T: 1, SP: 2, PV: math.Pi, Flags: HasT}) }); n != 0 {
		t.Errorf("AppendData allocates %v times with room in dst, want 0", n)
	}
}

func ExampleScanner() {
	in := "# vref=5 adc_bits=10 period_us=1000\n" +
		"t=1000 sp=512 pv=498 u=1\n" +
		"t=2000 sp=512 pv=505 u=0\n" +
		"garbage\n" +
		"t=3000 sp=512 pv=515 u=-1\n"
	sc := NewScanner(strings.NewReader(in))
	sc.Name = "bench.txt"
	for sc.Scan() {
		switch sc.Kind() {
		case RecMeta:
			fmt.Printf("meta: 1 count = %.3f mV\n", sc.Meta().LSB()*1e3)
		case RecSample:
			s := sc.Sample()
			fmt.Printf("t=%d µs pv=%.3f V drive %v\n", s.T, sc.Meta().Volts(s.PV), s.U)
		}
	}
	if err := sc.Err(); err != nil {
		fmt.Println(err)
	}
	st := sc.Stats()
	fmt.Printf("%d lines, %d samples, %d rejected: %v\n", st.Lines, st.Samples, st.Rejected, st.FirstRejects[0])
	// Output:
	// meta: 1 count = 4.883 mV
	// t=1000 µs pv=2.432 V drive charge
	// t=2000 µs pv=2.466 V drive hold
	// t=3000 µs pv=2.515 V drive discharge
	// 5 lines, 3 samples, 1 rejected: bench.txt:4: telemetry: not a key=value data line: "garbage"
}

func ExampleScanner_capture() {
	in := "#caploop-capture v1 start=2026-12-01T23:40:00.000000Z source=/dev/ttyUSB0\n" +
		"0.001000 < sp=512 pv=498 u=1\n" +
		"0.002000 > set deadband=14\n" +
		"0.003000 < # deadband=14\n" +
		"0.004000 ! unplugged\n"
	sc := NewScanner(strings.NewReader(in))
	for sc.Scan() {
		switch sc.Kind() {
		case RecSample:
			fmt.Printf("%.3f s sample pv=%g\n", float64(sc.Sample().Host)/1e9, sc.Sample().PV)
		case RecMeta:
			fmt.Printf("deadband now %g\n", sc.Meta().Deadband)
		case RecEvent:
			e := sc.Event()
			fmt.Printf("%.3f s %c %s\n", float64(e.Host)/1e9, e.Dir, e.Text)
		}
	}
	// Output:
	// 0.001 s sample pv=498
	// 0.002 s > set deadband=14
	// deadband now 14
	// 0.004 s ! unplugged
}

func ExampleAppendData() {
	var line []byte
	line = AppendMeta(line, Meta{Vref: 5, ADCBits: 10, Set: FieldVref | FieldADCBits})
	fmt.Println(string(line))
	line = AppendData(line[:0], Sample{T: 1000, SP: 512, PV: 498, U: Charge, Flags: HasT | HasU})
	fmt.Println(string(line))
	// Output:
	// # vref=5 adc_bits=10
	// t=1000 sp=512 pv=498 u=1
}
