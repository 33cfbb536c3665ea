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

// Gates is the parsed gates; NaN means no gate. A voltage limit given in % is kept as
// a fraction of full scale (the file's vref) in the matching ...FS field and turned
// into volts file by file.
type Gates struct {
	ripple, robust, rms, settle, errV, overshoot float64
	jumps, rejected, gaps                        float64

	rippleFS, robustFS, rmsFS, errFS, overshootFS bool
}

func (g *GateText) Parse() (Gates, error) {
	nan := math.NaN()
	s := Gates{ripple: nan, robust: nan, rms: nan, settle: nan, errV: nan, overshoot: nan, jumps: nan, rejected: nan, gaps: nan}
	for _, p := range []struct {
		flag, text, unit string
		dst              *float64
		fs               *bool
	}{
		{"--max-ripple", g.Ripple, "V", &s.ripple, &s.rippleFS},
		{"--max-robust-ripple", g.Robust, "V", &s.robust, &s.robustFS},
		{"--max-rms", g.RMS, "V", &s.rms, &s.rmsFS},
		{"--max-settle", g.Settle, "s", &s.settle, nil},
		{"--max-error", g.Error, "V", &s.errV, &s.errFS},
		{"--max-overshoot", g.Overshoot, "V", &s.overshoot, &s.overshootFS},
	} {
		if p.text == "" {
			continue
		}
		if t := strings.TrimSpace(p.text); strings.HasSuffix(t, "%") {
			if p.fs == nil {
				return s, fmt.Errorf("summary: %s %q: a time limit has no full scale; give it in seconds, such as %s", p.flag, clean(p.text), gateExample[p.unit])
			}
			v, err := parsePercent(p.flag, p.text)
			if err != nil {
				return s, err
			}
			*p.dst, *p.fs = v, true
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

// parsePercent reads a voltage limit given as a percentage of full scale ("2%",
// "0.5 %") and returns it as a fraction (0.02).
func parsePercent(flag, text string) (float64, error) {
	t := strings.TrimSpace(strings.TrimSuffix(strings.TrimSpace(text), "%"))
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("summary: %s %q: want a percentage of full scale, such as 2%%", flag, clean(text))
	}
	if v < 0 {
		return 0, fmt.Errorf("summary: %s %q: a limit cannot be negative", flag, clean(text))
	}
	if v > 100 {
		return 0, fmt.Errorf("summary: %s %q: a limit in %% of full scale cannot exceed 100%%", flag, clean(text))
	}
	return v / 100, nil
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
	var vref *float64
	if s.Board.VrefV != nil && *s.Board.VrefV > 0 {
		vref = s.Board.VrefV
	}
	// volts turns a limit given in % of full scale into volts with the file's vref;
	// note is said after the comparison ("2% of vref 5 V"), "" for a limit in volts.
	volts := func(limit float64, fs bool) (v float64, note string, ok bool) {
		if !fs {
			return limit, "", true
		}
		pct := strconv.FormatFloat(limit*100, 'g', 4, 64) + "%"
		if vref == nil {
			return 0, pct + " of full scale: the file gives no vref", false
		}
		return limit * *vref, " (" + pct + " of vref " + si.FormatDigits(*vref, "V", 4) + ")", true
	}
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
	// addV is add for a voltage gate whose limit may be in % of full scale.
	addV := func(gate, scope string, v *float64, limit float64, fs bool, why string) {
		lim, note, ok := volts(limit, fs)
		if !ok {
			out = append(out, GateResult{Gate: gate, Scope: scope, Status: GateSkip, Value: v, Limit: 0, Message: "no limit: " + note})
			return
		}
		add(gate, scope, "V", v, lim, why)
		if note != "" && v != nil {
			out[len(out)-1].Message += note
		}
	}
	for i := range s.Segments {
		seg := &s.Segments[i]
		scope := fmt.Sprintf("segment %d (%s)", i+1, levelText(seg.SetpointV, seg.SetpointCounts))
		unreach := ""
		if seg.Unreachable {
			unreach = "setpoint unreachable"
		}
		if !math.IsNaN(g.ripple) {
			addV("max-ripple", scope, seg.RipplePPV, g.ripple, g.rippleFS, unreach)
		}
		if !math.IsNaN(g.robust) {
			addV("max-robust-ripple", scope, seg.RippleRobustPPV, g.robust, g.robustFS, unreach)
		}
		if !math.IsNaN(g.rms) {
			addV("max-rms", scope, seg.RippleRMSV, g.rms, g.rmsFS, unreach)
		}
		if !math.IsNaN(g.errV) {
			var v *float64
			if seg.MeanErrorV != nil {
				a := math.Abs(*seg.MeanErrorV)
				v = &a
			}
			addV("max-error", scope, v, g.errV, g.errFS, unreach)
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
			addV("max-overshoot", scope, st.OvershootV, g.overshoot, g.overshootFS, "")
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
