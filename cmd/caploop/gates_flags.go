package main

import (
	"fmt"
	"strings"

	"github.com/spf13/pflag"

	"github.com/caploop/caploop/analysis/report"
)

// registerGates binds the gate flags of summary (and of the commands that share its
// gates) to g.
func registerGates(fs *pflag.FlagSet, g *report.GateText) {
	fs.StringVar(&g.Ripple, "max-ripple", "", "gate: largest ripple peak-to-peak per segment, with its unit (20mV, or 2% meaning 2 % of full scale vref; a bare number is refused)")
	fs.StringVar(&g.Robust, "max-robust-ripple", "", "gate: largest robust ripple peak-to-peak per segment, glitches ignored (e.g. 20mV or 2%)")
	fs.StringVar(&g.RMS, "max-rms", "", "gate: largest ripple rms per segment (e.g. 5mV or 0.5%)")
	fs.StringVar(&g.Settle, "max-settle", "", "gate: longest settling time per setpoint step (e.g. 150ms)")
	fs.StringVar(&g.Error, "max-error", "", "gate: largest |mean error| per segment (e.g. 5mV or 0.5%)")
	fs.StringVar(&g.Overshoot, "max-overshoot", "", "gate: largest overshoot per setpoint step (e.g. 50mV or 1%)")
	fs.StringVar(&g.Jumps, "max-jumps", "", "gate: most band jumps per segment, a plain whole number (0)")
	fs.StringVar(&g.Rejected, "max-rejected", "", "gate: most rejected lines per file, a plain whole number (0)")
	fs.StringVar(&g.Gaps, "max-gaps", "", "gate: most missing samples per file, a plain whole number (0)")
}

// gateFlags are the names of the gate flags.
var gateFlags = []string{"max-ripple", "max-robust-ripple", "max-rms", "max-settle", "max-error", "max-overshoot", "max-jumps", "max-rejected", "max-gaps"}

// emptyGateFlags refuses a gate flag given with an empty value (an unset CI variable,
// "--max-ripple $LIMIT"), which would otherwise turn the gate off without a word.
func emptyGateFlags(fs *pflag.FlagSet) error {
	for _, name := range gateFlags {
		f := fs.Lookup(name)
		if f != nil && f.Changed && strings.TrimSpace(f.Value.String()) == "" {
			return fmt.Errorf("summary: --%s is empty (an unset variable?): give a limit, such as %s, or leave the flag out", name, gateHint[name])
		}
	}
	return nil
}

// gateHint is an example value of each gate flag.
var gateHint = map[string]string{
	"max-ripple": "20mV", "max-robust-ripple": "20mV", "max-rms": "5mV", "max-settle": "150ms",
	"max-error": "5mV", "max-overshoot": "50mV", "max-jumps": "0", "max-rejected": "0", "max-gaps": "0",
}
