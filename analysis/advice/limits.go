package advice

import (
	"fmt"
	"math"

	"github.com/caploop/caploop/telemetry"
)

// Limits that follow the board's supply (common practice unless said otherwise).
const (
	// pinLowSupplyV: at or below this supply the board is taken as a 3.3 V part, whose
	// pins commonly allow 4-8 mA each at the full output level (20 mA only with a relaxed
	// output level): the default limit is pinLowSupplyA (common practice).
	pinLowSupplyV = 3.6
	pinLowSupplyA = 0.006
	// pinClassicA: a 5 V part commonly allows about 20 mA per pin in normal use (common
	// practice; the absolute maximum is higher and not a design figure).
	pinClassicA = 0.020
	// logicMaxV: a logic pin drives at most about 5.5 V; above it the pin needs a switch
	// stage (common practice).
	logicMaxV = 5.5
	// selvDCV: 60 V DC is the usual limit of safety extra-low voltage for DC (from memory);
	// above it the advice warns and defers to local codes and licensed practice.
	selvDCV = 60
	// ratingMargin: a capacitor's voltage rating should be at least the supply with this
	// margin; class-2 ceramics at least classTwoRating x the working voltage (common practice).
	ratingMargin   = 1.5
	classTwoRating = 2
)

// capRatings are common capacitor voltage ratings, V (common practice).
var capRatings = []float64{2.5, 4, 6.3, 10, 16, 25, 35, 50, 63, 100, 160, 200, 250, 400, 450, 630, 1000, 1600, 2000, 3000}

// defaultPinCurrent is the per-pin current limit for a supply, and the words that state
// the assumption.
func defaultPinCurrent(supply float64) (float64, string) {
	switch {
	case supply <= pinLowSupplyV:
		return pinLowSupplyA, fmt.Sprintf("%s per pin: a %s board's pins commonly allow 4-8 mA each at the full output level, 20 mA only with a relaxed output level (common practice; check the datasheet, or give --pin-current)",
			fmtA(pinLowSupplyA), fmtV(supply))
	case supply <= logicMaxV:
		return pinClassicA, fmt.Sprintf("%s per pin: a 5 V part commonly allows about 20 mA per pin in normal use (common practice; check the datasheet, or give --pin-current)",
			fmtA(pinClassicA))
	}
	return pinClassicA, fmt.Sprintf("%s through the switch stage: above %s the pin drives a switch stage, and the limit is that stage's (assumed; give --pin-current for your transistor)",
		fmtA(pinClassicA), fmtV(logicMaxV))
}

// ratingFor is the smallest common rating of at least v.
func ratingFor(v float64) float64 {
	for _, r := range capRatings {
		if r >= v*(1-1e-9) {
			return r
		}
	}
	return math.Ceil(v/1000) * 1000
}

// capRating is the voltage rating the capacitor needs for this supply and kind.
func (p *plant) capRating() float64 {
	need := ratingMargin * p.supply
	if p.tol.kind == CKindX7R {
		need = math.Max(need, classTwoRating*p.supply)
	}
	return ratingFor(need)
}

// checkRanges refuses values outside the one range table (telemetry.Ranges), never
// replacing them by defaults.
func (p *plant) checkRanges() error {
	for _, c := range []struct {
		key string
		v   float64
	}{{"supply", p.supply}, {"vref", p.vref}, {"period", p.period}, {"adc_bits", float64(p.bits)}} {
		if err := telemetry.CheckRange(c.key, c.v); err != nil {
			return fmt.Errorf("advice: %w", err)
		}
	}
	if p.load != 0 {
		if err := telemetry.CheckRange("load", p.load); err != nil {
			return fmt.Errorf("advice: %w", err)
		}
	}
	return nil
}

// supplyCautions are the cautions that follow the supply: the pin limit as assumed, the
// switch stage above a logic level, and the hazard above 60 V DC.
func (p *plant) supplyCautions(maxI float64) []string {
	upTo := ""
	if maxI > 0 {
		upTo = fmt.Sprintf(" (up to %s in this table)", fmtA(maxI))
	}
	var c []string
	if p.supply > selvDCV {
		c = append(c, fmt.Sprintf("HAZARD: a %s supply is above 60 V DC, the usual limit of safety extra-low voltage for DC: it can injure or kill. Design, build and test it only under your local codes and licensed practice; these figures cover the control loop, not the safety of the circuit",
			fmtV(p.supply)))
	}
	if p.supply > logicMaxV {
		c = append(c, fmt.Sprintf("a %s supply is more than a logic pin can drive (over about %s): the pin needs a switch stage (a transistor or gate driver from the %s rail) on the charge and discharge paths, and the ADC must see at most its reference (a divider or a buffer)",
			fmtV(p.supply), fmtV(logicMaxV), fmtV(p.supply)))
	}
	what := "pin current"
	if p.supply > logicMaxV {
		what = "switch current"
	}
	c = append(c, fmt.Sprintf("%s: the first instant of a charge or discharge draws Vs / R%s; the limit used is %s",
		what, upTo, p.g.pinWhy))
	if p.supply <= selvDCV {
		c = append(c, "at this supply the circuit is extra-low voltage: follow the parts' datasheets; anything mains-powered falls under local codes and licensed practice")
	}
	return c
}

// ratingNote says what voltage rating the capacitor needs.
func (p *plant) ratingNote() string {
	r := p.capRating()
	s := fmt.Sprintf("capacitor voltage rating: at least %s (the %s supply with %.0f %% margin, next common rating",
		fmtV(r), fmtV(p.supply), 100*(ratingMargin-1))
	if p.tol.kind == CKindX7R {
		s += fmt.Sprintf("; a class-2 ceramic at least %d x the working voltage", classTwoRating)
	}
	return s + ", common practice)"
}
