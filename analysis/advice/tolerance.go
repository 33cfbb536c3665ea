package advice

import (
	"fmt"
	"math"
	"strings"

	"github.com/caploop/caploop/telemetry/si"
)

// Capacitor kinds for --c-kind.
const (
	CKindFilm         = "film"
	CKindC0G          = "c0g"
	CKindX7R          = "x7r"
	CKindElectrolytic = "electrolytic"
)

// CKinds lists the capacitor kinds Tolerances knows.
var CKinds = []string{CKindFilm, CKindC0G, CKindX7R, CKindElectrolytic}

// Defaults of the tolerance analysis.
const (
	// DefaultBuilds is how many random builds the Monte Carlo runs per checked pair.
	DefaultBuilds = 300
	// DefaultSupplyTolPct and DefaultVrefTolPct are the assumed spreads of the supply
	// (a regulated rail) and the ADC reference, +-% (assumed; give your parts' figures).
	DefaultSupplyTolPct = 2
	DefaultVrefTolPct   = 1
	// summaryBuilds is the default number of builds of a summary's advice (top pair only).
	summaryBuilds = 100
	// summaryQuick is how many closed-form survivors a summary's advice runs.
	summaryQuick = 64
	// mcPairs is how many of the top pairs (after the corner ranking) get a Monte Carlo.
	mcPairs = 3
	// mcWindow is the steady window of each build's run, samples.
	mcWindow = quickWindow
)

// Tolerances describe the spread of real parts. Zero values mean the defaults.
type Tolerances struct {
	RPct      float64 // resistor tolerance, +-%; 0 = 5 % for E6-E24 and lists, 1 % for E96
	CKind     string  // film, c0g, x7r, electrolytic; "" = film
	CPct      float64 // capacitor tolerance, +-%; 0 = by kind
	SupplyPct float64 // supply tolerance, +-%; 0 = DefaultSupplyTolPct
	VrefPct   float64 // reference tolerance, +-%; 0 = DefaultVrefTolPct
	Builds    int     // Monte Carlo builds per checked pair; 0 = DefaultBuilds, < 0 = none
}

// TolerancesUsed are the resolved spreads, as stated in the output.
type TolerancesUsed struct {
	RPct          float64 `json:"r_pct"`
	CKind         string  `json:"c_kind"`
	CLowPct       float64 `json:"c_low_pct"`  // the capacitance may be this much under marked
	CHighPct      float64 `json:"c_high_pct"` // and this much over
	SupplyPct     float64 `json:"supply_pct"`
	VrefPct       float64 `json:"vref_pct"`
	BiasRetained  float64 `json:"dc_bias_retained"` // X7R: share of C left at the operating level (1 = none lost)
	BiasAtV       float64 `json:"dc_bias_at_v"`     // the operating level the bias loss is read at
	RatingV       float64 `json:"c_rating_v"`       // the capacitor voltage rating assumed
	LeakOhm       float64 `json:"c_leak_ohm"`       // electrolytic: leakage as a load, ohm
	Builds        int     `json:"builds"`
	NoiseRMSCount float64 `json:"noise_rms_counts"`
	Text          string  `json:"text"`
}

// ToleranceVerdict is what the spread of real parts does to one pair.
type ToleranceVerdict struct {
	Corners        int     `json:"corners"`         // extreme combinations run
	CornersMeeting int     `json:"corners_meeting"` // of them, meeting every goal
	WorstCornerPPV float64 `json:"worst_corner_ripple_pp_v"`
	Builds         int     `json:"builds"`            // Monte Carlo builds (0 = none run)
	BuildsMeeting  int     `json:"builds_meeting"`    // of them, meeting every goal
	Yield          float64 `json:"yield"`             // builds meeting / builds
	YieldSE        float64 `json:"yield_se"`          // its standard error, sqrt(p(1-p)/n)
	WorstRipplePPV float64 `json:"worst_ripple_pp_v"` // over the builds
	WorstSettleS   float64 `json:"worst_settle_s"`
	Text           string  `json:"text"`
}

// tolerances is the resolved spread the engine samples from.
type tolerances struct {
	rTol, cLo, cHi, sTol, vTol float64 // fractions
	kind                       string
	bias                       float64 // C retained under DC bias (X7R), 1 = none lost
	biasAt                     float64
	leak                       float64 // electrolytic leakage as a load, ohm; 0 = none
	builds                     int
}

// x7rBias is the share of capacitance an X7R ceramic keeps against the DC bias as a
// fraction of its rating, a typical small-case part (common practice: the loss grows with
// the bias and is worse in small cases; measure yours or use the capture's C ratio).
var x7rBias = [][2]float64{{0, 1}, {0.2, 0.9}, {0.4, 0.75}, {0.6, 0.6}, {0.8, 0.5}, {1, 0.42}}

// biasRetained interpolates x7rBias at bias fraction f.
func biasRetained(f float64) float64 {
	f = math.Max(0, math.Min(1, f))
	for i := 1; i < len(x7rBias); i++ {
		a, b := x7rBias[i-1], x7rBias[i]
		if f <= b[0] {
			return a[1] + (b[1]-a[1])*(f-a[0])/(b[0]-a[0])
		}
	}
	return x7rBias[len(x7rBias)-1][1]
}

// electrolyticLeak is the leakage of an aluminium electrolytic as a resistance at working
// voltage v: I = 0.01 C V_rated (uA, C in uF) or 3 uA, whichever is larger (the usual
// datasheet limit after two minutes, common practice), so R = v / I.
func electrolyticLeak(c, rating, v float64) float64 {
	i := math.Max(0.01*(c/1e-6)*rating*1e-6, 3e-6)
	return math.Max(v, 0.1) / i
}

// resolveTol fills the tolerance defaults from the parts and the kind.
func (p *plant) resolveTol(t Tolerances) error {
	tl := tolerances{kind: strings.ToLower(strings.TrimSpace(t.CKind)), bias: 1}
	if tl.kind == "" {
		tl.kind = CKindFilm
	}
	for _, x := range []float64{t.RPct, t.CPct, t.SupplyPct, t.VrefPct} {
		if x < 0 || x >= 100 || math.IsNaN(x) {
			return fmt.Errorf("advice: a tolerance must be 0 to under 100 %%, got %g", x)
		}
	}
	tl.rTol = t.RPct / 100
	if tl.rTol == 0 {
		tl.rTol = 0.05
		if strings.EqualFold(p.rParts.Series, "E96") && len(p.rParts.List) == 0 {
			tl.rTol = 0.01
		}
	}
	switch tl.kind {
	case CKindFilm, CKindC0G:
		tl.cLo, tl.cHi = 0.05, 0.05
	case CKindX7R:
		tl.cLo, tl.cHi = 0.10, 0.10
	case CKindElectrolytic:
		tl.cLo, tl.cHi = 0.20, 0.80
	default:
		return fmt.Errorf("advice: capacitor kind %q: want one of %s", t.CKind, strings.Join(CKinds, ", "))
	}
	if t.CPct > 0 {
		tl.cLo, tl.cHi = t.CPct/100, t.CPct/100
	}
	tl.sTol = orDefault(t.SupplyPct, DefaultSupplyTolPct) / 100
	tl.vTol = orDefault(t.VrefPct, DefaultVrefTolPct) / 100
	tl.builds = t.Builds
	if tl.builds == 0 {
		tl.builds = DefaultBuilds
	}
	if tl.builds > 100000 {
		return fmt.Errorf("advice: at most 100000 builds, got %d", tl.builds)
	}
	p.tol = tl
	// The DC-bias loss at the operating level (the top used setpoint), unless the capture
	// measured the real capacitance already.
	tl.biasAt = p.nodeV(p.hi)
	if tl.kind == CKindX7R && !p.cMeasured {
		tl.bias = biasRetained(tl.biasAt / p.capRating())
	}
	p.tol = tl
	return nil
}

// leakFor is the leakage of a capacitor of marked value c as a resistance (electrolytic
// only), combined with any leakage the capture measured.
func (p *plant) leakFor(c float64) float64 {
	if p.tol.kind != CKindElectrolytic {
		return p.leak
	}
	l := electrolyticLeak(c, p.capRating(), p.tol.biasAt)
	if p.leak > 0 {
		l = l * p.leak / (l + p.leak)
	}
	return l
}

func (p *plant) tolUsed() *TolerancesUsed {
	t := p.tol
	u := &TolerancesUsed{RPct: 100 * t.rTol, CKind: t.kind, CLowPct: 100 * t.cLo, CHighPct: 100 * t.cHi,
		SupplyPct: 100 * t.sTol, VrefPct: 100 * t.vTol, BiasRetained: t.bias, BiasAtV: t.biasAt,
		RatingV: p.capRating(), Builds: max(t.builds, 0), NoiseRMSCount: p.g.noise}
	c := fmt.Sprintf("%s -%.0f/+%.0f %%", t.kind, 100*t.cLo, 100*t.cHi)
	if t.cLo == t.cHi {
		c = fmt.Sprintf("%s +-%.0f %%", t.kind, 100*t.cLo)
	}
	u.Text = fmt.Sprintf("R +-%g %%, C %s, supply +-%g %%, reference +-%g %%, ADC noise %.2f counts rms; each part uniform over its tolerance",
		100*t.rTol, c, 100*t.sTol, 100*t.vTol, p.g.noise)
	if t.kind == CKindX7R {
		if p.cMeasured {
			u.Text += "; DC-bias loss taken from the capture's measured C"
		} else {
			u.Text += fmt.Sprintf("; X7R keeps %.0f %% of its value at %s on a %s part (DC-bias curve of a typical small case, common practice)",
				100*t.bias, fmtV(t.biasAt), fmtV(u.RatingV))
		}
	}
	if t.kind == CKindElectrolytic {
		u.LeakOhm = electrolyticLeak(1e-6, u.RatingV, t.biasAt)
		u.Text += fmt.Sprintf("; electrolytic leakage 0.01 C V or 3 µA, whichever is larger (common practice), modelled as a load (%s for 1 µF)",
			si.Format(u.LeakOhm, "Ω"))
	}
	return u
}
