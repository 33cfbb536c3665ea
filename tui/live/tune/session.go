package tune

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
)

// session reads the link: it parses the board's lines, keeps the merged meta, feeds the
// active accumulators and watches the range.
type session struct {
	conn   Conn
	parser *telemetry.Parser
	start  time.Time

	accs    []*analysis.Accumulator // the passes being measured
	pending []wire.Line             // lines of the last batch not handled yet

	k        int64            // data lines seen
	lastHost time.Time        // when the last data line was received
	spMoved  int64            // s.k at the last data line whose sp differed from the one before
	pvBefore float64          // the reading on the line before that one
	last     telemetry.Sample // the last data line
	haveLast bool
	spLo     float64 // setpoints seen before the plan, counts
	spHi     float64
	tPrev    int64 // t of the previous sample, µs
	dts      []float64

	connected  bool
	unplugged  bool
	boardLines int64 // lines from the board since the last (re)connection
	answers    []string
	// said is what the board's meta lines said since the last command tune sent came
	// back on the link (the Link delivers a command before the board can answer it): an
	// answer to that command, never a setting left over from before it. awaiting is
	// that command until it comes back; nothing is said before.
	said     telemetry.Meta
	awaiting string

	guard guard
}

// guard stops the run when a reading leaves the range plus margin, once a reading has
// been inside (the level may start outside, from where the board was).
type guard struct {
	on         bool
	armed      bool
	lo, hi     float64 // counts, margin included
	inLo, inHi float64 // the range itself, counts
	tripped    *telemetry.Sample
}

func newSession(c Conn) *session {
	return &session{conn: c, parser: &telemetry.Parser{Name: "tune"}, start: c.StartedAt(), spLo: math.Inf(1), spHi: math.Inf(-1)}
}

func (s *session) meta() telemetry.Meta { return s.parser.Meta() }

// period returns the sample period, s: the meta's, else the median t step seen.
func (s *session) period() float64 {
	if m := s.meta(); m.Has(telemetry.FieldPeriod) && m.Period > 0 {
		return m.Period
	}
	if len(s.dts) > 4 {
		return median(s.dts) * 1e-6
	}
	return math.NaN()
}

func median(v []float64) float64 {
	w := append([]float64(nil), v...)
	for i := 1; i < len(w); i++ {
		for j := i; j > 0 && w[j] < w[j-1]; j-- {
			w[j], w[j-1] = w[j-1], w[j]
		}
	}
	return w[len(w)/2]
}

// handle takes one line; it returns ErrOutOfRange (wrapped) for a reading the guard
// refuses and ErrUnplugged when the port went away.
func (s *session) handle(ln wire.Line) error {
	switch ln.Dir {
	case telemetry.FromBoard:
		s.boardLines++
		rec := s.parser.ParseReceived(ln.Raw, ln.Host.Sub(s.start).Nanoseconds())
		switch rec.Kind {
		case telemetry.RecSample:
			s.lastHost = ln.Host
			return s.sample(rec.Sample)
		case telemetry.RecMeta:
			if s.awaiting == "" {
				s.said = s.said.Merge(rec.Delta)
			}
			m := s.parser.Meta()
			for _, a := range s.accs {
				a.SetMeta(m)
			}
		case telemetry.RecNone:
			if len(ln.Raw) > 0 && ln.Raw[0] == '#' && len(s.answers) < 64 {
				s.answers = append(s.answers, telemetry.SanitizeN(ln.Raw, 120))
			}
		}
	case telemetry.ToBoard:
		s.said = telemetry.Meta{}
		if string(ln.Raw) == s.awaiting {
			s.awaiting = ""
		}
	case telemetry.HostEvent:
		switch ln.EventKind() {
		case wire.EventConnected, wire.EventReconnected:
			s.parser.ResetClock()
			s.connected, s.unplugged, s.boardLines, s.haveLast = true, false, 0, false
		case wire.EventUnplugged:
			s.connected, s.unplugged = false, true
			return ErrUnplugged
		}
	}
	return nil
}

func (s *session) sample(x telemetry.Sample) error {
	if s.haveLast && x.Flags&telemetry.HasT != 0 && s.last.Flags&telemetry.HasT != 0 {
		if dt := float64(x.T - s.last.T); dt > 0 && len(s.dts) < 256 {
			s.dts = append(s.dts, dt)
		}
	}
	if s.haveLast && x.SP != s.last.SP {
		s.spMoved, s.pvBefore = s.k+1, s.last.PV
	}
	s.last, s.haveLast = x, true
	s.k++
	for _, a := range s.accs {
		a.Add(x)
	}
	g := &s.guard
	if !g.on {
		return nil
	}
	if x.PV >= g.inLo && x.PV <= g.inHi {
		g.armed = true
	}
	if g.armed && (x.PV < g.lo || x.PV > g.hi) {
		c := x
		g.tripped = &c
		return fmt.Errorf("%w: reading %g counts outside %g..%g (the range plus its margin)", ErrOutOfRange, x.PV, g.lo, g.hi)
	}
	return nil
}

// pump reads lines until cond holds (checked after every line), the host-time timeout
// passes (timedOut true; 0 = none), ctx ends (ErrQuit) or handle fails.
func (s *session) pump(ctx context.Context, timeout time.Duration, cond func() bool) (timedOut bool, err error) {
	if cond != nil && cond() {
		return false, nil
	}
	var tc <-chan time.Time
	if timeout > 0 {
		t := time.NewTimer(timeout)
		defer t.Stop()
		tc = t.C
	}
	batches := s.conn.Batches()
	for {
		// Lines left over from the batch a previous call stopped in come first.
		for len(s.pending) > 0 {
			ln := s.pending[0]
			s.pending = s.pending[1:]
			if err := s.handle(ln); err != nil {
				return false, err
			}
			if cond != nil && cond() {
				return false, nil
			}
		}
		select {
		case <-ctx.Done():
			return false, ErrQuit
		case <-tc:
			return true, nil
		case b, ok := <-batches:
			if !ok {
				return false, ErrLinkClosed
			}
			s.pending = b
		}
	}
}

// send writes one line to the board.
// A write that fails because the port is going away is an unplug: it waits (up to a
// second) for the Link to say so and returns ErrUnplugged then.
func (s *session) send(cmd string) error {
	s.said, s.awaiting = telemetry.Meta{}, cmd
	if err := s.conn.Send(cmd); err != nil {
		if !s.unplugged {
			_, perr := s.pump(context.Background(), time.Second, func() bool { return s.unplugged })
			if perr != nil && !errors.Is(perr, ErrUnplugged) {
				return perr
			}
		}
		if s.unplugged {
			return fmt.Errorf("%w: sending %q failed", ErrUnplugged, cmd)
		}
		return fmt.Errorf("tune: send %q: %w", cmd, err)
	}
	return nil
}
