package tune

import (
	"context"
	"fmt"
	"math"
	"strings"
	"time"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
)

// BoardInfo is what the board said about itself before the plan.
type BoardInfo struct {
	VrefV          float64  `json:"vref_v"`
	ADCBits        int      `json:"adc_bits"`
	PeriodS        float64  `json:"period_s"`
	Mode           string   `json:"mode"`
	DeadbandCounts *int     `json:"deadband_counts"`
	SupplyV        *float64 `json:"supply_v"`
	ROhm           *float64 `json:"r_ohm"`
	CF             *float64 `json:"c_f"`
	LoadOhm        *float64 `json:"load_ohm"`
	Accepts        []string `json:"accepts"`
	SetpointCounts int      `json:"setpoint_counts"` // the board's own setpoint when tune started
	SeenLoCounts   int      `json:"setpoints_seen_low_counts"`
	SeenHiCounts   int      `json:"setpoints_seen_high_counts"`
}

// can reports whether the board said its set takes key.
func (b BoardInfo) can(key string) bool {
	for _, k := range b.Accepts {
		if k == key {
			return true
		}
	}
	return false
}

func (b BoardInfo) fullScale() float64 { return math.Ldexp(1, b.ADCBits) - 1 }
func (b BoardInfo) lsb() float64       { return b.VrefV / math.Ldexp(1, b.ADCBits) }
func (b BoardInfo) volts(c float64) float64 {
	return c * b.lsb()
}
func (b BoardInfo) counts(v float64) float64 { return v / b.lsb() }

// ask waits for the port, sends `info` (the only line before the plan is confirmed) and
// waits for the meta lines (a board that resets when the port opens sends them as it
// boots) and a few data lines.
func (s *session) ask(ctx context.Context, o Options) (BoardInfo, error) {
	var bi BoardInfo
	deadline := time.Now().Add(o.AskTimeout)
	if _, err := s.pump(ctx, o.AskTimeout, func() bool { return s.connected }); err != nil {
		return bi, err
	}
	if !s.connected {
		return bi, fmt.Errorf("%w: the port did not open within %v", ErrNoMeta, o.AskTimeout)
	}
	// Give a board that boots on the open a moment to say hello first.
	if _, err := s.pump(ctx, 300*time.Millisecond, func() bool { return s.boardLines > 0 }); err != nil {
		return bi, err
	}
	if err := s.send("info"); err != nil {
		return bi, err
	}
	sentAt, resent := time.Now(), false
	s.spLo, s.spHi = math.Inf(1), math.Inf(-1)
	k0 := s.k
	for {
		m := s.meta()
		described := m.Has(telemetry.FieldVref) && m.Has(telemetry.FieldADCBits)
		answered := m.Has(telemetry.FieldAccepts) || time.Since(sentAt) > 2*time.Second
		if described && answered && s.k-k0 >= 20 {
			break
		}
		if time.Now().After(deadline) {
			switch {
			case !described:
				return bi, fmt.Errorf("%w: no vref and adc_bits meta lines within %v (the README's protocol section lists them)", ErrNoMeta, o.AskTimeout)
			default:
				return bi, fmt.Errorf("%w: fewer than 20 data lines within %v", ErrNoMeta, o.AskTimeout)
			}
		}
		if !resent && !described && time.Since(sentAt) > 1500*time.Millisecond {
			resent = true
			if err := s.send("info"); err != nil {
				return bi, err
			}
		}
		kBefore := s.k
		if _, err := s.pump(ctx, 50*time.Millisecond, func() bool { return s.k > kBefore }); err != nil {
			return bi, err
		}
		if s.k > kBefore && s.haveLast {
			s.spLo = math.Min(s.spLo, s.last.SP)
			s.spHi = math.Max(s.spHi, s.last.SP)
		}
	}
	m := s.meta()
	bi.VrefV, bi.ADCBits = m.Vref, m.ADCBits
	bi.PeriodS = s.period()
	if !(bi.PeriodS > 0) {
		return bi, fmt.Errorf("%w: no sample period (period_us meta or t on the data lines)", ErrNoMeta)
	}
	bi.Mode = "three-state"
	if m.Has(telemetry.FieldMode) {
		bi.Mode = m.Mode.String()
	}
	if m.Has(telemetry.FieldDeadband) {
		d := int(math.Round(m.Deadband))
		bi.DeadbandCounts = &d
	}
	opt := func(f telemetry.MetaField, v float64) *float64 {
		if m.Has(f) {
			return &v
		}
		return nil
	}
	bi.SupplyV, bi.ROhm, bi.CF, bi.LoadOhm = opt(telemetry.FieldSupply, m.Supply), opt(telemetry.FieldR, m.R), opt(telemetry.FieldC, m.C), opt(telemetry.FieldLoad, m.Load)
	if m.Has(telemetry.FieldAccepts) && m.Accepts != "" {
		bi.Accepts = strings.Split(m.Accepts, ",")
	}
	bi.SetpointCounts = int(s.last.SP)
	bi.SeenLoCounts, bi.SeenHiCounts = int(s.spLo), int(s.spHi)
	return bi, nil
}

// Abilities says in words which steps run by themselves and which need the user.
func (b BoardInfo) Abilities() []string {
	var out []string
	if len(b.Accepts) == 0 {
		out = append(out, "the board lists no set keys (no accepts= in its info answer): every setpoint is dialled in by hand (guided), and the advised deadband goes into the header only")
		return out
	}
	out = append(out, "the board's set takes "+strings.Join(b.Accepts, ", "))
	if b.can("sp") {
		out = append(out, "identify and verify: tune steps the setpoint itself")
	} else {
		out = append(out, "identify and verify: no set sp, so you dial in each setpoint (guided)")
	}
	if b.can("deadband") {
		out = append(out, "hold dwells with a wide band and the advised deadband: sent by tune")
	} else {
		out = append(out, "no set deadband: no wide-band holds, and the advised band goes into the header for you to build in")
	}
	if b.Mode == "two-state" && !b.can("mode") {
		out = append(out, "two-state and no set mode: a deadband does nothing until the firmware runs three-state")
	}
	if b.can("period_us") {
		out = append(out, "set period_us: the advised period is sent only with --apply-period")
	}
	return out
}

// Plan is what tune will do, shown before any set.
type Plan struct {
	Range          Range    `json:"range_v"`
	RangeFrom      string   `json:"range_from"` // "--range" or "setpoints in use"
	LoCounts       int      `json:"low_setpoint_counts"`
	HiCounts       int      `json:"high_setpoint_counts"`
	MarginCounts   int      `json:"margin_counts"`
	WideBandCounts *int     `json:"wide_band_counts"` // nil: the board takes no set deadband
	ThreeState     bool     `json:"switch_to_three_state"`
	Restore        string   `json:"restore_line"`
	Guided         bool     `json:"guided"`
	Abilities      []string `json:"abilities"`
}

// makePlan places the two setpoints inside the range, a quarter of the span in from
// each end, and a wide band that keeps the holds inside the range.
func makePlan(b BoardInfo, o Options) (*Plan, error) {
	p := &Plan{Range: o.Range, RangeFrom: "--range", Abilities: b.Abilities()}
	fs := b.fullScale()
	if p.Range.IsZero() {
		if b.SeenHiCounts-b.SeenLoCounts < 8 {
			return nil, fmt.Errorf("%w: only one setpoint in use (%s); give the span the output may visit with --range, such as --range 0.5V..3V",
				ErrUsage, si.Format(b.volts(float64(b.SetpointCounts)), "V"))
		}
		p.Range = Range{b.volts(float64(b.SeenLoCounts)), b.volts(float64(b.SeenHiCounts))}
		p.RangeFrom = "setpoints in use"
	}
	lo, hi := b.counts(p.Range.Lo), b.counts(p.Range.Hi)
	if lo < 0 || hi > fs {
		return nil, fmt.Errorf("%w: the range %s is outside what the ADC reads (0..%s)", ErrUsage, p.Range, si.Format(b.volts(fs), "V"))
	}
	span := hi - lo
	if span < 16 {
		return nil, fmt.Errorf("%w: the range %s spans %.0f counts; tune needs at least 16", ErrUsage, p.Range, span)
	}
	// The setpoints sit in from the ends by the wide band (a sixteenth of the span) and a
	// twentieth of the span, so that a hold in the band and a step past it stay inside
	// the range while the steps between them stay large (long charge and discharge runs
	// pin tau down sooner).
	wide := math.Min(math.Floor(span/16), math.Floor((fs+1)/4))
	p.LoCounts = int(math.Ceil(lo + span/20 + wide))
	p.HiCounts = int(math.Floor(hi - span/20 - wide))
	p.MarginCounts = int(math.Max(4, math.Ceil(0.03*fs)))
	p.Guided = !b.can("sp")
	if b.can("deadband") {
		w := int(wide)
		if b.DeadbandCounts != nil && w <= *b.DeadbandCounts {
			w = *b.DeadbandCounts
		}
		p.WideBandCounts = &w
		p.ThreeState = b.Mode == "two-state" && b.can("mode")
	}
	p.Restore = restoreLine(b)
	return p, nil
}

// restoreLine puts back every setting tune may change, in one set line.
func restoreLine(b BoardInfo) string {
	var kv []string
	if b.can("sp") {
		kv = append(kv, fmt.Sprintf("sp=%d", b.SetpointCounts))
	}
	if b.can("mode") {
		kv = append(kv, "mode="+b.Mode)
	}
	if b.can("deadband") && b.DeadbandCounts != nil {
		kv = append(kv, fmt.Sprintf("deadband=%d", *b.DeadbandCounts))
	}
	if b.can("period_us") {
		kv = append(kv, fmt.Sprintf("period_us=%d", int(math.Round(b.PeriodS*1e6))))
	}
	if len(kv) == 0 {
		return ""
	}
	return "set " + strings.Join(kv, " ")
}

// Text is the plan as shown before the confirmation.
func (p *Plan) Text(b BoardInfo) string {
	var sb strings.Builder
	fmt.Fprintf(&sb, "board: vref %s, %d-bit ADC, period %s, %s", si.Format(b.VrefV, "V"), b.ADCBits, si.Format(b.PeriodS, "s"), b.Mode)
	if b.DeadbandCounts != nil {
		fmt.Fprintf(&sb, ", deadband %d", *b.DeadbandCounts)
	}
	fmt.Fprintf(&sb, ", setpoint now %s\n", si.Format(b.volts(float64(b.SetpointCounts)), "V"))
	for _, a := range p.Abilities {
		fmt.Fprintf(&sb, "  - %s\n", a)
	}
	fmt.Fprintf(&sb, "plan: the output stays within %s (%s); a reading beyond it by more than %d counts stops the run\n", p.Range, p.RangeFrom, p.MarginCounts)
	how := "set sp="
	if p.Guided {
		how = "you dial in "
	}
	fmt.Fprintf(&sb, "  1 before: steps between %s (%s%d) and %s (%s%d) with the board's own band, about 5 tau each\n",
		si.Format(b.volts(float64(p.LoCounts)), "V"), how, p.LoCounts, si.Format(b.volts(float64(p.HiCounts)), "V"), how, p.HiCounts)
	if p.WideBandCounts != nil {
		extra := ""
		if p.ThreeState {
			extra = " mode=three-state"
		}
		fmt.Fprintf(&sb, "  2 identify: set deadband=%d%s, the same steps with holds, repeated until tau is identifiable\n", *p.WideBandCounts, extra)
	} else {
		sb.WriteString("  2 identify: the same steps again until tau is identifiable\n")
	}
	sb.WriteString("  3 advise: the deadband from the advice engine\n")
	if p.WideBandCounts != nil {
		sb.WriteString("  4 verify: set deadband=<advised>, the same steps, before/after compared\n")
	} else {
		sb.WriteString("  4 verify: skipped (the board takes no set deadband)\n")
	}
	if p.Restore != "" {
		fmt.Fprintf(&sb, "  5 restore: %s\n", p.Restore)
	} else {
		sb.WriteString("  5 restore: nothing to restore (tune sends no set)\n")
	}
	return sb.String()
}
