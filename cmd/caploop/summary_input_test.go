package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/telemetry"
)

// loopLines writes n data lines of a two-state loop around setpoint 512 of 1023 counts:
// an RC node with tau = 8 periods charged toward 1023 or discharged toward 0 (a
// discrete first-order step, pv += (target - pv) (1 - e^-1/8)), 1 ms apart.
func loopLines(b *strings.Builder, n int) {
	pv, a := 300.0, 1-math.Exp(-1.0/8)
	for k := range n {
		u := 0
		if pv < 512 {
			u = 1
		}
		fmt.Fprintf(b, "t=%d sp=512 pv=%d u=%d\n", k*1000, int(math.Round(pv)), u)
		target := 0.0
		if u == 1 {
			target = 1023
		}
		pv += (target - pv) * a
	}
}

// TestSummaryInputRanges runs `summary --json` over captures whose values parse but
// cannot be: each case gives the exit code and the exact reason in the JSON (or the
// exact message on stderr), and the JSON always decodes.
func TestSummaryInputRanges(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	cases := []struct {
		name   string
		head   string // lines before the data
		code   int
		drop   string // first_drops[0].reason, after "FILE:"
		reject string // first_rejects[0].reason, after "FILE:"
		stderr string // the whole stderr, FILE standing for the path
		kept   int64  // samples before the 400 of the loop that are kept
	}{
		{name: "vref", head: "# vref=1e308 adc_bits=10 period_us=1000\n",
			drop: `1: telemetry: vref dropped: ADC reference 1e+308 V is outside its range 100 mV to 10 V: "# vref=1e308 adc_bits=10 period_us=1000"`},
		{name: "c", head: "# vref=5 adc_bits=10 c=1e308 r=47k\n",
			drop: `1: telemetry: c dropped: capacitor 1e+308 F is outside its range 1 pF to 1 F: "# vref=5 adc_bits=10 c=1e308 r=47k"`},
		{name: "r", head: "# vref=5 adc_bits=10 r=1e-300 c=1u\n",
			drop: `1: telemetry: r dropped: series resistor 1e-300 Ω is outside its range 1 Ω to 100 MΩ: "# vref=5 adc_bits=10 r=1e-300 c=1u"`},
		{name: "deadband", head: "# vref=5 adc_bits=10 deadband=5000\n",
			drop: `1: telemetry: deadband dropped: deadband 5000 is outside its range 0 to 256 (counts, a quarter of the 10-bit full scale at most): "# vref=5 adc_bits=10 deadband=5000"`},
		{name: "period", head: "# vref=5 adc_bits=10 period_us=1e30\n",
			drop: `1: telemetry: period_us dropped: sample period 1e+24 s is outside its range 1 µs to 10 s: "# vref=5 adc_bits=10 period_us=1e30"`},
		{name: "setpoint", head: "# vref=5 adc_bits=10\nt=0 sp=99999 pv=500 u=1\n",
			reject: `2: telemetry: sp 99999 is outside its range 0 to 1023 (counts of a 10-bit converter): "t=0 sp=99999 pv=500 u=1"`},
		{name: "bom", head: "\xEF\xBB\xBF# vref=5 adc_bits=10\n"},
		{name: "extra", head: "# vref=5 adc_bits=10\nt=0 sp=512 pv=500 u=1 temp°C=21\n", kept: 1,
			drop: `2: telemetry: temp°C dropped: bad key: "t=0 sp=512 pv=500 u=1 temp°C=21"`},
		{name: "version", head: "#caploop-capture v2 start=2026-12-01T00:00:00Z\n", code: 2,
			stderr: `caploop: summary: FILE: read stopped after line 1: FILE:1: telemetry: capture format "v2" is not one this caploop reads (v1): "#caploop-capture v2 start=2026-12-01T00:00:00Z"` + "\n" +
				`summary: 1 of 1 files could not be used`},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			var b strings.Builder
			b.WriteString(tc.head)
			loopLines(&b, 400)
			path := filepath.Join(dir, tc.name+".txt")
			if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
				t.Fatal(err)
			}
			out, errOut, code := runSummaryCmd(t, "--json", "--no-advice", path)
			if code != tc.code {
				t.Fatalf("exit code %d, want %d: %s", code, tc.code, errOut)
			}
			if tc.stderr != "" {
				if want := strings.ReplaceAll(tc.stderr, "FILE", path); errOut != want {
					t.Errorf("stderr:\n got %q\nwant %q", errOut, want)
				}
				return
			}
			var doc struct {
				Samples      int64             `json:"samples"`
				Dropped      int64             `json:"dropped_values"`
				FirstDrops   []analysis.Reject `json:"first_drops"`
				Rejected     int64             `json:"rejected_lines"`
				FirstRejects []analysis.Reject `json:"first_rejects"`
				Diagnostics  []analysis.Diagnostic
			}
			if err := json.Unmarshal([]byte(out), &doc); err != nil {
				t.Fatalf("JSON does not decode: %v\n%s", err, out)
			}
			if want := 400 + tc.kept; doc.Samples != want {
				t.Errorf("samples %d, want %d", doc.Samples, want)
			}
			check := func(what string, list []analysis.Reject, n int64, want, code string) {
				if want == "" {
					if n != 0 {
						t.Errorf("%s: %d, want none: %v", what, n, list)
					}
					return
				}
				if n != 1 || len(list) != 1 || list[0].Reason != path+":"+want {
					t.Errorf("%s: %d %v\nwant 1 with reason %q", what, n, list, path+":"+want)
				}
				found := false
				for _, d := range doc.Diagnostics {
					found = found || d.Code == code && strings.Contains(d.Message, want)
				}
				if !found {
					t.Errorf("no %s diagnostic naming %q in %v", code, want, doc.Diagnostics)
				}
			}
			check("dropped values", doc.FirstDrops, doc.Dropped, tc.drop, analysis.DiagDroppedValues)
			check("rejected lines", doc.FirstRejects, doc.Rejected, tc.reject, analysis.DiagRejectedLines)
		})
	}
}

// FuzzSummaryMeta runs the summary with its advice over a loop capture that starts with
// arbitrary meta lines (and repeats them half way), and checks that the JSON document
// always encodes, which holds only when every figure is finite or null.
//
//	go test -run x -fuzz FuzzSummaryMeta -fuzztime 30s ./cmd/caploop/
func FuzzSummaryMeta(f *testing.F) {
	for _, s := range []string{
		"vref=1e308", "c=1e308 r=47k", "r=1e-300 c=1u", "adc_bits=10 deadband=5000", "period_us=1e30",
		"vref=5 adc_bits=10 period_us=1000 mode=two-state deadband=4 supply=5 r=47k c=1u load=1M",
		"vref=10 adc_bits=24 period_us=1 supply=1000 r=1 c=1e-12 load=1e-300",
		"vref=0.1 adc_bits=4 period_us=1e7 supply=0.5 r=100M c=1 load=1e300",
		"adc_bits=10 vref=5\nsupply=5 r=1 c=1 load=1\nmode=three-state deadband=0",
		"vref=5 adc_bits=10 supply=5 r=100e6 c=1e-12 period_us=10000000",
	} {
		f.Add(s)
	}
	var data strings.Builder
	loopLines(&data, 600)
	lines := strings.SplitAfter(data.String(), "\n")
	f.Fuzz(func(t *testing.T, meta string) {
		var b strings.Builder
		var head strings.Builder
		for k, l := range strings.Split(meta, "\n") {
			if k == 8 {
				break
			}
			head.WriteString("# " + l + "\n")
		}
		b.WriteString(head.String())
		for k, l := range lines {
			if k == len(lines)/2 {
				b.WriteString(head.String())
			}
			b.WriteString(l)
		}
		done := make(chan error, 1)
		go func() { done <- encodeSummary(b.String()) }()
		select {
		case err := <-done:
			if err != nil {
				t.Fatalf("meta %q: %v", meta, err)
			}
		case <-time.After(20 * time.Second):
			t.Fatalf("summary and advice take over 20 s for meta %q", meta)
		}
	})
}

// encodeSummary summarises a capture with its advice and encodes the JSON document of
// `summary --json`. It returns nil when the input holds no sample.
func encodeSummary(in string) error {
	sc := telemetry.NewScanner(strings.NewReader(in))
	sc.Name = "fuzz.txt"
	sum, err := analysis.Summarize(sc, analysis.Options{Source: "fuzz.txt"})
	if err != nil {
		return nil // the meta lines refused every sample
	}
	adv, advErr := adviceFor(sum)
	d := report.SummaryDoc{Summary: sum, Advice: adv}
	if advErr != nil {
		s := advErr.Error()
		d.AdviceError = &s
	}
	var out bytes.Buffer
	if err := json.NewEncoder(&out).Encode(d); err != nil {
		return fmt.Errorf("summary JSON does not encode: %w", err)
	}
	return nil
}
