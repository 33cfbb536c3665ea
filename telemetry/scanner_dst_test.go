package telemetry

import (
	"strings"
	"testing"
)

// TestScannerSampleDst checks that samples parsed straight into a caller's slots
// (SetSampleDst) are the samples the Scanner gives without it, through the fast path,
// key=value lines, a rejected line, meta lines and a CSV table.
func TestScannerSampleDst(t *testing.T) {
	const in = "# vref=5 adc_bits=10 period_us=1000\n" +
		"t=1000 n=1 sp=512 pv=498 u=1\n" +
		"sp=512 pv=501\n" +
		"pv=503.5 sp=512 u=-1 extra=7\n" +
		"t=2000 n=2 sp=512 pv=x u=0\n" +
		"t=3000 sp=512 pv=505 u=+1\r\n" +
		"# comment\n" +
		"t,sp,pv,u\n" +
		"4000,512,507,0\n"
	var want []Sample
	sc := NewScanner(strings.NewReader(in))
	for sc.Scan() {
		if sc.Kind() == RecSample {
			want = append(want, sc.Sample())
		}
	}
	if len(want) < 4 {
		t.Fatalf("only %d samples read without a destination", len(want))
	}
	slots := make([]Sample, len(want)+1)
	for i := range slots {
		slots[i] = Sample{Line: -99, PV: -1, SP: -1, Flags: 0xFF} // stale values to be overwritten
	}
	sc = NewScanner(strings.NewReader(in))
	n := 0
	sc.SetSampleDst(&slots[0])
	for sc.Scan() {
		if sc.Kind() != RecSample {
			continue
		}
		if got := sc.Sample(); got != slots[n] {
			t.Fatalf("sample %d: Sample() %+v, slot %+v", n, got, slots[n])
		}
		n++
		sc.SetSampleDst(&slots[n])
	}
	if n != len(want) {
		t.Fatalf("%d samples with a destination, %d without", n, len(want))
	}
	for i := range want {
		if slots[i] != want[i] {
			t.Errorf("sample %d: %+v in the slot, %+v without a destination", i, slots[i], want[i])
		}
	}
}
