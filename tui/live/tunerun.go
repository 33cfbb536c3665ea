package live

import (
	"bytes"
	"context"
	"errors"
	"sync"
	"time"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui/live/tune"
)

// A tune run on the bench screen is the sequencer of package tune driven over the
// pipeline's own link: the pipeline hands every batch it reads to the run as well, so
// the screen keeps drawing while tune steps the board.

// ErrNoTune is returned by StartTune on a source without a link (a replay, a file).
var ErrNoTune = errors.New("tune needs a live board link")

// ErrTuneRunning is returned by StartTune while a run is under way.
var ErrTuneRunning = errors.New("a tune run is already under way")

// TuneStopWait bounds how long Close waits for a tune run to restore the board's
// settings before it closes the link (the restore waits up to 2 s for the data lines).
const TuneStopWait = 3 * time.Second

// TuneUpdate is one thing a tune run says to the screen: a progress line, the plan to
// confirm (Answer it), or the end (Done, with the result and error of tune.Run).
type TuneUpdate struct {
	Progress string
	Plan     string
	Done     bool
	Result   *tune.Result
	Err      error
}

// TuneRun is a tune run under way on a pipeline.
type TuneRun struct {
	updates chan TuneUpdate
	answer  chan bool
	cancel  context.CancelFunc
	done    chan struct{}
	tap     chan []wire.Line
}

// Updates delivers the run's updates in order; it is closed after the Done update.
func (r *TuneRun) Updates() <-chan TuneUpdate { return r.updates }

// Answer answers the plan: true sends the settings, false declines.
func (r *TuneRun) Answer(ok bool) {
	select {
	case r.answer <- ok:
	default:
	}
}

// Stop ends the run early; tune restores the board's settings on its way out.
func (r *TuneRun) Stop() { r.cancel() }

// Done is closed once tune.Run has returned (the settings restored, or said why not).
func (r *TuneRun) Done() <-chan struct{} { return r.done }

// CanTune reports whether the source is a board link a tune run can drive.
func (p *Pipeline) CanTune() bool { return p.link != nil }

// StartTune starts tune.Run on the pipeline's link with o; o.Confirm and o.Progress are
// replaced by the run's own (the plan and the progress go to Updates).
func (p *Pipeline) StartTune(o tune.Options) (*TuneRun, error) {
	if p.link == nil {
		return nil, ErrNoTune
	}
	p.tuneMu.Lock()
	defer p.tuneMu.Unlock()
	if p.tune != nil {
		select {
		case <-p.tune.done:
		default:
			return nil, ErrTuneRunning
		}
	}
	ctx, cancel := context.WithCancel(context.Background())
	r := &TuneRun{
		updates: make(chan TuneUpdate, 64),
		answer:  make(chan bool, 1),
		cancel:  cancel,
		done:    make(chan struct{}),
		tap:     make(chan []wire.Line, 64),
	}
	conn := &tuneConn{link: p.link, out: make(chan []wire.Line)}
	go relay(r.tap, conn.out, r.done)
	if p.linkUp {
		// The run starts on a port opened long ago: it learns so as from a fresh open.
		r.tap <- []wire.Line{{Host: time.Now(), Dir: telemetry.HostEvent, Raw: []byte(wire.EventConnected + " (open already)")}}
	}
	o.Progress = &lineWriter{emit: func(s string) {
		select {
		case r.updates <- TuneUpdate{Progress: s}:
		default: // a screen 64 lines behind (or gone) loses a progress line, never the run
		}
	}}
	o.Confirm = func(plan string) (bool, error) {
		r.updates <- TuneUpdate{Plan: plan}
		select {
		case ok := <-r.answer:
			return ok, nil
		case <-ctx.Done():
			return false, tune.ErrQuit
		}
	}
	p.tune = r
	go func() {
		res, err := tune.Run(ctx, conn, o)
		if err != nil && ctx.Err() != nil && !errors.Is(err, tune.ErrQuit) {
			err = errors.Join(tune.ErrQuit, err)
		}
		p.tuneMu.Lock()
		close(r.done)
		p.tuneMu.Unlock()
		r.updates <- TuneUpdate{Done: true, Result: res, Err: err}
		close(r.updates)
		cancel()
	}()
	return r, nil
}

// forward hands a batch of the link to a tune run under way.
func (p *Pipeline) forward(b []wire.Line) {
	p.tuneMu.Lock()
	for _, ln := range b {
		switch ln.EventKind() {
		case wire.EventConnected, wire.EventReconnected:
			p.linkUp = true
		case wire.EventUnplugged:
			p.linkUp = false
		}
	}
	r := p.tune
	p.tuneMu.Unlock()
	if r == nil {
		return
	}
	select {
	case r.tap <- b:
	case <-r.done:
	}
}

// stopTune stops a run under way and waits up to TuneStopWait for its restore.
func (p *Pipeline) stopTune() {
	p.tuneMu.Lock()
	r := p.tune
	p.tuneMu.Unlock()
	if r == nil {
		return
	}
	r.Stop()
	t := time.NewTimer(TuneStopWait)
	defer t.Stop()
	select {
	case <-r.done:
	case <-t.C:
	}
}

// relay passes batches from in to out without ever holding up the pipeline: it queues
// what the run has not taken yet (the run waits on the plan's confirmation, say).
func relay(in <-chan []wire.Line, out chan<- []wire.Line, done <-chan struct{}) {
	var q [][]wire.Line
	for {
		var send chan<- []wire.Line
		var head []wire.Line
		if len(q) > 0 {
			send, head = out, q[0]
		}
		select {
		case b := <-in:
			q = append(q, b)
		case send <- head:
			q[0] = nil
			q = q[1:]
		case <-done:
			return
		}
	}
}

// tuneConn is the tune.Conn of a run: the link's sending side, the relayed batches.
type tuneConn struct {
	link *wire.Link
	out  chan []wire.Line
}

func (c *tuneConn) Send(cmd string) error       { return c.link.Send(cmd) }
func (c *tuneConn) Batches() <-chan []wire.Line { return c.out }
func (c *tuneConn) Annotate(text string)        { c.link.Annotate(text) }
func (c *tuneConn) StartedAt() time.Time        { return c.link.StartedAt() }

// lineWriter turns the progress writes into lines.
type lineWriter struct {
	mu   sync.Mutex
	buf  []byte
	emit func(string)
}

func (w *lineWriter) Write(b []byte) (int, error) {
	w.mu.Lock()
	defer w.mu.Unlock()
	w.buf = append(w.buf, b...)
	for {
		i := bytes.IndexByte(w.buf, '\n')
		if i < 0 {
			break
		}
		w.emit(telemetry.Sanitize(w.buf[:i]))
		w.buf = w.buf[i+1:]
	}
	return len(b), nil
}
