package advice

import (
	"fmt"
	"math"
	"strings"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/telemetry/si"
)

func (p *plant) cautions(a *Advice) []string {
	maxI := 0.0
	for _, c := range a.Candidates {
		maxI = math.Max(maxI, c.PinCurrentA)
	}
	c := p.supplyCautions(maxI)
	if p.kind == loop.ThreeState {
		c = append(c, "three-state with a high-side and a low-side switch: never turn both on together; give each path its own series resistor so that a firmware slip cannot short the supply")
	}
	for _, t := range a.Topology {
		if strings.HasPrefix(t.Change, "op-amp") {
			c = append(c, "op-amp stage: if it runs from a higher supply it needs a common ground with the board, and its output range must suit the load and the ADC input")
			break
		}
	}
	return c
}

func (p *plant) notes(a *Advice, sr *searchResult) []string {
	var n []string
	if p.cRatio < 0.85 || p.cRatio > 1.15 {
		n = append(n, fmt.Sprintf("the identified tau says the capacitor is %.0f %% %s than marked (a class-2 ceramic under DC bias does this); every candidate is designed with the real one (marked C x %.2f)",
			100*math.Abs(1-p.cRatio), map[bool]string{true: "lower", false: "higher"}[p.cRatio < 1], p.cRatio))
	}
	if p.rRatio != 1 {
		n = append(n, fmt.Sprintf("resistors are taken as %.2f x marked (measured)", p.rRatio))
	}
	if strings.EqualFold(p.rParts.Series, "E96") && len(p.rParts.List) == 0 && len(p.cParts.List) == 0 && !strings.EqualFold(p.cParts.Series, "E96") {
		n = append(n, fmt.Sprintf("resistors from E96, capacitors from %s: capacitors are rarely made beyond E24, the finest series they are commonly made in (E12 is the usual range)", p.cParts.String()))
	}
	if tau := TauForStep(p.period, p.g.rippleV, p.supply); !math.IsNaN(tau) {
		n = append(n, fmt.Sprintf("rule of the trade: one period's largest step is the ripple budget when R*C = T * Vs / dV = %s x %s / %s = %s (exact form -T / ln(1 - dV/Vs) = %s), e.g. %s with 1 µF; the table refines this with the loop model",
			si.Format(p.period, "s"), fmtV(p.supply), fmtV(p.g.rippleV), si.FormatDigits(p.period*p.supply/p.g.rippleV, "s", 3),
			si.FormatDigits(tau, "s", 3), si.FormatDigits(p.period*p.supply/p.g.rippleV/1e-6, "Ω", 3)))
	}
	n = append(n, fmt.Sprintf("ranking: pairs that meet the goals first; among them, those that keep the rules of the trade (load >= 10 R, pin current within half the %s limit, R from 1 kΩ to 100 kΩ, C from 10 nF to 10 µF) ahead of any that break one, named after the verdict; then those meeting the goals at more tolerance corners; then the widest margin on the goals",
		fmtA(p.g.pinA)))
	if len(a.Candidates) > 0 && a.Candidates[0].MeetsGoals && len(a.Candidates[0].RulesBroken) > 0 {
		m := fmt.Sprintf("no pair on hand meets the goals and keeps every rule of the trade; the top one breaks: %s",
			strings.Join(a.Candidates[0].RulesBroken, ", "))
		if contains(a.Candidates[0].RulesBroken, RuleLoad) {
			m += "; a follower buffer before the load lifts the load rule"
		}
		n = append(n, m)
	}
	src := "assumed"
	if a.Goals.NoiseMeasured {
		src = "measured"
	}
	n = append(n, fmt.Sprintf("figures are from the loop model (ADC noise %.2f counts rms, %s), not from formulas: %d pairs tried, %d pruned by closed forms, %d run in closed loop, the best run again over %d samples per setpoint with %d other seeds (figures: their mean; verdict: the worst seed)",
		p.g.noise, src, sr.tried, sr.tried-sr.simmed, sr.simmed, p.verifyWin, p.nSeeds))
	n = append(n, fmt.Sprintf("ripple is shown twice: at the node (noise-free, the spread between the 0.5 %% and 99.5 %% points over the steady part) and as the ADC reads it (max - min of the readings over the last half of the steady part, which starts at the first reading in the band, of a hold of the settling time plus %d samples, with %.2f counts rms noise and quantisation), the figure a --max-ripple gate measures; the suggested gate adds a quarter for margin",
		p.verifyWin, p.g.noise))
	n = append(n, fmt.Sprintf("settling is timed on a step from %d to %d counts and back, to within %s of the setpoint, at each setpoint (counts %v) the largest ripple counts",
		p.lo, p.hi, fmtV(a.Goals.SettleTolV), p.sps))
	if a.Tolerances != nil {
		n = append(n, fmt.Sprintf("tolerance: every shown pair is run at %d corners of the spread (each R and C extreme with the supply high and the reference low, and the other way round), and the top %d through %d random builds each (%s); the reference error moves every level with it and is not counted against the goals",
			nCorners, p.mcPairs, a.Tolerances.Builds, a.Tolerances.Text))
	}
	n = append(n, p.ratingNote())
	if len(a.Candidates) == 0 {
		var rs []string
		for _, k := range []string{"pin current too high", "cannot reach the top setpoint", "too slow", "ripple too high", "static error too high"} {
			if sr.reasons[k] > 0 {
				rs = append(rs, fmt.Sprintf("%d %s", sr.reasons[k], k))
			}
		}
		n = append(n, fmt.Sprintf("no pair comes near the goals; of %d pairs (a pair may fail several ways): %s", sr.tried, strings.Join(rs, ", ")))
	}
	return n
}

// suggestGate is a --max-ripple gate for an ADC-read ripple of v volts: a quarter more,
// at least one LSB more, rounded up to a step of 1, 2 or 5 in the next lower decade,
// written as the gate flag takes it ("40mV").
func suggestGate(v, lsb float64) (float64, string) {
	x := math.Max(1.25*v, v+lsb)
	if !(x > 0) {
		return 0, ""
	}
	step := math.Pow(10, math.Floor(math.Log10(x))-1)
	for _, m := range []float64{1, 2, 5, 10} {
		if x/(m*step) <= 20 {
			step *= m
			break
		}
	}
	g := roundSig(math.Ceil(x/step-1e-9)*step, 4)
	s := strings.ReplaceAll(si.Format(g, "V"), " ", "")
	s = strings.ReplaceAll(s, "µ", "u")
	return g, s
}

// fastProblem says first when the circuit is far too fast for the sample period: one
// period moves the output so far that the band would pass a quarter of full scale.
func (p *plant) fastProblem(ref *pair, present bool, top *Candidate) string {
	if ref == nil {
		return ""
	}
	tau := ref.ci.Tau(loop.Charge)
	quarter := math.Ldexp(1, p.bits) / 4
	_, up, down := bandOnly(ref.ci, p, p.period)
	step := math.Max(up, down)
	if tau >= p.period && step+p.g.sigmaK*p.g.noise < 2*quarter+1 {
		return ""
	}
	what := "the top pair"
	if present {
		what = "the present circuit"
	}
	s := fmt.Sprintf("%s is far too fast for the %s sample period: tau %s is %.2g periods, so one period moves the output up to %.0f counts, and no deadband up to a quarter of full scale (%.0f counts) can hold it",
		what, si.Format(p.period, "s"), si.FormatDigits(tau, "s", 3), tau/p.period, step, quarter)
	if t := TauForStep(p.period, p.g.rippleV, p.supply); !math.IsNaN(t) {
		s += fmt.Sprintf("; change the parts to R*C of about %s or more", si.FormatDigits(t, "s", 3))
	}
	if top != nil && present && top.MeetsGoals {
		s += fmt.Sprintf(", e.g. R %s with C %s (the top pair below)", si.Format(top.ROhm, "Ω"), si.Format(top.CF, "F"))
	}
	return s
}
