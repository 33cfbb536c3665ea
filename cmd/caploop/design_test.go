package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"strings"
	"testing"
)

// runDesign runs `caploop design args...` in process and returns stdout and the error.
func runDesign(t *testing.T, args ...string) (string, error) {
	t.Helper()
	root := newRoot()
	var out bytes.Buffer
	root.SetOut(&out)
	root.SetErr(&out)
	root.SetArgs(append([]string{"design"}, args...))
	err := root.Execute()
	return out.String(), err
}

func TestDesignCommand(t *testing.T) {
	typical := []string{"--supply", "5", "--vref", "5", "--bits", "10", "--period", "1ms",
		"--ripple", "100mV", "--settle", "200ms", "--series", "E12", "--load", "1M"}
	t.Run("text", func(t *testing.T) {
		out, err := runDesign(t, typical...)
		if err != nil {
			t.Fatal(err)
		}
		for _, w := range []string{"deadband:", "trade rule: a 100 mV band is 100 mV x 1023 / 5 V = 20.46 -> 21 counts",
			"R and C, best first", "meets goals", "sample period:", "cautions:",
			// The trade's worked example (common practice): 1 ms, 0.1 V, 5 V -> R*C = 0.05 s, about 50 kOhm for 1 uF.
			"1 ms x 5 V / 100 mV = 50 ms", "50 kΩ with 1 µF"} {
			if !strings.Contains(out, w) {
				t.Errorf("output lacks %q:\n%s", w, out)
			}
		}
	})
	t.Run("json", func(t *testing.T) {
		out, err := runDesign(t, append(typical, "--json")...)
		if err != nil {
			t.Fatal(err)
		}
		var doc struct {
			DeadbandCounts *int `json:"deadband_counts"`
			Candidates     []struct {
				ROhm    float64 `json:"r_ohm"`
				CF      float64 `json:"c_f"`
				Ripple  float64 `json:"predicted_ripple_pp_v"`
				Settle  float64 `json:"predicted_settle_s"`
				PinA    float64 `json:"pin_current_a"`
				Verdict string  `json:"verdict"`
				Meets   bool    `json:"meets_goals"`
			} `json:"candidates"`
		}
		if err := json.Unmarshal([]byte(out), &doc); err != nil {
			t.Fatalf("not JSON: %v\n%s", err, out)
		}
		// No HTML escaping: the deadband rule's "<" stays "<".
		if strings.Contains(out, `\u003c`) || !strings.Contains(out, " < ") {
			t.Errorf("want a plain < in the JSON, no \\u003c:\n%s", out[:min(len(out), 1500)])
		}
		if !strings.Contains(out, `"schema_version": 1`) {
			t.Errorf("no schema_version 1 at the top")
		}
		if doc.DeadbandCounts == nil || len(doc.Candidates) == 0 {
			t.Fatalf("doc = %+v, want a deadband and candidates", doc)
		}
		c := doc.Candidates[0]
		// JSON numbers keep 6 significant digits: the pin current to that precision.
		if !c.Meets || c.Verdict != "meets goals" || c.Ripple > 0.1 || c.Settle > 0.2 || math.Abs(c.PinA-5/c.ROhm) > 5e-6*c.PinA {
			t.Errorf("top candidate %+v does not meet 100 mV / 200 ms or has the wrong pin current", c)
		}
	})
	t.Run("parts list and percent ripple", func(t *testing.T) {
		out, err := runDesign(t, "--ripple", "2%", "--c", "100n 470n 1u 2.2u", "--mode", "two-state", "--json")
		if err != nil {
			t.Fatal(err)
		}
		if !strings.Contains(out, `"c_parts": "100 nF 470 nF 1 µF 2.2 µF"`) || !strings.Contains(out, `"ripple_pp_v": 0.1`) {
			t.Errorf("parts list or ripple not taken:\n%s", out[:min(len(out), 2000)])
		}
	})
	t.Run("rule breakers ranked below", func(t *testing.T) {
		// A parts box with one pair that keeps R_L >= 10 R (common practice) and pairs that
		// meet the numeric goals but break it; comma-separated lists are accepted too.
		out, err := runDesign(t, "--ripple", "100mV", "--settle", "500ms", "--load", "1.31M", "--setpoints", "246,410",
			"--r", "47k,470k,680k", "--c", "560n,680n,1u")
		if err != nil {
			t.Fatal(err)
		}
		lines := strings.Split(out, "\n")
		var rows []string
		for i, l := range lines {
			if strings.Contains(l, "R and C, best first") {
				for _, r := range lines[i+2:] {
					if strings.Contains(r, "trades:") || strings.Contains(r, "over the spread of parts") || strings.TrimSpace(r) == "" {
						break
					}
					rows = append(rows, r)
				}
			}
		}
		if len(rows) < 2 || !strings.Contains(rows[0], "47 kΩ") || !strings.HasSuffix(strings.TrimSpace(rows[0]), "meets goals") {
			t.Fatalf("top row is not 47 kΩ meeting the goals with no rule broken:\n%s", strings.Join(rows, "\n"))
		}
		for _, r := range rows[1:] {
			if !strings.Contains(r, "meets goals; load under 10 R, R over 100 kΩ") {
				t.Errorf("row %q lacks the broken rules in its verdict", r)
			}
		}
		if !strings.Contains(out, "ranking: pairs that meet the goals first") {
			t.Errorf("output lacks the ranking note:\n%s", out)
		}
	})
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"bad ripple", []string{"--ripple", "lots"}, "--ripple"},
		{"bad series", []string{"--series", "E7"}, "--series"},
		{"bad mode", []string{"--mode", "four-state"}, "--mode"},
		{"period below conversion", []string{"--period", "50us"}, "conversion time"},
		{"bad parts", []string{"--c", "1u x"}, "--c"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := runDesign(t, c.args...)
			var ee *exitError
			if !errors.As(err, &ee) || ee.code != 2 || !strings.Contains(err.Error(), c.want) {
				t.Errorf("err = %v, want exit code 2 mentioning %q", err, c.want)
			}
		})
	}
}
