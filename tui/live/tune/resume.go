package tune

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"time"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
)

// maxResumes bounds the re-plugs a run resumes after.
const maxResumes = 2

// hold is dwell, resumed once the board is back when it was unplugged during the dwell:
// the board may have rebooted with its own settings, so they are read again, the pass's
// set line goes again and the dwell starts over (the passes see the break as a reset).
func (r *runner) hold(ctx context.Context, pass string, sp int) error {
	for {
		err := r.dwell(ctx, pass, sp)
		if !errors.Is(err, ErrUnplugged) {
			return err
		}
		// The pass measures nothing from the unplug until its band is answered.
		accs := r.s.accs
		r.s.accs = nil
		err = r.resume(ctx, pass, err)
		if err == nil && r.passCmd != "" {
			err = r.setPass(ctx, pass, r.passCmd, r.passBand)
		}
		r.s.accs = accs
		if err != nil {
			return err
		}
		r.step--
	}
}

// setPass sends cmd, the set line of a pass (sent again after every re-plug), and waits
// up to TakeTimeout for the board's answer to show the deadband band, so that the pass
// measures nothing under the band before it. A board unplugged before the line could be
// sent, or before it answered, is waited for (resume), and the line goes again then.
func (r *runner) setPass(ctx context.Context, pass, cmd string, band int) error {
	r.passCmd, r.passBand = cmd, band
	s := r.s
	// After an unplug the passes measure nothing until the band is answered.
	accs, resumed := s.accs, false
	defer func() {
		if resumed {
			s.accs = accs
		}
	}()
	for {
		err := r.send(cmd)
		if err == nil {
			want := float64(band)
			var to bool
			to, err = s.pump(ctx, r.o.TakeTimeout, func() bool { return s.said.Has(telemetry.FieldDeadband) && s.said.Deadband == want })
			if err == nil {
				if to {
					r.progress("%s: the board did not answer deadband=%d within %v; measuring anyway", pass, band, r.o.TakeTimeout)
				}
				return nil
			}
		}
		if !errors.Is(err, ErrUnplugged) {
			return err
		}
		resumed, s.accs = true, nil
		if err := r.resume(ctx, pass, err); err != nil {
			return err
		}
	}
}

// resume waits, after cause (an unplug), for the board to come back, at most
// maxResumes times a run and ReplugWait each time, then reads its settings again: a
// board that reset has lost what tune had set. The caller sends its line again.
func (r *runner) resume(ctx context.Context, pass string, cause error) error {
	s := r.s
	for {
		if r.res.Resumed >= maxResumes {
			return fmt.Errorf("%w (tune resumes after %d re-plugs a run, no more)", cause, maxResumes)
		}
		r.progress("the board was unplugged; waiting up to %v for it to come back to resume", r.o.ReplugWait)
		s.guard.armed = false
		// The wait is ReplugWait from the unplug, however often the port comes and goes
		// in it.
		deadline := time.Now().Add(r.o.ReplugWait)
		var err error
		for {
			var to bool
			to, err = s.pump(ctx, time.Until(deadline), func() bool { return s.connected && s.haveLast })
			if err == nil && to {
				return fmt.Errorf("%w: it did not come back within %v", ErrUnplugged, r.o.ReplugWait)
			}
			if !errors.Is(err, ErrUnplugged) || time.Until(deadline) <= 0 {
				break
			}
		}
		if err != nil {
			if errors.Is(err, ErrUnplugged) {
				return fmt.Errorf("%w: it did not stay plugged in for %v", ErrUnplugged, r.o.ReplugWait)
			}
			return err
		}
		r.res.Resumed++
		s.conn.Annotate("tune: resumed after a re-plug")
		err = r.reread(ctx)
		if err == nil {
			r.progress("the board is back: resuming the %s pass", pass)
			return nil
		}
		if !errors.Is(err, ErrUnplugged) {
			return err
		}
		cause = err
	}
}

// reread asks a board that came back for its settings (`info`) and says what it
// answered. A board that describes another ADC than before is not the board the plan
// was made for: the run stops.
func (r *runner) reread(ctx context.Context) error {
	s := r.s
	if err := s.send("info"); err != nil {
		return err
	}
	answered := func() bool {
		m := s.said
		if len(r.b.Accepts) > 0 {
			return m.Has(telemetry.FieldAccepts)
		}
		return m.Has(telemetry.FieldVref) && m.Has(telemetry.FieldADCBits)
	}
	to, err := s.pump(ctx, r.o.TakeTimeout, answered)
	if err != nil {
		return err
	}
	m := s.said
	if to && !m.Has(telemetry.FieldVref) && !m.Has(telemetry.FieldADCBits) {
		r.progress("the board is back but did not answer info within %v; its settings are not known", r.o.TakeTimeout)
		return nil
	}
	if (m.Has(telemetry.FieldVref) && m.Vref != r.b.VrefV) || (m.Has(telemetry.FieldADCBits) && m.ADCBits != r.b.ADCBits) {
		return fmt.Errorf("%w: the board came back as another one (vref %s, %d bits; tune planned for vref %s, %d bits)",
			ErrNoMeta, si.Format(m.Vref, "V"), m.ADCBits, si.Format(r.b.VrefV, "V"), r.b.ADCBits)
	}
	r.progress("the board is back and says %s", settingsText(m))
	return nil
}

// settingsText is "deadband 2, three-state, period 1 ms" from what a meta answer holds.
func settingsText(m telemetry.Meta) string {
	var kv []string
	if m.Has(telemetry.FieldDeadband) {
		kv = append(kv, fmt.Sprintf("deadband %g", m.Deadband))
	}
	if m.Has(telemetry.FieldMode) {
		kv = append(kv, m.Mode.String())
	}
	if m.Has(telemetry.FieldPeriod) {
		kv = append(kv, "period "+si.Format(m.Period, "s"))
	}
	if len(kv) == 0 {
		return "nothing of its deadband, mode or period"
	}
	return strings.Join(kv, ", ")
}
