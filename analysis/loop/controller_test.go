package loop

import (
	"math"
	"testing"
)

// TestControllerRule checks the drive each controller picks from the sample it just
// read (rules of shared DOMAIN.md: e = pv - sp; two-state charges when e < 0;
// three-state holds while |e| <= db).
func TestControllerRule(t *testing.T) {
	cases := []struct {
		name   string
		kind   Kind
		db     int
		pv, sp int
		want   Drive
	}{
		{"two-state below", TwoState, 0, 499, 500, Charge},
		{"two-state equal", TwoState, 0, 500, 500, Discharge},
		{"two-state above", TwoState, 0, 501, 500, Discharge},
		{"three-state inside", ThreeState, 3, 500, 500, Hold},
		{"three-state at +db", ThreeState, 3, 503, 500, Hold},
		{"three-state at -db", ThreeState, 3, 497, 500, Hold},
		{"three-state above band", ThreeState, 3, 504, 500, Discharge},
		{"three-state below band", ThreeState, 3, 496, 500, Charge},
		{"three-state db 0 equal", ThreeState, 0, 500, 500, Hold},
		{"three-state db 0 above", ThreeState, 0, 501, 500, Discharge},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			cfg := bench()
			cfg.Controller = Controller{Kind: tc.kind, Deadband: tc.db}
			cfg.V0 = cfg.ADC.Volts(float64(tc.pv)) // the centre of code pv
			s, err := New(cfg)
			if err != nil {
				t.Fatal(err)
			}
			st := s.Next(tc.sp)
			if st.PV != tc.pv {
				t.Fatalf("PV = %d, want %d", st.PV, tc.pv)
			}
			if st.U != tc.want {
				t.Errorf("U = %d, want %d", st.U, tc.want)
			}
		})
	}
}

// TestOpenLoopDrives checks the open-loop sequences sample by sample.
func TestOpenLoopDrives(t *testing.T) {
	cases := []struct {
		name string
		c    Controller
		want []Drive
	}{
		{"duty 0.4 of 5", Controller{Kind: OpenDuty, Duty: 0.4, CycleSamples: 5}, []Drive{1, 1, -1, -1, -1, 1, 1, -1, -1, -1}},
		{"duty 0", Controller{Kind: OpenDuty, Duty: 0, CycleSamples: 3}, []Drive{-1, -1, -1, -1}},
		{"duty 1", Controller{Kind: OpenDuty, Duty: 1, CycleSamples: 3}, []Drive{1, 1, 1, 1}},
		{"pattern", Controller{Kind: OpenPattern, Pattern: []Drive{1, 0, -1}}, []Drive{1, 0, -1, 1, 0, -1, 1}},
		{"const hold", Controller{Kind: OpenConst, StepDrive: Hold}, []Drive{0, 0, 0}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			cfg := bench()
			cfg.Controller = tc.c
			var got []Drive
			if err := Run(cfg, nil, int64(len(tc.want)), func(s Sample) { got = append(got, s.U) }); err != nil {
				t.Fatal(err)
			}
			for i := range tc.want {
				if got[i] != tc.want[i] {
					t.Fatalf("drives: got %v, want %v", got, tc.want)
				}
			}
		})
	}
}

// TestDriveHoldsUntilNextSample checks, for closed loops with every circuit element
// and with jitter, that each sample's node voltage is the previous one advanced in
// closed form under the drive chosen at the previous sample over the real interval.
func TestDriveHoldsUntilNextSample(t *testing.T) {
	cases := []struct {
		name string
		edit func(*Config)
	}{
		{"three-state plain", func(c *Config) {}},
		{"two-state loaded leaky", func(c *Config) {
			c.Controller = Controller{Kind: TwoState}
			c.Circuit.Load, c.Circuit.Leak = 470e3, 5e6
		}},
		{"follower noisy", func(c *Config) {
			c.Controller = Controller{Kind: TwoState}
			c.Circuit.Follower = Follower{VBE: 0.65, RE: 4.7e3}
			c.ADC.Noise = 2
		}},
		{"follower jitter", func(c *Config) {
			c.Controller = Controller{Kind: TwoState}
			c.Circuit.Load = 1e6
			c.Circuit.Follower = Follower{VBE: 0.65, RE: 4.7e3}
			c.Jitter = 50e-6
		}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			cfg := bench()
			cfg.Controller = Controller{Kind: ThreeState, Deadband: 2}
			tc.edit(&cfg)
			var prev *Sample
			n, crossings := 0, 0
			// setpoint steps between 0 and 600 counts (2.9 V) so that the node
			// crosses VBE when there is a follower
			sp := func(k int64) int { return 600 * int(k/1500%2) }
			err := Run(cfg, sp, 6000, func(s Sample) {
				if prev != nil {
					want := cfg.Circuit.Advance(prev.V, prev.U, s.T-prev.T)
					if vbe := cfg.Circuit.Follower.VBE; vbe > 0 && (prev.V > vbe) != (s.V > vbe) {
						crossings++
					}
					if math.Abs(s.V-want) > 1e-12 {
						n++
						if n < 5 {
							t.Errorf("k=%d: V = %.15g, want %.15g", s.K, s.V, want)
						}
					}
				}
				p := s
				prev = &p
			})
			if err != nil {
				t.Fatal(err)
			}
			if cfg.Circuit.HasFollower() && crossings < 3 {
				t.Errorf("the node crossed VBE %d times; the test needs crossings", crossings)
			}
		})
	}
}

// TestRandomStreams checks seeding, drops, noise and jitter statistics.
func TestRandomStreams(t *testing.T) {
	cfg := bench()
	cfg.Circuit.R = 1e12 // the node hardly moves: V stays at V0
	cfg.Controller = Controller{Kind: OpenConst, StepDrive: Hold}
	cfg.V0 = cfg.ADC.Volts(400)
	cfg.ADC.Noise = 4
	cfg.DropRate = 0.1
	cfg.Jitter = 20e-6
	cfg.Seed = 7
	const n = 100_000
	collect := func(cfg Config) []Sample {
		var out []Sample
		if err := Run(cfg, nil, n, func(s Sample) { out = append(out, s) }); err != nil {
			t.Fatal(err)
		}
		return out
	}
	a := collect(cfg)

	t.Run("same seed same run", func(t *testing.T) {
		b := collect(cfg)
		for i := range a {
			if a[i] != b[i] {
				t.Fatalf("step %d differs: %+v vs %+v", i, a[i], b[i])
			}
		}
	})
	t.Run("reset repeats", func(t *testing.T) {
		s, _ := New(cfg)
		for range 100 {
			s.Next(0)
		}
		s.Reset(cfg.V0)
		for i := range 1000 {
			if st := s.Next(0); st != a[i] {
				t.Fatalf("after Reset step %d: %+v, want %+v", i, st, a[i])
			}
		}
	})
	t.Run("other seed differs", func(t *testing.T) {
		c := cfg
		c.Seed = 8
		b := collect(c)
		same := 0
		for i := range a {
			if a[i].PV == b[i].PV {
				same++
			}
		}
		if same > n/5 {
			t.Errorf("%d of %d readings equal with another seed", same, n)
		}
	})
	t.Run("drops", func(t *testing.T) {
		drops := 0
		for _, s := range a {
			if s.Dropped {
				drops++
			}
		}
		// binomial: mean n p = 10000, sigma sqrt(n p (1-p)) = 95; allow 5 sigma
		if math.Abs(float64(drops)-1e4) > 5*95 {
			t.Errorf("drops: got %d, want 10000 +- 475", drops)
		}
		c := cfg
		c.DropRate = 0
		b := collect(c)
		for i := range a {
			x, y := a[i], b[i]
			x.Dropped = false
			if x != y {
				t.Fatalf("drops changed the control run at %d: %+v vs %+v", i, a[i], b[i])
			}
		}
	})
	t.Run("noise rms", func(t *testing.T) {
		var s2 float64
		for _, s := range a {
			e := float64(s.PV - 400)
			s2 += e * e
		}
		got := math.Sqrt(s2 / n)
		// Gaussian of 4 counts rms then the quantizer: sqrt(16 + 1/12) (Bennett
		// adds independent LSB^2/12 when noise >> LSB); sampling error of the rms
		// is about got/sqrt(2n) = 0.009
		want := math.Sqrt(16 + 1.0/12)
		if math.Abs(got-want) > 0.05 {
			t.Errorf("noise rms: got %.4f counts, want %.4f", got, want)
		}
	})
	t.Run("jitter", func(t *testing.T) {
		var s2 float64
		for i, s := range a[1:] {
			j := s.T - float64(i+1)*cfg.Period
			s2 += j * j
			if i > 0 && s.T <= a[i].T {
				t.Fatalf("instants out of order at %d", i+1)
			}
		}
		// truncation at +-T/2 = 25 sigma removes nothing measurable
		got := math.Sqrt(s2 / (n - 1))
		if relErr(got, cfg.Jitter) > 0.02 {
			t.Errorf("jitter rms: got %g s, want %g s", got, cfg.Jitter)
		}
	})
}

// TestSetters checks the run-time changes the virtual board relies on.
func TestSetters(t *testing.T) {
	cfg := bench()
	cfg.Controller = Controller{Kind: ThreeState, Deadband: 1}
	s, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	for range 500 {
		s.Next(500)
	}
	v := s.Voltage()
	s.SetDeadband(9)
	if got := s.Config().Controller.Deadband; got != 9 {
		t.Errorf("deadband after SetDeadband(9) = %d", got)
	}
	s.SetDeadband(-4)
	if got := s.Config().Controller.Deadband; got != 0 {
		t.Errorf("deadband after SetDeadband(-4) = %d, want 0", got)
	}
	if err := s.SetController(Controller{Kind: OpenPattern}); err == nil {
		t.Error("SetController accepted an empty pattern")
	}
	if got := s.Config().Controller.Kind; got != ThreeState {
		t.Errorf("a rejected SetController changed the kind to %v", got)
	}
	if err := s.SetController(Controller{Kind: OpenConst, StepDrive: Hold}); err != nil {
		t.Fatal(err)
	}
	c := s.Config()
	c.Circuit.Load = 100e3
	c.Period = 2e-3
	if err := s.SetConfig(c); err != nil {
		t.Fatal(err)
	}
	if s.Voltage() != v {
		t.Errorf("SetConfig moved the node from %g to %g", v, s.Voltage())
	}
	st := s.Next(500)
	if st.K != 500 || relErr(st.T, 0.5) > 1e-12 || st.U != Hold {
		t.Errorf("after SetConfig: K=%d T=%g U=%d, want 500 0.5 0", st.K, st.T, st.U)
	}
	st = s.Next(500)
	if relErr(st.T, 0.502) > 1e-12 {
		t.Errorf("new period not in effect: T = %g, want 0.502", st.T)
	}
	// hold with a 100k load and 2 ms: V decays by exp(-2e-3/0.1)
	if want := v * math.Exp(-0.02); relErr(st.V, want) > 1e-12 {
		t.Errorf("hold droop: V = %.12g, want %.12g", st.V, want)
	}
	s.SetNoise(-1)
	if s.Config().ADC.Noise != 0 {
		t.Error("SetNoise(-1) did not clamp to 0")
	}
	c.Circuit.C = 0
	if err := s.SetConfig(c); err == nil {
		t.Error("SetConfig accepted C = 0")
	}
}
