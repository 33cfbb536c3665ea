package loop_test

import (
	"fmt"
	"math"

	"github.com/caploop/caploop/analysis/loop"
)

// A 2.5 V bias for a greenhouse soil-moisture sensor: 47 kOhm and 1 uF from a 5 V
// pin, read by a 10-bit ADC every millisecond, three-state control with a deadband
// of 6 counts around code 512 (one step near the setpoint is about 11 counts).
func Example() {
	cfg := loop.Config{
		Circuit:    loop.Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: 1e6},
		ADC:        loop.ADC{Vref: 5, Bits: 10},
		Controller: loop.Controller{Kind: loop.ThreeState, Deadband: 6},
		Period:     1e-3,
	}
	fmt.Printf("tau charge %.2f ms, largest step %.0f mV\n",
		cfg.Circuit.Tau(loop.Charge)*1e3, cfg.Circuit.StepMax(cfg.Period)*1e3)

	lo, hi := math.Inf(1), math.Inf(-1)
	var holds int
	err := loop.Run(cfg, func(int64) int { return 512 }, 3000, func(s loop.Sample) {
		if s.K >= 1000 { // steady part
			lo, hi = math.Min(lo, s.V), math.Max(hi, s.V)
			if s.U == loop.Hold {
				holds++
			}
		}
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("steady node %.3f..%.3f V, holding %.0f %% of the time\n", lo, hi, float64(holds)/20)
	// Output:
	// tau charge 44.89 ms, largest step 105 mV
	// steady node 2.466..2.519 V, holding 95 % of the time
}

// ExampleCircuit_Advance follows one period of a charge from 0 V exactly.
func ExampleCircuit_Advance() {
	c := loop.Circuit{Supply: 5, R: 50e3, C: 1e-6}
	v := c.Advance(0, loop.Charge, 1e-3)
	fmt.Printf("%.6f V = 5 (1 - exp(-1e-3 / 0.05))\n", v)
	// Output:
	// 0.099007 V = 5 (1 - exp(-1e-3 / 0.05))
}
