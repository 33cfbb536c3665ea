package main

import (
	"github.com/spf13/pflag"

	"github.com/caploop/caploop/analysis/report"
)

// registerGates binds the gate flags of summary (and of the commands that share its
// gates) to g.
func registerGates(fs *pflag.FlagSet, g *report.GateText) {
	fs.StringVar(&g.Ripple, "max-ripple", "", "gate: largest ripple peak-to-peak per segment (e.g. 20mV)")
	fs.StringVar(&g.Robust, "max-robust-ripple", "", "gate: largest robust ripple peak-to-peak per segment, glitches ignored (e.g. 20mV)")
	fs.StringVar(&g.RMS, "max-rms", "", "gate: largest ripple rms per segment (e.g. 5mV)")
	fs.StringVar(&g.Settle, "max-settle", "", "gate: longest settling time per setpoint step (e.g. 150ms)")
	fs.StringVar(&g.Error, "max-error", "", "gate: largest |mean error| per segment (e.g. 5mV)")
	fs.StringVar(&g.Overshoot, "max-overshoot", "", "gate: largest overshoot per setpoint step (e.g. 50mV)")
	fs.StringVar(&g.Jumps, "max-jumps", "", "gate: most band jumps per segment (e.g. 0)")
	fs.StringVar(&g.Rejected, "max-rejected", "", "gate: most rejected lines per file (e.g. 0)")
	fs.StringVar(&g.Gaps, "max-gaps", "", "gate: most missing samples per file (e.g. 0)")
}
