package loop

import (
	"errors"
	"math"
	"testing"
)

// bench is a plain bench circuit used by several tests: 5 V pin, 47 kOhm, 1 uF,
// 10-bit ADC on a 5 V reference, 1 ms sample period.
func bench() Config {
	return Config{
		Circuit: Circuit{Supply: 5, R: 47e3, C: 1e-6},
		ADC:     ADC{Vref: 5, Bits: 10},
		Period:  1e-3,
	}
}

func relErr(got, want float64) float64 {
	if want == 0 {
		return math.Abs(got)
	}
	return math.Abs(got-want) / math.Abs(want)
}

// TestStepResponse checks the charge from 0 against 1 - exp(-n) at n = 1..5 tau.
func TestStepResponse(t *testing.T) {
	// Source: any circuits textbook, RC charging curve 1 - exp(-t/tau):
	// 63.2, 86.5, 95.0, 98.2, 99.3 % at 1..5 tau (rounded to 0.1 %).
	table := []float64{63.2, 86.5, 95.0, 98.2, 99.3}
	cfg := bench()
	cfg.Circuit.R = 100e3 // tau = 0.1 s = 100 samples exactly
	cfg.Controller = Controller{Kind: OpenConst, StepDrive: Charge}
	tau := cfg.Circuit.Tau(Charge)
	if relErr(tau, 0.1) > 1e-12 {
		t.Fatalf("Tau(Charge) = %g, want 0.1", tau)
	}
	var v []float64
	if err := Run(cfg, nil, 501, func(s Sample) { v = append(v, s.V) }); err != nil {
		t.Fatal(err)
	}
	for i, want := range table {
		n := i + 1
		t.Run(string(rune('0'+n))+"tau", func(t *testing.T) {
			got := 100 * v[100*n] / cfg.Circuit.Supply
			if math.Abs(got-want) > 0.05 { // the table is rounded to 0.1 %
				t.Errorf("after %d tau: got %.4f %%, want %.1f %%", n, got, want)
			}
			exact := 100 * (1 - math.Exp(-float64(n)))
			if math.Abs(got-exact) > 1e-9 {
				t.Errorf("after %d tau: got %.12f %%, closed form %.12f %%", n, got, exact)
			}
		})
	}
}

func TestNewRejectsBadConfig(t *testing.T) {
	cases := []struct {
		name string
		edit func(*Config)
	}{
		{"zero C", func(c *Config) { c.Circuit.C = 0 }},
		{"zero R", func(c *Config) { c.Circuit.R = 0 }},
		{"negative load", func(c *Config) { c.Circuit.Load = -1 }},
		{"NaN supply", func(c *Config) { c.Circuit.Supply = math.NaN() }},
		{"zero period", func(c *Config) { c.Period = 0 }},
		{"bits 31", func(c *Config) { c.ADC.Bits = 31 }},
		{"drop rate 2", func(c *Config) { c.DropRate = 2 }},
		{"negative deadband", func(c *Config) { c.Controller = Controller{Kind: ThreeState, Deadband: -1} }},
		{"empty pattern", func(c *Config) { c.Controller = Controller{Kind: OpenPattern} }},
		{"bad pattern drive", func(c *Config) { c.Controller = Controller{Kind: OpenPattern, Pattern: []Drive{1, 2}} }},
		{"duty above 1", func(c *Config) { c.Controller = Controller{Kind: OpenDuty, Duty: 1.5, CycleSamples: 10} }},
		{"unknown kind", func(c *Config) { c.Controller = Controller{Kind: 42} }},
		{"inf vref", func(c *Config) { c.ADC.Vref = math.Inf(1) }},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			cfg := bench()
			tc.edit(&cfg)
			s, err := New(cfg)
			if err == nil || s != nil {
				t.Fatalf("New: got (%v, %v), want an error", s, err)
			}
			if !errors.Is(err, ErrConfig) {
				t.Errorf("error %q does not wrap ErrConfig", err)
			}
		})
	}
	if _, err := New(bench()); err != nil {
		t.Errorf("New(bench) = %v, want nil", err)
	}
}
