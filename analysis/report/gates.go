package report

import (
	"encoding/xml"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/telemetry/si"
)

// GateText hold the gate limits as typed on the command line ("" = no gate).
type GateText struct {
	Ripple, Robust, RMS, Settle, Error, Overshoot string
	Jumps, Rejected, Gaps                         string
}

// Gates is the parsed gates; NaN means no gate.
type Gates struct {
	ripple, robust, rms, settle, errV, overshoot float64
	jumps, rejected, gaps                        float64
}

func (g *GateText) Parse() (Gates, error) {
	s := Gates{math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN()}
	for _, p := range []struct {
		flag, text, unit string
		dst              *float64
	}{
		{"--max-ripple", g.Ripple, "V", &s.ripple},
		{"--max-robust-ripple", g.Robust, "V", &s.robust},
		{"--max-rms", g.RMS, "V", &s.rms},
		{"--max-settle", g.Settle, "s", &s.settle},
		{"--max-error", g.Error, "V", &s.errV},
		{"--max-overshoot", g.Overshoot, "V", &s.overshoot},
	} {
		if p.text == "" {
			continue
		}
		v, err := parseGateValue(p.flag, p.text, p.unit)
		if err != nil {
			return s, err
		}
		*p.dst = v
	}
	for _, p := range []struct {
		flag, text string
		dst        *float64
	}{{"--max-jumps", g.Jumps, &s.jumps}, {"--max-rejected", g.Rejected, &s.rejected}, {"--max-gaps", g.Gaps, &s.gaps}} {
		if p.text == "" {
			continue
		}
		n, err := strconv.ParseInt(strings.TrimSpace(p.text), 10, 64)
		if err != nil || n < 0 {
			return s, fmt.Errorf("summary: %s %q: want a plain whole number >= 0, such as 0 or 3", p.flag, clean(p.text))
		}
		*p.dst = float64(n)
	}
	return s, nil
}

// parseGateValue reads a gate limit that must carry its unit: "20mV", "0.02 V", "150ms".
// A bare number is refused, since "--max-ripple 20" meant as millivolts would read as
// 20 V and never fail.
func parseGateValue(flag, text, unit string) (float64, error) {
	t := strings.TrimSpace(text)
	want := fmt.Errorf("summary: %s %q: give the limit with its unit, such as %s", flag, clean(text), gateExample[unit])
	if len(t) <= len(unit) || !strings.EqualFold(t[len(t)-len(unit):], unit) {
		return 0, want
	}
	v, err := si.ParseUnit(t, unit)
	if err != nil {
		return 0, want
	}
	if v < 0 {
		return 0, fmt.Errorf("summary: %s %q: a limit cannot be negative", flag, clean(text))
	}
	return v, nil
}

// gateExample is the example given in a gate value's error, by unit.
var gateExample = map[string]string{"V": "20mV or 0.02V", "s": "150ms or 0.15s"}

// Gate statuses.
const (
	GatePass = "pass"
	GateFail = "fail"
	GateSkip = "skipped"
)

// GateResult is one gate checked on one segment, step or file.
type GateResult struct {
	Gate    string   `json:"gate"`
	Scope   string   `json:"scope"` // "segment 2 (2.93 V)", "step 1 (1.46 V -> 2.93 V)", "file"
	Status  string   `json:"status"`
	Value   *float64 `json:"value"`
	Limit   float64  `json:"limit"`
	Message string   `json:"message"`
}

// Check evaluates every gate on s.
func (g Gates) Check(s *analysis.Summary) []GateResult {
	var out []GateResult
	add := func(gate, scope, unit string, v *float64, limit float64, why string) {
		r := GateResult{Gate: gate, Scope: scope, Value: v, Limit: limit}
		switch {
		case v == nil && why != "":
			r.Status, r.Message = GateFail, why
		case v == nil:
			r.Status, r.Message = GateSkip, "no figure (no steady part or no step)"
		case *v <= limit:
			r.Status = GatePass
			r.Message = fmt.Sprintf("%s <= %s", fmtGate(*v, unit), fmtGate(limit, unit))
		default:
			r.Status = GateFail
			r.Message = fmt.Sprintf("%s > %s", fmtGate(*v, unit), fmtGate(limit, unit))
		}
		out = append(out, r)
	}
	for i := range s.Segments {
		seg := &s.Segments[i]
		scope := fmt.Sprintf("segment %d (%s)", i+1, levelText(seg.SetpointV, seg.SetpointCounts))
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
		scope := fmt.Sprintf("step %d (%s -> %s)", i+1, levelText(st.FromV, st.FromCounts), levelText(st.ToV, st.ToCounts))
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

// WriteJUnit writes one test suite per file and one test case per gate per segment or
// step; a file that could not be used is one test case with an error.
func WriteJUnit(w io.Writer, results []*FileResult) error {
	all := junitSuites{Name: "caploop summary"}
	// Every text passes the sanitiser before the XML escaping: XML 1.0 cannot carry most
	// C0 controls, and a bidi control would reorder what a CI page shows.
	for _, r := range results {
		name := clean(r.Name)
		s := junitSuite{Name: name}
		if r.Err != nil {
			s.Cases = append(s.Cases, junitCase{Name: "read", ClassName: name, Error: &junitMessage{Message: clean(r.Err.Error()), Type: "unusable input"}})
			s.Errors++
		}
		for _, g := range r.Gates {
			c := junitCase{Name: g.Gate + " " + g.Scope, ClassName: name}
			switch g.Status {
			case GateFail:
				c.Failure = &junitMessage{Message: clean(g.Message), Type: g.Gate}
				s.Failures++
			case GateSkip:
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
