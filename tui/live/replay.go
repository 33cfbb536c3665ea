package live

import (
	"fmt"
	"path/filepath"
	"time"

	"github.com/caploop/caploop/telemetry"
)

// ReplayOptions configure NewReplay.
type ReplayOptions struct {
	Options
	Path   string
	Speed  float64 // 1 = real time, 2, 10; 0 = as fast as possible
	Paused bool    // start held

	// Open opens the input, again for each seek back; nil = telemetry.OpenFile(Path).
	Open func() (telemetry.Source, error)
}

// NewReplay opens a capture or plain telemetry file (gzip too) and replays it at the
// chosen speed, with pause, step and seek from the screen.
func NewReplay(o ReplayOptions) (*Pipeline, error) {
	if o.Open == nil {
		path := o.Path
		o.Open = func() (telemetry.Source, error) { return telemetry.OpenFile(path) }
	}
	src, err := o.Open()
	if err != nil {
		return nil, err
	}
	name := filepath.Base(o.Path)
	p := newPipeline(name, o.Retain, o.adviser())
	p.advIn = o.adviceInputs()
	p.replay = true
	p.speed = o.Speed
	p.held = o.Paused
	p.ctl = make(chan control, 16)
	c := newEngine(p, o.analyzer(name))
	go p.runReplay(o, src, c)
	return p, nil
}

func (p *Pipeline) runReplay(o ReplayOptions, src telemetry.Source, c *engine) {
	defer close(p.closed)
	var sc *telemetry.Scanner
	open := func() {
		sc = telemetry.NewScanner(src)
		sc.Name = o.Path
		c.lineStats = sc.Stats
	}
	open()
	defer func() { src.Close() }()
	speed, paused := o.Speed, o.Paused
	c.statsNow = true // the screen shows the state at once, held or not
	ended := false
	seekTo, stepUntil := -1.0, -1.0
	var wallStart time.Time
	var tStart float64
	paced := false
	var outline *Outline // read on the first jump
	var jumped *Event    // said once the jump has landed
	setState := func() {
		switch {
		case ended:
			c.stats.State = StateEnded
		case paused:
			c.stats.State = StateHeld
		default:
			c.stats.State = StateRunning
		}
		c.stats.Speed = speed
		c.stats.Position = c.lastT
	}
	// rewind starts the capture again from its first line.
	rewind := func() bool {
		src.Close()
		s, err := o.Open()
		if err != nil {
			c.p.deliver(nil, nil, func(b *Snapshot) { b.Err = err })
			return false
		}
		src = s
		open()
		c.restart()
		ended = false
		return true
	}
	readOutline := func() *Outline {
		s, err := o.Open()
		if err == nil {
			var ol *Outline
			if ol, err = buildOutline(s, p.quit); err == nil {
				return ol
			}
		}
		c.event(EventInfo, "cannot read the capture's landmarks: "+telemetry.SanitizeN([]byte(err.Error()), 120))
		return nil
	}
	// jump seeks to a landmark or a fraction of the capture and says where it went.
	jump := func(ol *Outline, ctl control) {
		var target float64
		found := true
		name := ctl.landmark.String()
		switch {
		case ctl.fraction >= 0:
			target, name = ol.Fraction(ctl.fraction), "fraction"
		case ctl.dir > 0:
			target, found = ol.Next(ctl.landmark, c.lastT)
		default:
			eps := 0.0 // a running replay has moved on from the landmark it jumped to
			if !paused && speed > 0 {
				eps = speed / 2
			}
			target, found = ol.Prev(ctl.landmark, c.lastT-eps)
		}
		if !found {
			word := "later"
			if ctl.dir < 0 {
				word = "earlier"
			}
			c.event(EventJump, "no "+word+" "+name)
			c.evs[len(c.evs)-1].Value = -1
			return
		}
		jumped = &Event{Kind: EventJump, Text: name, Value: target}
		switch {
		case target > c.lastT && !ended:
			seekTo = target
		case target < c.lastT:
			if !rewind() {
				return
			}
			seekTo = target
		default:
			jumped.T = c.lastT
			c.evs = append(c.evs, *jumped)
			jumped = nil
		}
	}
	apply := func(ctl control) {
		c.statsNow = true // the screen shows held, speed and position at once
		switch {
		case ctl.pause > 0:
			paused = true
		case ctl.pause < 0:
			paused = false
		case ctl.setSpeed:
			speed = ctl.speed
		case ctl.step > 0:
			if paused {
				stepUntil = c.lastT + ctl.step
			}
		case ctl.seek > 0:
			jumped = nil
			if !ended {
				seekTo = c.lastT + ctl.seek
			}
		case ctl.seek < 0:
			jumped = nil
			target := max(c.lastT+ctl.seek, 0)
			if !rewind() {
				return
			}
			seekTo = target
		case ctl.jump:
			if outline == nil {
				outline = readOutline()
				if outline == nil {
					return
				}
			}
			jump(outline, ctl)
		}
		paced = false
	}
	tick := time.NewTicker(summaryInterval)
	defer tick.Stop()
	for {
		select {
		case <-p.quit:
			return
		case ctl := <-p.ctl:
			apply(ctl)
			continue
		default:
		}
		if ended || (paused && stepUntil < 0 && seekTo < 0) {
			setState()
			c.flush(false)
			select {
			case <-p.quit:
				return
			case ctl := <-p.ctl:
				apply(ctl)
			case <-tick.C:
			}
			continue
		}
		if !sc.Scan() {
			ended = true
			setState()
			err := sc.Err()
			if err != nil {
				err = fmt.Errorf("%s: %w", o.Path, err)
			}
			c.finish(err)
			continue
		}
		switch sc.Kind() {
		case telemetry.RecSample:
			prev := c.lastT
			t := c.sample(sc.Sample())
			if t-prev > 1 {
				paced = false // a gap in the stream: do not sit through it
			}
			switch {
			case seekTo >= 0:
				if t >= seekTo {
					seekTo, paced, c.statsNow = -1, false, true
					if jumped != nil {
						jumped.T = t
						c.evs = append(c.evs, *jumped)
						jumped = nil
					}
				}
			case stepUntil >= 0:
				if t >= stepUntil {
					stepUntil, paced, c.statsNow = -1, false, true
				}
			case speed > 0:
				if !paced {
					wallStart, tStart, paced = time.Now(), t, true
				}
				target := wallStart.Add(time.Duration((t - tStart) / speed * float64(time.Second)))
				if d := time.Until(target); d > 2*time.Millisecond {
					setState()
					c.flush(false)
					timer := time.NewTimer(d)
					select {
					case <-p.quit:
						timer.Stop()
						return
					case ctl := <-p.ctl:
						apply(ctl)
					case <-timer.C:
					}
					timer.Stop()
				}
			}
		default:
			replayRecord(c, sc)
		}
		if len(c.pts) >= 8192 {
			setState()
			c.flush(false)
		}
	}
}
