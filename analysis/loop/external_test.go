package loop

import "testing"

// TestReadApplyMatchesNext drives one simulation through Next and a twin through Read,
// an outside copy of the controller rule and Apply: every Step must be the same, with
// noise, jitter, drops and a follower on, so a controller outside the model (firmware in
// the loop) sees exactly the plant Next would.
func TestReadApplyMatchesNext(t *testing.T) {
	base := Config{
		Circuit: Circuit{Supply: 5, R: 47e3, C: 1e-6, Load: 1e6},
		ADC:     ADC{Bits: 10, Noise: 0.7},
		Period:  1e-3, Jitter: 2e-5, DropRate: 0.01, Seed: 42,
	}
	fol := base
	fol.Circuit.Follower = Follower{VBE: 0.65, RE: 10e3}
	with := func(c Config, k Controller) Config { c.Controller = k; return c }
	cases := map[string]Config{
		"two-state":   with(base, Controller{Kind: TwoState}),
		"three-state": with(base, Controller{Kind: ThreeState, Deadband: 3}),
		"follower":    with(fol, Controller{Kind: ThreeState, Deadband: 2}),
	}
	for name, cfg := range cases {
		a, err := New(cfg)
		if err != nil {
			t.Fatal(err)
		}
		b, _ := New(cfg)
		for k := 0; k < 5000; k++ {
			sp := 300 + 200*(k/1000%2)
			want := a.Next(sp)
			pv := b.Read()
			u := Discharge
			switch e := pv - sp; {
			case cfg.Controller.Kind == TwoState && e < 0, cfg.Controller.Kind == ThreeState && e < -cfg.Controller.Deadband:
				u = Charge
			case cfg.Controller.Kind == ThreeState && e <= cfg.Controller.Deadband:
				u = Hold
			}
			got := b.Apply(sp, u)
			if got != want {
				t.Fatalf("%s sample %d: Read+Apply %+v, Next %+v", name, k, got, want)
			}
		}
	}
}
