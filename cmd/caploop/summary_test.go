package main

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"errors"
	"flag"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// updateGolden rewrites the golden files (go test ./cmd/caploop -run Summary -update).
var updateGolden = func() *bool {
	if f := flag.Lookup("update"); f != nil {
		if g, ok := f.Value.(flag.Getter); ok {
			if b, ok := g.Get().(bool); ok {
				return &b
			}
		}
	}
	return flag.Bool("update", false, "rewrite the golden files in testdata")
}()

// runSummaryCmd runs `caploop summary args...` in process.
func runSummaryCmd(t *testing.T, args ...string) (stdout, stderr string, code int) {
	t.Helper()
	root := newRoot()
	var out, errb bytes.Buffer
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs(append([]string{"summary", "--quiet"}, args...))
	err := root.Execute()
	code = 0
	if err != nil {
		code = 2
		var ee *exitError
		if errors.As(err, &ee) {
			code = ee.code
		}
		errb.WriteString(err.Error())
	}
	return out.String(), errb.String(), code
}

// capture returns the path of a testdata capture written by the virtual board's
// generator (module testdata), skipping when it is not there.
func capture(t *testing.T, name string) string {
	t.Helper()
	p := filepath.Join("..", "..", "testdata", name)
	if _, err := os.Stat(p); err != nil {
		t.Skipf("testdata capture %s is not there: %v", p, err)
	}
	return p
}

func golden(t *testing.T, name, got string) {
	t.Helper()
	path := filepath.Join("testdata", "summary", name)
	if *updateGolden {
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("golden file (run with -update to make it): %v", err)
	}
	if got != string(want) {
		t.Errorf("%s differs from the golden file; got:\n%s", path, got)
	}
}

func TestSummaryGolden(t *testing.T) {
	cases := []struct {
		name string
		file string
		args []string
	}{
		{"three-state-good.txt", "three-state-good.txt", nil},
		{"three-state-good.json", "three-state-good.txt", []string{"--json"}},
		{"tuned.txt", "tuned.cap", nil},
		{"follower-limit.json", "follower-limit.txt", []string{"--json"}},
		// A moving setpoint: the tracking block, and the short segments in one line.
		{"two-state-ramp.txt", "two-state-ramp.txt", nil},
		{"noisy-sine.txt", "noisy-sine.txt", nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			p := capture(t, tc.file)
			out, errOut, code := runSummaryCmd(t, append(append([]string{"--no-advice"}, tc.args...), p)...)
			if code != 0 {
				t.Fatalf("exit code %d: %s", code, errOut)
			}
			golden(t, tc.name, out)
		})
	}
}

func TestSummaryJSON(t *testing.T) {
	good, follower := capture(t, "three-state-good.txt"), capture(t, "follower-limit.txt")
	out, errOut, code := runSummaryCmd(t, "--json", "--no-advice", good, follower)
	if code != 0 {
		t.Fatalf("exit code %d: %s", code, errOut)
	}
	// Several files: one document, an array with one element per file.
	var docs []map[string]any
	if err := json.Unmarshal([]byte(out), &docs); err != nil {
		t.Fatalf("not one JSON document: %v", err)
	}
	if len(docs) != 2 {
		t.Fatalf("documents: got %d, want one per file (2)", len(docs))
	}
	if v := docs[0]["schema_version"]; v != 1.0 {
		t.Errorf("schema_version: got %v, want 1", v)
	}
	for _, key := range []string{"samples", "rejected_lines", "duration_s", "sample_period_s", "plant", "segments", "steps", "diagnostics"} {
		if _, ok := docs[0][key]; !ok {
			t.Errorf("key %s missing", key)
		}
	}
	plant := docs[0]["plant"].(map[string]any)
	for _, key := range []string{"tau_charge_s", "tau_discharge_s", "v_high_v", "v_low_v", "tau_hold_s", "noise_rms_counts"} {
		if _, ok := plant[key]; !ok {
			t.Errorf("plant key %s missing", key)
		}
	}
	// The good capture never discharges far from a setpoint: null, not 0.
	if plant["tau_discharge_s"] != nil {
		t.Errorf("tau_discharge_s: got %v, want null", plant["tau_discharge_s"])
	}
	seg := docs[0]["segments"].([]any)[0].(map[string]any)
	for _, key := range []string{"setpoint_counts", "setpoint_v", "start_s", "end_s", "mean_error_v", "ripple_pp_v", "ripple_rms_v",
		"duty_charge", "duty_hold", "duty_discharge", "limit_cycle_period_s", "switching_hz", "deadband_entries", "deadband_exits", "band_jumps", "unreachable"} {
		if _, ok := seg[key]; !ok {
			t.Errorf("segment key %s missing", key)
		}
	}
	step := docs[0]["steps"].([]any)[0].(map[string]any)
	for _, key := range []string{"from_v", "to_v", "rise_s", "settle_s", "overshoot_v"} {
		if _, ok := step[key]; !ok {
			t.Errorf("step key %s missing", key)
		}
	}
	segs := docs[1]["segments"].([]any)
	// An unreachable setpoint's steady part starts where its level stops drifting: the
	// loop rests there, its mean error is minus the shortfall (within 2 LSB of 5 V / 1024).
	last := segs[len(segs)-1].(map[string]any)
	me, _ := last["mean_error_v"].(float64)
	sf, _ := last["shortfall_v"].(float64)
	if last["unreachable"] != true || last["rests"] != true || sf <= 0 || math.Abs(me+sf) > 2*5.0/1024 {
		t.Errorf("follower capture, last segment: unreachable %v, rests %v, mean_error_v %v, shortfall_v %v; want true, true and mean error = -shortfall",
			last["unreachable"], last["rests"], last["mean_error_v"], last["shortfall_v"])
	}
}

func TestSummaryExitCodes(t *testing.T) {
	dir := t.TempDir()
	empty := filepath.Join(dir, "empty.log")
	garbage := filepath.Join(dir, "garbage.log")
	os.WriteFile(empty, nil, 0o644)
	os.WriteFile(garbage, []byte("# greenhouse bias bench\nhello there\nt=1 n=x sp=3 pv=4\n"), 0o644)
	good, chatter := capture(t, "three-state-good.txt"), capture(t, "three-state-chatter.txt")
	cases := []struct {
		name     string
		args     []string
		code     int
		contains []string // in stderr and the error
	}{
		{"no gates", []string{good}, 0, nil},
		{"gates pass", []string{"--max-jumps", "0", "--max-settle", "150ms", "--max-error", "30mV", good}, 0, nil},
		{"jumps gate fails", []string{"--max-jumps", "0", chatter}, 1, []string{"gates failed"}},
		{"ripple gate fails", []string{"--max-ripple", "1mV", good}, 1, []string{"gates failed"}},
		{"missing file", []string{filepath.Join(dir, "nope.log")}, 2, []string{"nope.log"}},
		{"empty file", []string{empty}, 2, []string{"empty.log", "no samples"}},
		{"only bad lines", []string{garbage}, 2, []string{"garbage.log", "no samples", "garbage.log:2"}},
		{"unusable beats a failed gate", []string{"--max-jumps", "0", chatter, empty}, 2, []string{"empty.log"}},
		{"bad gate value", []string{"--max-ripple", "lots", good}, 2, []string{"--max-ripple"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, errOut, code := runSummaryCmd(t, tc.args...)
			if code != tc.code {
				t.Errorf("exit code: got %d, want %d (%s)", code, tc.code, errOut)
			}
			for _, s := range tc.contains {
				if !strings.Contains(errOut, s) {
					t.Errorf("stderr %q lacks %q", errOut, s)
				}
			}
		})
	}
}

func TestSummaryJUnit(t *testing.T) {
	good, chatter := capture(t, "three-state-good.txt"), capture(t, "three-state-chatter.txt")
	path := filepath.Join(t.TempDir(), "gates.xml")
	_, errOut, code := runSummaryCmd(t, "--no-advice", "--junit", path, "--max-jumps", "0", "--max-ripple", "200mV", good, chatter)
	if code != 1 {
		t.Fatalf("exit code: got %d, want 1 (%s)", code, errOut)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	// The JUnit XML as a CI server reads it (the common testsuites/testsuite/testcase
	// form, common practice with no single standard).
	var doc struct {
		Failures int `xml:"failures,attr"`
		Suites   []struct {
			Failures int `xml:"failures,attr"`
			Cases    []struct {
				Name    string `xml:"name,attr"`
				Failure *struct {
					Message string `xml:"message,attr"`
				} `xml:"failure"`
			} `xml:"testcase"`
		} `xml:"testsuite"`
	}
	if err := xml.Unmarshal(b, &doc); err != nil {
		t.Fatalf("JUnit XML: %v\n%s", err, b)
	}
	if len(doc.Suites) != 2 {
		t.Fatalf("suites: got %d, want one per file (2)", len(doc.Suites))
	}
	// One test case per gate per segment: the good capture has 3 segments, the chatter
	// capture 2.
	for i, want := range []int{2 * 3, 2 * 2} {
		if got := len(doc.Suites[i].Cases); got != want {
			t.Errorf("suite %d: got %d test cases, want %d", i, got, want)
		}
	}
	if doc.Suites[0].Failures != 0 {
		t.Errorf("good capture: %d failures, want 0", doc.Suites[0].Failures)
	}
	if doc.Suites[1].Failures == 0 || doc.Failures != doc.Suites[1].Failures {
		t.Errorf("chatter capture: %d failures (total %d), want the band-jump gate to fail", doc.Suites[1].Failures, doc.Failures)
	}
	for _, c := range doc.Suites[1].Cases {
		if c.Failure != nil && !strings.HasPrefix(c.Name, "max-jumps segment") {
			t.Errorf("unexpected failure %q: %s", c.Name, c.Failure.Message)
		}
	}
}

func TestSummaryComparison(t *testing.T) {
	chatter, good := capture(t, "three-state-chatter.txt"), capture(t, "three-state-good.txt")
	out, errOut, code := runSummaryCmd(t, "--no-advice", chatter, good)
	if code != 0 {
		t.Fatalf("exit code %d: %s", code, errOut)
	}
	for _, s := range []string{"files (worst segment and step)", "compared with", "three-state-chatter.txt", "three-state-good.txt"} {
		if !strings.Contains(out, s) {
			t.Errorf("output lacks %q:\n%s", s, out)
		}
	}
	if strings.Count(out, "three-state-good.txt") != 2 {
		t.Errorf("want one row and one comparison row for the second file:\n%s", out)
	}
}

// TestSummaryStdin reads from standard input ("-").
func TestSummaryStdin(t *testing.T) {
	good := capture(t, "three-state-good.txt")
	f, err := os.Open(good)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	old := os.Stdin
	r, w, _ := os.Pipe()
	os.Stdin = r
	defer func() { os.Stdin = old }()
	go func() { io.Copy(w, f); w.Close() }()
	out, errOut, code := runSummaryCmd(t, "--no-advice", "-")
	if code != 0 {
		t.Fatalf("exit code %d: %s", code, errOut)
	}
	if !strings.Contains(out, "6000 samples") {
		t.Errorf("output:\n%s", out)
	}
}

// TestSummaryTrackingJSON checks the JSON of a moving setpoint: the tracking block with
// most samples, and the short segments still listed (bounded as before).
func TestSummaryTrackingJSON(t *testing.T) {
	p := capture(t, "two-state-ramp.txt")
	out, errOut, code := runSummaryCmd(t, "--no-advice", "--json", p)
	if code != 0 {
		t.Fatalf("exit code %d: %s", code, errOut)
	}
	var got struct {
		Samples  int64 `json:"samples"`
		Tracking *struct {
			Samples int64    `json:"samples"`
			LagS    *float64 `json:"lag_s"`
			RMS     *float64 `json:"rms_error_v"`
		} `json:"tracking"`
		Segments        []json.RawMessage `json:"segments"`
		SegmentsOmitted int64             `json:"segments_omitted"`
	}
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatalf("json: %v", err)
	}
	if got.Tracking == nil || 2*got.Tracking.Samples <= got.Samples || got.Tracking.LagS == nil || got.Tracking.RMS == nil {
		t.Fatalf("tracking = %+v, want most of %d samples with lag and rms", got.Tracking, got.Samples)
	}
	if len(got.Segments) != 4096 || got.SegmentsOmitted == 0 {
		t.Errorf("segments listed %d, omitted %d; want 4096 and the rest omitted", len(got.Segments), got.SegmentsOmitted)
	}
}

func TestParseSupplyTol(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want float64
		ok   bool
	}{{"5%", 0.05, true}, {"1.5 %", 0.015, true}, {"5", 0, false}, {"0%", 0, false}, {"60%", 0, false}, {"x%", 0, false}} {
		got, err := parseSupplyTol(tc.in)
		if (err == nil) != tc.ok || (tc.ok && math.Abs(got-tc.want) > 1e-12) {
			t.Errorf("parseSupplyTol(%q) = %g, %v; want %g ok=%v", tc.in, got, err, tc.want, tc.ok)
		}
	}
}
