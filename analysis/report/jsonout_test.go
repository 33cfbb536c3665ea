package report

import (
	"math"
	"testing"
)

func TestMarshalJSON(t *testing.T) {
	v := struct {
		A float64  `json:"a"`
		B float64  `json:"b"`
		C int64    `json:"c"`
		D string   `json:"d"`
		E []any    `json:"e"`
		F *float64 `json:"f"`
		G float64  `json:"g"`
		H float64  `json:"h"`
	}{
		A: 1.9999999999999998, // 2 - 2^-52: the sum that prompted the rounding
		B: 0.04447373773551712,
		C: 123456789012, // a count stays exact
		D: `1.9999999999999998 <b>&"\` + "\x1b",
		E: []any{-2.5e-7 / 3, 1e21 / 3, 0.0, -0.0, math.Pi},
		G: 46543.71050997561,
		H: -9.907234767890727e-7,
	}
	got, err := MarshalJSON(v, false)
	if err != nil {
		t.Fatal(err)
	}
	want := `{"a":2,"b":0.0444737,"c":123456789012,"d":"1.9999999999999998 <b>&\"\\\u001b","e":[-8.33333e-8,333333000000000000000,0,0,3.14159],"f":null,"g":46543.7,"h":-9.90723e-7}`
	if string(got) != want {
		t.Errorf("got\n%s\nwant\n%s", got, want)
	}
	ind, err := MarshalJSON(map[string]any{"x": []float64{0.1 + 0.2}}, true)
	if err != nil {
		t.Fatal(err)
	}
	if string(ind) != "{\n  \"x\": [\n    0.3\n  ]\n}" {
		t.Errorf("indented: %q", ind)
	}
	if _, err := MarshalJSON(math.Inf(1), false); err == nil {
		t.Error("+Inf encoded; want the encoder's error")
	}
}
