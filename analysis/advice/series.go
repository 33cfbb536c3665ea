package advice

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/caploop/caploop/telemetry/si"
)

// The preferred-number series of IEC 60063, one decade each, mantissas in [1, 10).
// Written from memory; E6 is every other E12 value and E12 every other E24 value.
// E24 and the shorter series do not follow round(10^(i/n)) everywhere (2.7, 3.0, 3.3, 3.6,
// 3.9, 4.3, 4.7 and 8.2 are the standard's historical values); E96 does.
var (
	e6  = []float64{1.0, 1.5, 2.2, 3.3, 4.7, 6.8}
	e12 = []float64{1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2}
	e24 = []float64{1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
		3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1}
	e96 = []float64{
		1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24, 1.27, 1.30,
		1.33, 1.37, 1.40, 1.43, 1.47, 1.50, 1.54, 1.58, 1.62, 1.65, 1.69, 1.74,
		1.78, 1.82, 1.87, 1.91, 1.96, 2.00, 2.05, 2.10, 2.15, 2.21, 2.26, 2.32,
		2.37, 2.43, 2.49, 2.55, 2.61, 2.67, 2.74, 2.80, 2.87, 2.94, 3.01, 3.09,
		3.16, 3.24, 3.32, 3.40, 3.48, 3.57, 3.65, 3.74, 3.83, 3.92, 4.02, 4.12,
		4.22, 4.32, 4.42, 4.53, 4.64, 4.75, 4.87, 4.99, 5.11, 5.23, 5.36, 5.49,
		5.62, 5.76, 5.90, 6.04, 6.19, 6.34, 6.49, 6.65, 6.81, 6.98, 7.15, 7.32,
		7.50, 7.68, 7.87, 8.06, 8.25, 8.45, 8.66, 8.87, 9.09, 9.31, 9.53, 9.76,
	}
)

// SeriesNames lists the series Series knows, coarsest first.
var SeriesNames = []string{"E6", "E12", "E24", "E96"}

// Series returns the mantissas of one decade of the named IEC 60063 series ("E6", "E12",
// "E24" or "E96", case-insensitive), ascending in [1, 10), or nil for an unknown name.
// The slice is a copy.
func Series(name string) []float64 {
	var s []float64
	switch strings.ToUpper(strings.TrimSpace(name)) {
	case "E6":
		s = e6
	case "E12":
		s = e12
	case "E24":
		s = e24
	case "E96":
		s = e96
	default:
		return nil
	}
	return append([]float64(nil), s...)
}

// Snap returns the preferred number of the named series nearest to v in log distance
// (the ratio, not the difference), so that 9.9 snaps to 10 in E12 and 0.98 to 1.0.
// Ties go to the larger value. It returns NaN for v <= 0, NaN or an unknown series.
func Snap(v float64, series string) float64 {
	s := Series(series)
	if s == nil || !(v > 0) || math.IsInf(v, 0) {
		return math.NaN()
	}
	return snapTo(v, s)
}

// snapTo snaps v > 0 to the decade mantissas s.
func snapTo(v float64, s []float64) float64 {
	e := math.Floor(math.Log10(v))
	m := v / math.Pow(10, e)
	// Candidates: every mantissa of this decade plus the first of the next one, and the
	// last of the previous one (m can land a hair under 1 from rounding).
	best, bestD := 0.0, math.Inf(1)
	try := func(x float64) {
		d := math.Abs(math.Log(x / m))
		if d < bestD-1e-12 || (math.Abs(d-bestD) <= 1e-12 && x > best) {
			best, bestD = x, d
		}
	}
	for _, x := range s {
		try(x)
	}
	try(10 * s[0])
	try(s[len(s)-1] / 10)
	return roundSig(best*math.Pow(10, e), 4)
}

// roundSig rounds v to n significant digits, so that 4.7*1e-6 prints as 4.7e-06.
func roundSig(v float64, n int) float64 {
	if v == 0 {
		return 0
	}
	p := math.Pow(10, float64(n-1)-math.Floor(math.Log10(math.Abs(v))))
	return math.Round(v*p) / p
}

// Values returns every value of the named series in [lo, hi], ascending.
func Values(series string, lo, hi float64) ([]float64, error) {
	s := Series(series)
	if s == nil {
		return nil, fmt.Errorf("advice: unknown series %q (want one of %s)", series, strings.Join(SeriesNames, ", "))
	}
	if !(lo > 0) || !(hi >= lo) {
		return nil, fmt.Errorf("advice: empty or bad value range: min %g, max %g (want 0 < min <= max)", lo, hi)
	}
	var out []float64
	for e := math.Floor(math.Log10(lo)) - 1; e <= math.Ceil(math.Log10(hi)); e++ {
		for _, m := range s {
			v := roundSig(m*math.Pow(10, e), 4)
			if v >= lo*(1-1e-9) && v <= hi*(1+1e-9) {
				out = append(out, v)
			}
		}
	}
	return out, nil
}

// Parts is what is on hand for one component: either a series over a range of decades
// or an explicit list of values.
type Parts struct {
	Series string    // "E6", "E12", "E24", "E96"; ignored when List is set
	Min    float64   // smallest value to try (SI units); 0 = the default for the part
	Max    float64   // largest value to try; 0 = the default for the part
	List   []float64 // explicit values on hand, SI units
}

// ParseParts reads a parts specification: a series name ("E12") or a list of values with
// SI prefixes separated by spaces or commas ("100n 470n 1u 2.2u"). unit is the symbol the
// values may carry ("F" or "Ω").
func ParseParts(spec, unit string) (Parts, error) {
	spec = strings.TrimSpace(spec)
	if spec == "" {
		return Parts{}, fmt.Errorf("advice: empty parts list")
	}
	if Series(spec) != nil {
		return Parts{Series: strings.ToUpper(spec)}, nil
	}
	f := strings.FieldsFunc(spec, func(r rune) bool { return r == ' ' || r == ',' || r == ';' || r == '\t' })
	var p Parts
	for _, w := range f {
		v, err := si.ParseUnit(w, unit)
		if err != nil {
			return Parts{}, fmt.Errorf("advice: parts list %q: %w", spec, err)
		}
		if !(v > 0) {
			return Parts{}, fmt.Errorf("advice: parts list %q: value %q is not positive", spec, w)
		}
		p.List = append(p.List, v)
	}
	sort.Float64s(p.List)
	return p, nil
}

// values lists the values of p, using lo and hi when p has no range of its own.
func (p Parts) values(lo, hi float64) ([]float64, error) {
	if len(p.List) > 0 {
		return append([]float64(nil), p.List...), nil
	}
	if p.Min > 0 {
		lo = p.Min
	}
	if p.Max > 0 {
		hi = p.Max
	}
	name := p.Series
	if name == "" {
		name = "E12"
	}
	return Values(name, lo, hi)
}

// String names the parts: the series and range, or the list.
func (p Parts) String() string {
	if len(p.List) > 0 {
		return "list"
	}
	if p.Series == "" {
		return "E12"
	}
	return p.Series
}
