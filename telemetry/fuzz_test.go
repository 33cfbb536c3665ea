package telemetry

import (
	"bytes"
	"errors"
	"math"
	"reflect"
	"strconv"
	"strings"
	"testing"
	"testing/iotest"
)

// FuzzScanner feeds arbitrary bytes to the Scanner, whole and one byte per read, and
// checks that it never panics, that both reads give the same records, and that the
// invariants hold: counts add up, samples are finite and in order, and every text that
// can reach a screen is sanitised.
//
//	go test -run x -fuzz FuzzScanner -fuzztime 30s ./telemetry/
func FuzzScanner(f *testing.F) {
	seeds := []string{
		"t=123456 sp=512 pv=498 u=1\n",
		"t=1\tsp=2,pv=3, u=-\r\nsp=1 pv=2",
		"# vref=5.0 adc_bits=10 period_us=1000 mode=three-state deadband=21 supply=5.0 r=47k c=1u load=1e6\n",
		"# r=4k7 c=4.7µ\n# a comment\n\n",
		"t,sp,pv,u\n1000,512,498,1\n2000,512,499,-1\n",
		"sp\tpv\n1\t2\n",
		"#caploop-capture v1 start=2026-12-01T23:40:00.000000Z\n0.001 < t=1 sp=1 pv=1\n0.002 > set deadband=14\n0.003 ! unplugged\n",
		"t=4294967295 sp=0 pv=0\nt=3 sp=0 pv=0\n",
		"sp=1 pv=2 temp=21.5 temp=22\n",
		"t=1234 sp=51t=1235 sp=512 pv=498 u=1\n",
		"\x00\x01\x02\xff\xfe\n\x1b[2J\x1b]0;title\x07sp=1 pv=2\n",
		"sp=NaN pv=Inf\nsp=1e400 pv=-0\nsp=0x1p3 pv=1_0\n",
		"# vref=\xff\n# \x1b[31m\n",
		strings.Repeat("a", 3000) + "\nsp=1 pv=1\n",
		"\r\n\r\r\n,,,\n= = =\n#=\n",
		"#caploop-capture v1\n1.5 < " + strings.Repeat("z", 1100) + "\n9999999999999.999999999 < sp=1 pv=1\n",
		"x\nt=1 sp=2 pv=3 u=1\r\nt=2 n=5 sp=2 pv=3 u=-1\nsp=1 pv=2 u=+1\nsp=1 pv=2 u=11\nsp=1 pv=2\r\r\n",
		"\xEF\xBB\xBFt,sp,pv,temp\r\n1,2,3,warm\r\n",
		"#caploop-capture v2\n0.1 < sp=1 pv=2\n",
		"# adc_bits=10 vref=1e308 deadband=5000\nsp=99999 pv=1\nt=1 sp=1 pv=1024\nsp=1 pv=2 temp°C=3 x=warm\n",
	}
	for _, s := range seeds {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		a := fuzzScan(t, bytes.NewReader(data), 0, false)
		b := fuzzScan(t, iotest.OneByteReader(bytes.NewReader(data)), 1, false)
		if !reflect.DeepEqual(a, b) {
			t.Fatalf("whole read and byte-by-byte read differ:\n%+v\n%+v", a, b)
		}
		c := fuzzScan(t, bytes.NewReader(data), 0, true)
		if !reflect.DeepEqual(a, c) {
			t.Fatalf("fast path and general parser differ:\n%+v\n%+v", a, c)
		}
		if max := int64(bytes.Count(data, []byte{'\n'}) + 1); a.stats.Lines > max {
			t.Fatalf("%d lines counted in input with at most %d", a.stats.Lines, max)
		}
	})
}

// fuzzScan scans all of r with a buffer of bufSize bytes (0: the default, 1: the
// smallest the Scanner allows), with or without the fast path.
func fuzzScan(t *testing.T, r interface{ Read([]byte) (int, error) }, bufSize int, noFast bool) scanned {
	sc := NewScanner(r)
	sc.bufSize = bufSize
	sc.p.noFast = noFast
	var got scanned
	for sc.Scan() {
		switch sc.Kind() {
		case RecSample:
			s := sc.Sample()
			if math.IsNaN(s.SP) || math.IsInf(s.SP, 0) || math.IsNaN(s.PV) || math.IsInf(s.PV, 0) {
				t.Fatalf("sample with a non-finite value: %+v", s)
			}
			if s.Index != int64(len(got.samples)) {
				t.Fatalf("sample index %d, want %d", s.Index, len(got.samples))
			}
			if n := len(got.samples); n > 0 && s.Line <= got.samples[n-1].Line {
				t.Fatalf("line numbers not rising: %d after %d", s.Line, got.samples[n-1].Line)
			}
			if s.U < Discharge || s.U > Charge {
				t.Fatalf("drive out of range: %+v", s)
			}
			for _, e := range sc.Extras() {
				if e.Name == "" || math.IsNaN(e.Value) {
					t.Fatalf("bad extra %+v", e)
				}
			}
			got.samples = append(got.samples, s)
			got.extras = append(got.extras, append([]Extra(nil), sc.Extras()...))
		case RecMeta:
			got.metas = append(got.metas, sc.Meta())
		case RecEvent:
			e := sc.Event()
			if !safeText(e.Text) {
				t.Fatalf("event text not sanitised: %q", e.Text)
			}
			got.events = append(got.events, e)
		default:
			t.Fatalf("Scan returned kind %v", sc.Kind())
		}
	}
	if err := sc.Err(); err != nil && !errors.Is(err, ErrCaptureVersion) {
		t.Fatalf("Err() = %v on an in-memory reader", err)
	}
	got.stats = sc.Stats()
	checkStats(t, got.stats)
	if got.stats.Samples != int64(len(got.samples)) || got.stats.Events != int64(len(got.events)) || got.stats.Metas != int64(len(got.metas)) {
		t.Fatalf("stats %+v disagree with %d samples, %d events, %d metas", got.stats, len(got.samples), len(got.events), len(got.metas))
	}
	return got
}

// FuzzParseLine checks that the fast path for the canonical data line layout agrees with
// the general parser on every line: same kind, same sample, same error.
//
//	go test -run x -fuzz FuzzParseLine -fuzztime 30s ./telemetry/
func FuzzParseLine(f *testing.F) {
	for _, s := range []string{
		"t=123456 sp=512 pv=498 u=1", "t=1 n=2 sp=3 pv=4", "sp=1 pv=2", "sp=1 pv=2 u=-1", "sp=1 pv=2 u=+",
		"t=4294967295 sp=0 pv=0 u=-", "t=12345678901234567890 sp=1 pv=1", "sp=1234567890123456 pv=1",
		"sp=1 pv=2 u=2", "sp=1 pv=2 u=", "sp=1 pv=2 ", "sp=1  pv=2", "t= sp=1 pv=2", "sp=1 pv=-2",
		"sp=1.5 pv=2", "n=1 t=2 sp=3 pv=4", "sp=1 pv=2 u=1 x=3", "sp=1 pv=2u=1", "t=1sp=2 pv=3", "sp=01 pv=002",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, line []byte) {
		if bytes.IndexByte(line, '\n') >= 0 {
			return
		}
		var fast, slow Parser
		slow.noFast = true
		for range 2 { // twice, so the clock unwrapping state is compared too
			a, b := fast.ParseReceived(line, 7), slow.ParseReceived(line, 7)
			if a.Kind != b.Kind || a.Sample != b.Sample || len(a.Extras) != len(b.Extras) {
				t.Fatalf("line %q: fast path gives %v %+v %v, general parser %v %+v %v", line, a.Kind, a.Sample, a.Extras, b.Kind, b.Sample, b.Extras)
			}
			if (a.Err == nil) != (b.Err == nil) || (a.Err != nil && *a.Err != *b.Err) {
				t.Fatalf("line %q: fast path error %v, general parser %v", line, a.Err, b.Err)
			}
		}
	})
}

// FuzzMetaLine feeds arbitrary meta lines to the Parser ("#" and each line of the input)
// and checks that it never panics and that every meta value that comes out is finite
// and inside the input range table, the deadband within a quarter of the declared
// scale, and that a sample after them is kept only inside 0..2^adc_bits-1.
//
//	go test -run x -fuzz FuzzMetaLine -fuzztime 30s ./telemetry/
func FuzzMetaLine(f *testing.F) {
	for _, s := range []string{
		" vref=1e308", " c=1e308", " r=1e-300", " adc_bits=10 deadband=5000", " period_us=1e30",
		" vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=21 supply=5 r=47k c=1u load=1M",
		" deadband=300\n adc_bits=10", " adc_bits=24 deadband=4194304", " load=0 supply=1e3 vref=10",
		" c=1e-12 r=100M period_us=1", " period_us=1e7 adc_bits=4", " vref=5 vref=3", " x=1 y",
		" r=1e400 c=-0 vref=NaN supply=Inf", " deadband=-1 adc_bits=-3", " r=4k7 c=4.7µ supply=3300mV",
	} {
		f.Add([]byte(s), 1023.0)
	}
	f.Fuzz(func(t *testing.T, data []byte, count float64) {
		var p Parser
		for _, l := range bytes.Split(data, []byte{'\n'}) {
			r := p.Parse(append([]byte{'#'}, l...))
			checkMeta(t, r.Meta, r.Meta.ADCBits)
			if r.Kind == RecMeta {
				checkMeta(t, r.Delta, r.Meta.ADCBits)
			}
		}
		m := p.Meta()
		if math.IsNaN(count) || math.IsInf(count, 0) {
			return
		}
		line := []byte("sp=0 pv=" + strconv.FormatFloat(count, 'g', -1, 64))
		r := p.Parse(line)
		if r.Kind == RecSample && m.Has(FieldADCBits) && CheckCount("pv", r.Sample.PV, m.ADCBits) != nil {
			t.Fatalf("pv %g kept with %d bits", r.Sample.PV, m.ADCBits)
		}
		if st := p.Stats(); int64(len(st.FirstDrops)) != min(st.Dropped, MaxRejectsKept) {
			t.Fatalf("%d drops kept of %d", len(st.FirstDrops), st.Dropped)
		}
	})
}

// checkMeta fails when a value m has is not finite or lies outside its range.
func checkMeta(t *testing.T, m Meta, bits int) {
	t.Helper()
	for _, c := range []struct {
		f   MetaField
		key string
		v   float64
	}{
		{FieldVref, "vref", m.Vref}, {FieldADCBits, "adc_bits", float64(m.ADCBits)}, {FieldPeriod, "period", m.Period},
		{FieldSupply, "supply", m.Supply}, {FieldR, "r", m.R}, {FieldC, "c", m.C}, {FieldLoad, "load", m.Load},
	} {
		if math.IsNaN(c.v) || math.IsInf(c.v, 0) {
			t.Fatalf("%s = %v in %+v", c.key, c.v, m)
		}
		if m.Has(c.f) {
			if err := CheckRange(c.key, c.v); err != nil {
				t.Fatalf("meta %+v: %v", m, err)
			}
		}
	}
	if math.IsNaN(m.Deadband) || math.IsInf(m.Deadband, 0) {
		t.Fatalf("deadband = %v", m.Deadband)
	}
	if m.Has(FieldDeadband) {
		if !m.Has(FieldADCBits) {
			bits = 0
		}
		if err := CheckDeadband(m.Deadband, bits); err != nil {
			t.Fatalf("meta %+v: %v", m, err)
		}
	}
}
