package advice

import (
	"math"
	"reflect"
	"slices"

	"github.com/caploop/caploop/analysis"
)

// Inputs is everything FromSummaryPlant designs from, taken from a summary: the request
// it builds (board, plant, measured ratios, noise, used setpoints, goals), the present
// circuit and the reason it cannot advise, if any. Two summaries with the same Inputs get
// the same advice (the checking simulations run from a fixed seed), so a live screen
// need not advise again until its Inputs moved (see Near).
type Inputs struct {
	req Request
	cur present
	has bool   // cur is set
	err string // requestFromSummary's error, "" when none
}

// InputsOf returns the inputs FromSummaryPlant(s, in, g) would design from.
func InputsOf(s *analysis.Summary, in PlantInput, g Goals) Inputs {
	if s == nil {
		return Inputs{err: "nil summary"}
	}
	req, cur, err := requestFromSummary(s, in, g)
	if err != nil {
		return Inputs{err: err.Error()}
	}
	// The engine takes the used setpoints as a set: order and repeats do not count.
	sps := make([]float64, len(req.Goals.Setpoints))
	for i, v := range req.Goals.Setpoints {
		sps[i] = math.Round(v)
	}
	slices.Sort(sps)
	req.Goals.Setpoints = slices.Compact(sps)
	if req.Plant != nil {
		p := *req.Plant
		req.Plant = &p
	}
	out := Inputs{req: req}
	if cur != nil {
		out.cur, out.has = *cur, true
	}
	return out
}

// InputsOfSummary is InputsOf with the plant the summary identified, as FromSummary uses.
func InputsOfSummary(s *analysis.Summary, g Goals) Inputs {
	if s == nil {
		return InputsOf(nil, PlantInput{}, g)
	}
	return InputsOf(s, PlantOf(s), g)
}

// Near reports whether the advice for a and b would differ only through changes of its
// measured inputs smaller than rel (a fraction) of their values: every number within rel
// of the other, everything else (counts, kinds, setpoints, deadband, texts) equal.
func (a Inputs) Near(b Inputs, rel float64) bool {
	return near(reflect.ValueOf(a), reflect.ValueOf(b), rel)
}

// near walks two values of one type; floats compare within rel, the rest exactly.
// (reflect reads unexported fields too, so a field added to Request later is compared
// without a change here.)
func near(a, b reflect.Value, rel float64) bool {
	switch a.Kind() {
	case reflect.Float32, reflect.Float64:
		x, y := a.Float(), b.Float()
		if x == y || (math.IsNaN(x) && math.IsNaN(y)) {
			return true
		}
		return math.Abs(x-y) <= rel*math.Max(math.Abs(x), math.Abs(y))
	case reflect.Struct:
		for i := 0; i < a.NumField(); i++ {
			if !near(a.Field(i), b.Field(i), rel) {
				return false
			}
		}
		return true
	case reflect.Pointer, reflect.Interface:
		if a.IsNil() || b.IsNil() {
			return a.IsNil() == b.IsNil()
		}
		return near(a.Elem(), b.Elem(), rel)
	case reflect.Slice, reflect.Array:
		if a.Len() != b.Len() {
			return false
		}
		for i := 0; i < a.Len(); i++ {
			if !near(a.Index(i), b.Index(i), rel) {
				return false
			}
		}
		return true
	case reflect.Bool:
		return a.Bool() == b.Bool()
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		return a.Int() == b.Int()
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64, reflect.Uintptr:
		return a.Uint() == b.Uint()
	case reflect.String:
		return a.String() == b.String()
	}
	// Maps, funcs, channels: none in a Request today; count them as changed.
	return false
}
