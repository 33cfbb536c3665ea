package main

import (
	"encoding/xml"
	"fmt"
	"io"
	"math"
	"strconv"

	"github.com/spf13/pflag"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/telemetry/si"
)

// gateFlags hold the gate limits as typed on the command line ("" = no gate).
type gateFlags struct {
	ripple, robust, rms, settle, errV, overshoot string
	jumps, rejected, gaps                        string
}

func (g *gateFlags) register(fs *pflag.FlagSet) {
	fs.StringVar(&g.ripple, "max-ripple", "", "gate: largest ripple peak-to-peak per segment (e.g. 20mV)")
	fs.StringVar(&g.robust, "max-robust-ripple", "", "gate: largest robust ripple peak-to-peak per segment, glitches ignored (e.g. 20mV)")
	fs.StringVar(&g.rms, "max-rms", "", "gate: largest ripple rms per segment (e.g. 5mV)")
	fs.StringVar(&g.settle, "max-settle", "", "gate: longest settling time per setpoint step (e.g. 150ms)")
	fs.StringVar(&g.errV, "max-error", "", "gate: largest |mean error| per segment (e.g. 5mV)")
	fs.StringVar(&g.overshoot, "max-overshoot", "", "gate: largest overshoot per setpoint step (e.g. 50mV)")
	fs.StringVar(&g.jumps, "max-jumps", "", "gate: most band jumps per segment (e.g. 0)")
	fs.StringVar(&g.rejected, "max-rejected", "", "gate: most rejected lines per file (e.g. 0)")
	fs.StringVar(&g.gaps, "max-gaps", "", "gate: most missing samples per file (e.g. 0)")
}

// gateSet is the parsed gates; NaN means no gate.
type gateSet struct {
	ripple, robust, rms, settle, errV, overshoot float64
	jumps, rejected, gaps                        float64
}

func (g *gateFlags) parse() (gateSet, error) {
	s := gateSet{math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN()}
	for _, p := range []struct {
		flag, text, unit string
		dst              *float64
	}{
		{"--max-ripple", g.ripple, "V", &s.ripple},
		{"--max-robust-ripple", g.robust, "V", &s.robust},
		{"--max-rms", g.rms, "V", &s.rms},
		{"--max-settle", g.settle, "s", &s.settle},
		{"--max-error", g.errV, "V", &s.errV},
		{"--max-overshoot", g.overshoot, "V", &s.overshoot},
	} {
		if p.text == "" {
			continue
		}
		v, err := si.ParseUnit(p.text, p.unit)
		if err != nil || v < 0 {
			return s, fmt.Errorf("summary: %s %q: want a value >= 0 in %s, such as 20m%s", p.flag, p.text, p.unit, p.unit)
		}
		*p.dst = v
	}
	for _, p := range []struct {
		flag, text string
		dst        *float64
	}{{"--max-jumps", g.jumps, &s.jumps}, {"--max-rejected", g.rejected, &s.rejected}, {"--max-gaps", g.gaps, &s.gaps}} {
		if p.text == "" {
			continue
		}
		n, err := strconv.ParseInt(p.text, 10, 64)
		if err != nil || n < 0 {
			return s, fmt.Errorf("summary: %s %q: want a whole number >= 0", p.flag, p.text)
		}
		*p.dst = float64(n)
	}
	return s, nil
}

// Gate statuses.
const (
	gatePass = "pass"
	gateFail = "fail"
	gateSkip = "skipped"
)

// gateResult is one gate checked on one segment, step or file.
type gateResult struct {
	Gate    string   `json:"gate"`
	Scope   string   `json:"scope"` // "segment 2 (2.93 V)", "step 1 (1.46 V -> 2.93 V)", "file"
	Status  string   `json:"status"`
	Value   *float64 `json:"value"`
	Limit   float64  `json:"limit"`
	Message string   `json:"message"`
}

// check evaluates every gate on s.
func (g gateSet) check(s *analysis.Summary) []gateResult {
	var out []gateResult
	add := func(gate, scope, unit string, v *float64, limit float64, why string) {
		r := gateResult{Gate: gate, Scope: scope, Value: v, Limit: limit}
		switch {
		case v == nil && why != "":
			r.Status, r.Message = gateFail, why
		case v == nil:
			r.Status, r.Message = gateSkip, "no figure (no steady part or no step)"
		case *v <= limit:
			r.Status = gatePass
			r.Message = fmt.Sprintf("%s <= %s", fmtGate(*v, unit), fmtGate(limit, unit))
		default:
			r.Status = gateFail
			r.Message = fmt.Sprintf("%s > %s", fmtGate(*v, unit), fmtGate(limit, unit))
		}
		out = append(out, r)
	}
	for i := range s.Segments {
		seg := &s.Segments[i]
		scope := fmt.Sprintf("segment %d (%s)", i+1, fmtCountsV(seg.SetpointCounts, seg.SetpointV))
		unreach := ""
		if seg.Unreachable {
			unreach = "setpoint unreachable"
		}
		if !math.IsNaN(g.ripple) {
			add("max-ripple", scope, "V", seg.RipplePPV, g.ripple, unreach)
		}
		if !math.IsNaN(g.robust) {
			add("max-robust-ripple", scope, "V", seg.RippleRobustPPV, g.robust, unreach)
		}
		if !math.IsNaN(g.rms) {
			add("max-rms", scope, "V", seg.RippleRMSV, g.rms, unreach)
		}
		if !math.IsNaN(g.errV) {
			var v *float64
			if seg.MeanErrorV != nil {
				a := math.Abs(*seg.MeanErrorV)
				v = &a
			}
			add("max-error", scope, "V", v, g.errV, unreach)
		}
		if !math.IsNaN(g.jumps) {
			j := float64(seg.BandJumps)
			add("max-jumps", scope, "", &j, g.jumps, "")
		}
	}
	for i := range s.Steps {
		st := &s.Steps[i]
		scope := fmt.Sprintf("step %d (%s -> %s)", i+1, fmtCountsV(st.FromCounts, st.FromV), fmtCountsV(st.ToCounts, st.ToV))
		if !math.IsNaN(g.settle) {
			add("max-settle", scope, "s", st.SettleS, g.settle, "never settled")
		}
		if !math.IsNaN(g.overshoot) {
			add("max-overshoot", scope, "V", st.OvershootV, g.overshoot, "")
		}
	}
	if !math.IsNaN(g.rejected) {
		v := float64(s.RejectedLines)
		add("max-rejected", "file", "", &v, g.rejected, "")
	}
	if !math.IsNaN(g.gaps) {
		v := float64(s.Gaps)
		add("max-gaps", "file", "", &v, g.gaps, "")
	}
	return out
}

func fmtGate(v float64, unit string) string {
	if unit == "" {
		return strconv.FormatFloat(v, 'f', -1, 64)
	}
	return si.FormatDigits(v, unit, 4)
}

// fmtCountsV shows a level in volts when known, else in counts.
func fmtCountsV(counts float64, v *float64) string {
	if v != nil {
		return si.FormatDigits(*v, "V", 4)
	}
	return strconv.FormatFloat(counts, 'f', -1, 64) + " counts"
}

// JUnit XML, the common subset CI systems read: testsuites > testsuite > testcase with
// failure or skipped.
type junitSuites struct {
	XMLName  xml.Name     `xml:"testsuites"`
	Name     string       `xml:"name,attr"`
	Tests    int          `xml:"tests,attr"`
	Failures int          `xml:"failures,attr"`
	Errors   int          `xml:"errors,attr"`
	Suites   []junitSuite `xml:"testsuite"`
}

type junitSuite struct {
	Name     string      `xml:"name,attr"`
	Tests    int         `xml:"tests,attr"`
	Failures int         `xml:"failures,attr"`
	Errors   int         `xml:"errors,attr"`
	Skipped  int         `xml:"skipped,attr"`
	Cases    []junitCase `xml:"testcase"`
}

type junitCase struct {
	Name      string        `xml:"name,attr"`
	ClassName string        `xml:"classname,attr"`
	Failure   *junitMessage `xml:"failure,omitempty"`
	Error     *junitMessage `xml:"error,omitempty"`
	Skipped   *junitMessage `xml:"skipped,omitempty"`
}

type junitMessage struct {
	Message string `xml:"message,attr"`
	Type    string `xml:"type,attr,omitempty"`
}

// writeJUnit writes one test suite per file and one test case per gate per segment or
// step; a file that could not be used is one test case with an error.
func writeJUnit(w io.Writer, results []*fileResult) error {
	all := junitSuites{Name: "caploop summary"}
	for _, r := range results {
		s := junitSuite{Name: r.name}
		if r.err != nil {
			s.Cases = append(s.Cases, junitCase{Name: "read", ClassName: r.name, Error: &junitMessage{Message: r.err.Error(), Type: "unusable input"}})
			s.Errors++
		}
		for _, g := range r.gates {
			c := junitCase{Name: g.Gate + " " + g.Scope, ClassName: r.name}
			switch g.Status {
			case gateFail:
				c.Failure = &junitMessage{Message: g.Message, Type: g.Gate}
				s.Failures++
			case gateSkip:
				c.Skipped = &junitMessage{Message: g.Message}
				s.Skipped++
			}
			s.Cases = append(s.Cases, c)
		}
		s.Tests = len(s.Cases)
		all.Tests += s.Tests
		all.Failures += s.Failures
		all.Errors += s.Errors
		all.Suites = append(all.Suites, s)
	}
	if _, err := io.WriteString(w, xml.Header); err != nil {
		return err
	}
	enc := xml.NewEncoder(w)
	enc.Indent("", "  ")
	if err := enc.Encode(all); err != nil {
		return err
	}
	_, err := io.WriteString(w, "\n")
	return err
}
