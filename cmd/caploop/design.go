package main

import (
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/analysis/loop"
	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
)

func init() { commands = append(commands, newDesignCmd) }

// designFlags are the flags of `caploop design`, as typed (engineering notation).
type designFlags struct {
	supply, vref, period, ripple, settle, static, load, pin, minPeriod string
	rMin, rMax, cMin, cMax                                             string
	bits                                                               int
	mode, rParts, cParts, series, setpoints                            string
	rSeries, cSeries, cKind                                            string
	noise, sigma                                                       float64
	rTol, cTol, supplyTol, vrefTol                                     float64
	top, builds                                                        int
	jsonOut                                                            bool
}

func newDesignCmd() *cobra.Command {
	var f designFlags
	cmd := &cobra.Command{
		Use:   "design",
		Short: "suggest deadband, R and C from goals alone (no board needed)",
		Long: `design tries every resistor and capacitor pair of the chosen series (or the parts
listed) against the goals, runs the promising ones through the loop model, and prints a
ranked table with the predicted ripple, settling time, pin current and load sag of each,
the deadband with its arithmetic, sample-period advice and, when no pair can meet the
goals, the change of circuit that would.

The table is ranked: pairs that meet the goals first; among them, pairs that keep the
rules of the trade (load >= 10 R, pin current within half the limit, R from 1 kΩ to
100 kΩ, C from 10 nF to 10 µF) ahead of any that break one, which the verdict names
("meets goals; load under 10 R"); then the widest margin on the goals.

Ripple may be given in volts (100mV) or as a percentage of full scale (2%).

Every shown pair is checked over the spread of real parts: at 8 corners of the
resistor, capacitor, supply and reference tolerances, and the top three through random
builds in the loop model ("meets goals in 99.7 % of 300 builds; worst ripple 31 mV").
Resistors default to 5 % (E6 to E24) or 1 % (E96); capacitors follow --c-kind.

--series E96 means E96 resistors with E24 capacitors: capacitors are rarely made beyond
E24. Values outside the input range table are refused, never replaced by defaults.`,
		Example: `  caploop design --supply 5 --vref 5 --bits 10 --period 1ms --ripple 100mV --settle 200ms --series E12 --load 1M
  caploop design --ripple 1% --settle 50ms --mode two-state --c "100n 470n 1u 2.2u" --json`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			req, err := f.request()
			if err != nil {
				return withCode(2, err)
			}
			a, err := advice.Design(req)
			if err != nil {
				return withCode(2, err)
			}
			out := newTextWriter(cmd.OutOrStdout())
			if f.jsonOut {
				out = newCheckedWriter(cmd.OutOrStdout())
				doc := struct {
					SchemaVersion int `json:"schema_version"`
					*advice.Advice
				}{report.SchemaVersion, a}
				if err := report.WriteJSON(out, doc, true); err != nil && out.err == nil {
					return withCode(2, fmt.Errorf("design: %w", err))
				}
			} else if err := a.WriteText(out); err != nil && out.err == nil {
				return withCode(2, fmt.Errorf("design: %w", err))
			}
			return out.Close("design")
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&f.supply, "supply", "5V", "pin high level (supply)")
	fl.StringVar(&f.vref, "vref", "", "ADC reference (default: the supply)")
	fl.IntVar(&f.bits, "bits", 10, "ADC resolution, bits")
	fl.StringVar(&f.period, "period", "1ms", "sample period")
	fl.StringVar(&f.mode, "mode", "three-state", "controller: two-state or three-state")
	fl.StringVar(&f.ripple, "ripple", "", "allowed ripple p-p, volts (100mV) or % of full scale (2%); default 2%")
	fl.StringVar(&f.settle, "settle", "", "settling time of a full-scale step (default 500ms)")
	fl.StringVar(&f.static, "static-error", "", "allowed static error, volts (default: the ripple goal; the level may rest anywhere in the band)")
	fl.StringVar(&f.load, "load", "", "resistive load on the capacitor node (default: none)")
	fl.StringVar(&f.series, "series", "E12", "preferred-number series for R and C: E6, E12, E24, E96 (E96: capacitors from E24)")
	fl.StringVar(&f.rSeries, "r-series", "", "series for the resistors alone (default: --series)")
	fl.StringVar(&f.cSeries, "c-series", "", "series for the capacitors alone: E6, E12 or E24 (default: --series, at most E24)")
	fl.StringVar(&f.cKind, "c-kind", "film", "capacitor kind: film, c0g, x7r (with its DC-bias loss) or electrolytic (-20/+80 %, leaks)")
	fl.Float64Var(&f.rTol, "r-tol", 0, "resistor tolerance, % (default 5, or 1 for E96)")
	fl.Float64Var(&f.cTol, "c-tol", 0, "capacitor tolerance, % (default by --c-kind)")
	fl.Float64Var(&f.supplyTol, "supply-tol", 0, "supply tolerance, % (default 2)")
	fl.Float64Var(&f.vrefTol, "vref-tol", 0, "reference tolerance, % (default 1)")
	fl.IntVar(&f.builds, "builds", 0, "Monte Carlo builds per checked pair (default 300)")
	fl.StringVar(&f.rParts, "r", "", `resistors on hand: a series or a list ("10k 22k 47k")`)
	fl.StringVar(&f.cParts, "c", "", `capacitors on hand: a series or a list ("100n 470n 1u 2.2u")`)
	fl.StringVar(&f.rMin, "r-min", "100", "smallest resistor of the series to try")
	fl.StringVar(&f.rMax, "r-max", "1M", "largest resistor of the series to try")
	fl.StringVar(&f.cMin, "c-min", "10n", "smallest capacitor of the series to try")
	fl.StringVar(&f.cMax, "c-max", "100u", "largest capacitor of the series to try")
	fl.StringVar(&f.pin, "pin-current", "", "pin current limit (default by supply: 6 mA up to 3.6 V, 20 mA above, common practice)")
	fl.StringVar(&f.minPeriod, "min-period", "104us", "ADC conversion time, the floor of the sample period")
	fl.StringVar(&f.setpoints, "setpoints", "", "used setpoints in counts, comma separated (default 10, 50, 90 % of full scale)")
	fl.Float64Var(&f.noise, "noise", 0, "ADC noise, counts rms (default 1)")
	fl.Float64Var(&f.sigma, "sigma", 0, "noise margin of the deadband, in sigmas (default 3)")
	fl.IntVar(&f.top, "top", 0, "pairs to show (default 5)")
	fl.BoolVar(&f.jsonOut, "json", false, "print the advice as JSON")
	return cmd
}

// request turns the flags into an advice request.
func (f designFlags) request() (advice.Request, error) {
	var req advice.Request
	var err error
	parse := func(name, s, unit string) float64 {
		if err != nil || s == "" {
			return 0
		}
		v, e := si.ParseUnit(s, unit)
		if e != nil {
			err = fmt.Errorf("design: --%s: %w", name, e)
		}
		return v
	}
	// Values given are checked against the one range table; a zero is refused, never
	// taken as "use the default".
	ranged := func(name, key, s, unit string) float64 {
		v := parse(name, s, unit)
		if err == nil && s != "" {
			if e := telemetry.CheckRange(key, v); e != nil {
				err = fmt.Errorf("design: --%s: %w", name, e)
			}
		}
		return v
	}
	positive := func(name, s, unit string) float64 {
		v := parse(name, s, unit)
		if err == nil && s != "" && !(v > 0) {
			err = fmt.Errorf("design: --%s: must be above 0, got %s", name, s)
		}
		return v
	}
	req.SupplyV = ranged("supply", "supply", f.supply, "V")
	req.VrefV = ranged("vref", "vref", f.vref, "V")
	req.PeriodS = ranged("period", "period", f.period, "s")
	req.LoadOhm = ranged("load", "load", f.load, "Ω")
	req.Bits = f.bits
	if err == nil {
		if e := telemetry.CheckRange("adc_bits", float64(f.bits)); e != nil {
			err = fmt.Errorf("design: --bits: %w", e)
		}
	}
	g := &req.Goals
	if r := strings.TrimSpace(f.ripple); strings.HasSuffix(r, "%") {
		g.RipplePct = positive("ripple", strings.TrimSuffix(r, "%"), "")
	} else {
		g.RippleV = positive("ripple", r, "V")
	}
	g.SettleS = positive("settle", f.settle, "s")
	g.StaticErrorV = positive("static-error", f.static, "V")
	g.PinCurrentA = positive("pin-current", f.pin, "A")
	g.MinPeriodS = positive("min-period", f.minPeriod, "s")
	if err != nil {
		return req, err
	}
	switch strings.ToLower(f.mode) {
	case "three-state", "3":
		req.Mode = loop.ThreeState
	case "two-state", "2":
		req.Mode = loop.TwoState
	default:
		return req, fmt.Errorf("design: --mode: want two-state or three-state, got %q", f.mode)
	}
	rs, cs, err := f.seriesPair()
	if err != nil {
		return req, err
	}
	g.R = advice.Parts{Series: rs, Min: ranged("r-min", "r", f.rMin, "Ω"), Max: ranged("r-max", "r", f.rMax, "Ω")}
	g.C = advice.Parts{Series: cs, Min: ranged("c-min", "c", f.cMin, "F"), Max: ranged("c-max", "c", f.cMax, "F")}
	if err != nil {
		return req, err
	}
	if f.rParts != "" {
		if g.R, err = advice.ParseParts(f.rParts, "Ω"); err != nil {
			return req, fmt.Errorf("design: --r: %w", err)
		}
	}
	if f.cParts != "" {
		if g.C, err = advice.ParseParts(f.cParts, "F"); err != nil {
			return req, fmt.Errorf("design: --c: %w", err)
		}
	}
	if f.setpoints != "" {
		for _, s := range strings.Split(f.setpoints, ",") {
			v, e := si.Parse(strings.TrimSpace(s))
			if e != nil {
				return req, fmt.Errorf("design: --setpoints: %w", e)
			}
			g.Setpoints = append(g.Setpoints, v)
		}
	}
	g.NoiseRMSCount, g.SigmaMultiple, g.Top = f.noise, f.sigma, f.top
	if f.noise < 0 || f.sigma < 0 || f.top < 0 || f.builds < 0 {
		return req, fmt.Errorf("design: --noise, --sigma, --top and --builds must not be negative")
	}
	g.Tol = advice.Tolerances{RPct: f.rTol, CKind: f.cKind, CPct: f.cTol, SupplyPct: f.supplyTol, VrefPct: f.vrefTol, Builds: f.builds}
	return req, nil
}

// seriesPair resolves --series, --r-series and --c-series: --series E96 means E96
// resistors with E24 capacitors (the finest series capacitors are commonly made in), and
// capacitors in E96 are refused.
func (f designFlags) seriesPair() (string, string, error) {
	known := func(flag, s string) (string, error) {
		if advice.Series(s) == nil {
			return "", fmt.Errorf("design: --%s: unknown series %q (want E6, E12, E24 or E96)", flag, s)
		}
		return strings.ToUpper(strings.TrimSpace(s)), nil
	}
	base, err := known("series", f.series)
	if err != nil {
		return "", "", err
	}
	rs, cs := base, base
	if cs == "E96" {
		cs = "E24"
	}
	if f.rSeries != "" {
		if rs, err = known("r-series", f.rSeries); err != nil {
			return "", "", err
		}
	}
	if f.cSeries != "" {
		if cs, err = known("c-series", f.cSeries); err != nil {
			return "", "", err
		}
		if cs == "E96" {
			return "", "", fmt.Errorf("design: --c-series E96: capacitors are rarely made beyond E24 (E12 is the usual range); use E24 or list the values on hand with --c")
		}
	}
	return rs, cs, nil
}
