package loop

// Read and Apply split Next in two for a controller that runs outside the simulation,
// such as firmware in the loop: Read takes the reading of the current sample, the
// outside controller picks the drive, and Apply holds it until the next instant. A
// Read followed by Apply with the drive Next's controller would pick draws the same
// random numbers and gives the same Step as Next.

// Read reads the ADC at the current sample instant (with noise) and returns the code.
// Call Apply before the next Read: a second Read of the same sample draws new noise.
func (s *Sim) Read() int {
	sense := s.v
	if s.fol {
		sense = max(0, sense-s.vbe)
	}
	x := sense*s.scale + s.offset
	if s.cfg.ADC.Noise > 0 {
		x += s.cfg.ADC.Noise * s.rngN.NormFloat64()
	}
	s.read = quantize(x, s.maxCode)
	s.sense = sense
	return s.read
}

// Apply holds drive u from the current sample instant to the next one and returns the
// sample's Step: the reading the last Read took, setpoint sp (for the record only) and
// u. A drive outside -1..1 counts as hold.
func (s *Sim) Apply(sp int, u Drive) Sample {
	if u < Discharge || u > Charge {
		u = Hold
	}
	st := Sample{K: s.k, T: s.t, V: s.v, Sense: s.sense, PV: s.read, SP: sp, U: u}
	if s.cfg.DropRate > 0 && s.rngD.Float64() < s.cfg.DropRate {
		st.Dropped = true
	}
	s.advance(u)
	return st
}
