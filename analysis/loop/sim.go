package loop

import (
	"math"
	"math/rand/v2"
)

// Streams of the three random generators. Each draws from its own PCG stream of the
// same Seed, so switching noise on does not change which samples are dropped.
const (
	streamNoise  = 0x6e6f697365 // "noise"
	streamJitter = 0x6a6974746572
	streamDrop   = 0x64726f70
)

// regime is one linear piece of the node equation: V -> vinf + (V - vinf) a.
type regime struct {
	vinf   float64 // Thevenin voltage, V
	invTau float64 // G / C, 1/s (0 for a floating node)
	a      float64 // exp(-T invTau) for the nominal period
}

// Sim is one running simulation of the loop. It is not safe for concurrent use.
//
// Sample k happens at instant t_k (t_0 = 0, t_k = k T + j_k with j_k the jitter).
// Next reads the ADC at t_k, lets the controller pick the drive from that reading,
// and holds the drive until t_{k+1}, where the node voltage is computed in closed
// form. The node is therefore exact at every sample instant, whatever T / tau is.
type Sim struct {
	cfg Config

	// precomputed from cfg
	reg     [3][2]regime // [drive+1][follower conducting]
	fol     bool
	vbe     float64
	scale   float64 // counts per volt at the ADC input
	offset  float64
	maxCode int
	onSamp  int64

	// state
	k     int64
	t     float64
	k0    int64   // sample index of the time origin t0 of the nominal grid
	t0    float64 // instants are t0 + (k - k0) T + jitter
	tNext float64
	v     float64
	rngN  *rand.Rand
	rngJ  *rand.Rand
	rngD  *rand.Rand
	read  int     // code of the last Read, for Apply
	sense float64 // sense voltage of the last Read
}

// New checks cfg, fills in its defaults (see Config.WithDefaults) and returns a
// simulation with the node at cfg.V0 at t = 0. The error wraps ErrConfig and names
// the bad field.
func New(cfg Config) (*Sim, error) {
	cfg = cfg.WithDefaults()
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	s := &Sim{}
	s.setConfig(cfg)
	s.Reset(cfg.V0)
	return s, nil
}

func (s *Sim) setConfig(cfg Config) {
	s.cfg = cfg
	ci := cfg.Circuit
	for d := Discharge; d <= Charge; d++ {
		for on := 0; on < 2; on++ {
			vi, g := ci.thevenin(d, on == 1)
			inv := g / ci.C
			s.reg[d+1][on] = regime{vinf: vi, invTau: inv, a: math.Exp(-cfg.Period * inv)}
		}
	}
	s.fol = ci.HasFollower()
	s.vbe = ci.Follower.VBE
	s.scale = cfg.ADC.scale()
	s.offset = cfg.ADC.Offset
	s.maxCode = cfg.ADC.MaxCode()
	s.onSamp = int64(cfg.Controller.OnSamples())
}

// Reset restarts the simulation at t = 0, sample 0, with the node at v0 and the
// random generators re-seeded from Config.Seed, keeping the current parameters,
// controller and deadband. A run after Reset repeats the run after New.
func (s *Sim) Reset(v0 float64) {
	s.k, s.t, s.v = 0, 0, v0
	s.k0, s.t0 = 0, 0
	seed := s.cfg.Seed
	s.rngN = rand.New(rand.NewPCG(seed, streamNoise))
	s.rngJ = rand.New(rand.NewPCG(seed, streamJitter))
	s.rngD = rand.New(rand.NewPCG(seed, streamDrop))
	s.tNext = s.instant(1)
}

// instant returns the time of sample k: t0 + (k - k0) T plus a Gaussian jitter of rms
// Config.Jitter, truncated at +-T/2 so the instants keep their order.
func (s *Sim) instant(k int64) float64 {
	t := s.t0 + float64(k-s.k0)*s.cfg.Period
	if s.cfg.Jitter > 0 {
		h := s.cfg.Period / 2
		j := s.cfg.Jitter * s.rngJ.NormFloat64()
		t += math.Max(-h, math.Min(h, j))
	}
	return t
}

// Config returns the configuration in use, defaults filled in, with the current
// controller and deadband.
func (s *Sim) Config() Config {
	c := s.cfg
	c.Controller.Pattern = append([]Drive(nil), c.Controller.Pattern...)
	return c
}

// SetConfig changes the parameters (circuit, ADC, controller, period, jitter, drop
// rate) of a running simulation and keeps its state: node voltage, sample index,
// time and random generators. A new Seed takes effect at the next Reset. On error
// nothing changes.
func (s *Sim) SetConfig(cfg Config) error {
	cfg = cfg.WithDefaults()
	if err := cfg.Validate(); err != nil {
		return err
	}
	oldPeriod, oldJitter := s.cfg.Period, s.cfg.Jitter
	s.setConfig(cfg)
	if cfg.Period != oldPeriod || cfg.Jitter != oldJitter {
		// restart the nominal grid at the current instant
		s.k0, s.t0 = s.k, s.t
		s.tNext = s.instant(s.k + 1)
	}
	return nil
}

// SetDeadband sets the three-state deadband half-width, counts (negative counts as 0).
func (s *Sim) SetDeadband(db int) {
	s.cfg.Controller.Deadband = max(db, 0)
}

// SetNoise sets the rms ADC noise in counts (negative counts as 0), for noise bursts.
func (s *Sim) SetNoise(rms float64) {
	if !(rms > 0) {
		rms = 0
	}
	s.cfg.ADC.Noise = rms
}

// SetController replaces the controller from the next sample on. On error (the same
// checks as New) the controller is unchanged.
func (s *Sim) SetController(c Controller) error {
	cfg := s.cfg
	cfg.Controller = c
	cfg = cfg.WithDefaults()
	if err := cfg.Controller.validate(); err != nil {
		return err
	}
	s.cfg.Controller = cfg.Controller
	s.cfg.Controller.Pattern = append([]Drive(nil), c.Pattern...)
	s.onSamp = int64(s.cfg.Controller.OnSamples())
	return nil
}

// Voltage returns the node voltage at the next sample instant (the one the next
// call of Next will read), V.
func (s *Sim) Voltage() float64 { return s.v }

// Next takes sample k: it reads the ADC at the current instant (with noise), picks
// the drive from that reading and setpoint sp (counts), returns the Step and then
// moves the node to the next instant under that drive.
func (s *Sim) Next(sp int) Sample {
	v := s.v
	sense := v
	if s.fol {
		sense = v - s.vbe
		if sense < 0 {
			sense = 0
		}
	}
	x := sense*s.scale + s.offset
	if s.cfg.ADC.Noise > 0 {
		x += s.cfg.ADC.Noise * s.rngN.NormFloat64()
	}
	pv := quantize(x, s.maxCode)

	var u Drive
	ctl := &s.cfg.Controller
	switch ctl.Kind {
	case TwoState:
		if pv < sp {
			u = Charge
		} else {
			u = Discharge
		}
	case ThreeState:
		e := pv - sp
		switch {
		case e > ctl.Deadband:
			u = Discharge
		case e < -ctl.Deadband:
			u = Charge
		default:
			u = Hold
		}
	case OpenDuty:
		if s.k%int64(ctl.CycleSamples) < s.onSamp {
			u = Charge
		} else {
			u = Discharge
		}
	case OpenPattern:
		u = ctl.Pattern[s.k%int64(len(ctl.Pattern))]
	case OpenConst:
		u = ctl.StepDrive
	}

	st := Sample{K: s.k, T: s.t, V: v, Sense: sense, PV: pv, SP: sp, U: u}
	if s.cfg.DropRate > 0 && s.rngD.Float64() < s.cfg.DropRate {
		st.Dropped = true
	}
	s.advance(u)
	return st
}

// advance moves the node from t_k to t_{k+1} under drive u.
func (s *Sim) advance(u Drive) {
	v := s.v
	on := 0
	if s.fol && v > s.vbe {
		on = 1
	}
	r := &s.reg[u+1][on]
	tn := s.tNext
	var nv float64
	if s.cfg.Jitter == 0 {
		nv = r.vinf + (v-r.vinf)*r.a
		if s.fol && (on == 1) != (nv > s.vbe) {
			nv = s.cfg.Circuit.Advance(v, u, s.cfg.Period)
		}
	} else {
		dt := tn - s.t
		nv = r.vinf + (v-r.vinf)*math.Exp(-dt*r.invTau)
		if s.fol && (on == 1) != (nv > s.vbe) {
			nv = s.cfg.Circuit.Advance(v, u, dt)
		}
	}
	s.v = nv
	s.k++
	s.t = tn
	s.tNext = s.instant(s.k + 1)
}

// Run simulates n samples of cfg from the start, asking sp for the setpoint of each
// sample (nil means 0, for open-loop drives) and handing each Step to fn (nil to
// discard). The error is New's.
func Run(cfg Config, sp func(k int64) int, n int64, fn func(Sample)) error {
	s, err := New(cfg)
	if err != nil {
		return err
	}
	for k := int64(0); k < n; k++ {
		var p int
		if sp != nil {
			p = sp(k)
		}
		st := s.Next(p)
		if fn != nil {
			fn(st)
		}
	}
	return nil
}
