package main

import (
	"encoding/json"
	"errors"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis/advice"
)

// designJSON runs design with --json (few builds: these tests are about limits and text).
func designJSON(t *testing.T, args ...string) *advice.Advice {
	t.Helper()
	out, err := runDesign(t, append(args, "--json", "--builds", "50")...)
	if err != nil {
		t.Fatalf("design %v: %v", args, err)
	}
	var a advice.Advice
	if err := json.Unmarshal([]byte(out), &a); err != nil {
		t.Fatalf("not JSON: %v", err)
	}
	return &a
}

// Issue 12 acceptance: limits that follow the board, series that exist, values outside
// the range table refused, mode-aware text.
func TestDesignLimitsFollowTheBoard(t *testing.T) {
	t.Parallel()
	t.Run("3.3 V pin limit", func(t *testing.T) {
		// 3.3 V parts commonly allow 4-8 mA per pin at full output level (common practice):
		// every recommended pair stays within the default limit the advice states.
		// Small resistors on hand: 220 and 470 Ω would pass a 20 mA limit (15 and 7 mA).
		a := designJSON(t, "--supply", "3.3", "--period", "200us", "--settle", "10ms", "--ripple", "100mV",
			"--r", "220 470 1k 2.2k 4.7k", "--c", "1u 2.2u 4.7u 10u")
		if a.Goals.PinCurrentA > 0.008 {
			t.Fatalf("pin limit at 3.3 V = %g A, want at most 8 mA", a.Goals.PinCurrentA)
		}
		if len(a.Candidates) == 0 || !a.Candidates[0].MeetsGoals {
			t.Fatalf("no pair meets the goals at 3.3 V: %+v", a.Candidates)
		}
		for _, c := range a.Candidates {
			if c.MeetsGoals && c.PinCurrentA > a.Goals.PinCurrentA {
				t.Errorf("R %g: pin current %g A over the 3.3 V limit %g A", c.ROhm, c.PinCurrentA, a.Goals.PinCurrentA)
			}
		}
		if !strings.Contains(strings.Join(a.Cautions, "\n"), "common practice") || strings.Contains(strings.Join(a.Cautions, "\n"), "from memory") {
			t.Errorf("pin caution should state common practice, not memory: %q", a.Cautions)
		}
	})
	t.Run("E96 resistors with E24 capacitors", func(t *testing.T) {
		out, err := runDesign(t, "--series", "E96", "--builds", "50")
		if err != nil {
			t.Fatal(err)
		}
		if !strings.Contains(out, "capacitors from E24") {
			t.Errorf("output does not say the capacitors are E24:\n%s", out)
		}
		a := designJSON(t, "--series", "E96")
		e24 := advice.Series("E24")
		for _, c := range a.Candidates {
			if m := mantissa(c.CF); !inSeries(m, e24) {
				t.Errorf("capacitor %g F is not an E24 value", c.CF)
			}
		}
		_, err = runDesign(t, "--c-series", "E96")
		var ee *exitError
		if !errors.As(err, &ee) || ee.code != 2 || !strings.Contains(err.Error(), "rarely made beyond E24") {
			t.Errorf("--c-series E96: err = %v, want exit 2 with the reason", err)
		}
	})
	t.Run("refused values", func(t *testing.T) {
		for _, args := range [][]string{{"--supply", "0"}, {"--pin-current", "0"}, {"--vref", "20"}, {"--period", "20s"}, {"--load", "0"}, {"--bits", "2"}} {
			_, err := runDesign(t, args...)
			var ee *exitError
			if !errors.As(err, &ee) || ee.code != 2 || !strings.Contains(err.Error(), args[0]) {
				t.Errorf("%v: err = %v, want exit 2 naming the flag", args, err)
			}
		}
	})
	t.Run("230 V hazard", func(t *testing.T) {
		out, err := runDesign(t, "--supply", "230", "--builds", "20")
		if err != nil {
			t.Fatal(err)
		}
		for _, w := range []string{"HAZARD", "60 V DC", "local codes and licensed practice", "switch stage"} {
			if !strings.Contains(out, w) {
				t.Errorf("230 V output lacks %q", w)
			}
		}
		if strings.Contains(out, "extra-low voltage: follow") {
			t.Error("230 V output calls the circuit extra-low voltage")
		}
	})
	t.Run("48 V switch stage and rating", func(t *testing.T) {
		out, err := runDesign(t, "--supply", "48", "--builds", "20")
		if err != nil {
			t.Fatal(err)
		}
		// 48 V x 1.5 = 72 V -> the next common rating, 100 V (common practice).
		for _, w := range []string{"needs a switch stage", "capacitor voltage rating: at least 100 V"} {
			if !strings.Contains(out, w) {
				t.Errorf("48 V output lacks %q", w)
			}
		}
		if strings.Contains(out, "HAZARD") {
			t.Error("48 V output carries the hazard caution (60 V DC is the limit)")
		}
	})
	t.Run("two-state", func(t *testing.T) {
		out, err := runDesign(t, "--mode", "two-state", "--ripple", "100mV", "--builds", "20")
		if err != nil {
			t.Fatal(err)
		}
		for _, w := range []string{"deadband:", "both on together", "\tband", " band "} {
			if strings.Contains(out, w) {
				t.Errorf("two-state output has %q:\n%s", w, out)
			}
		}
		a := designJSON(t, "--mode", "two-state")
		if a.DeadbandCounts != nil || a.DeadbandWorking != nil {
			t.Errorf("two-state JSON has a deadband")
		}
	})
}

func mantissa(v float64) float64 {
	for v >= 10 {
		v /= 10
	}
	for v < 1 {
		v *= 10
	}
	return v
}

func inSeries(m float64, s []float64) bool {
	for _, x := range s {
		if d := m/x - 1; d < 1e-6 && d > -1e-6 {
			return true
		}
	}
	return false
}
