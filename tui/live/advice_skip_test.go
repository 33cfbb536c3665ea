package live

import (
	"sync/atomic"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/telemetry"
)

// fixedAcc is an analyzer whose summary the test sets.
type fixedAcc struct{ s *analysis.Summary }

func (f *fixedAcc) SetMeta(telemetry.Meta)     {}
func (f *fixedAcc) Add(telemetry.Sample)       {}
func (f *fixedAcc) SetStats(telemetry.Stats)   {}
func (f *fixedAcc) Summary() *analysis.Summary { return f.s }

func fptr(v float64) *float64 { return &v }
func iptr(v int) *int         { return &v }

// steadySummary is a board at a steady setpoint whose measured noise wanders by jitter.
func steadySummary(samples int64, db, jitter float64) *analysis.Summary {
	return &analysis.Summary{
		Samples:       samples,
		SamplePeriodS: fptr(1e-3),
		Board: analysis.Board{VrefV: fptr(5), ADCBits: iptr(10), Mode: "three-state", DeadbandCounts: fptr(db),
			SupplyV: fptr(5), ROhm: fptr(47e3), CF: fptr(1e-6)},
		Plant: analysis.Plant{TauChargeS: fptr(0.033), NoiseRMSCounts: fptr(0.6 * (1 + jitter)),
			VHighV: fptr(5)},
		Segments: []analysis.Segment{{SetpointCounts: 300}, {SetpointCounts: 600}},
	}
}

// TestAdviceRunsWhenInputsMove: on a steady board the advice is simulated once and then
// handed over again every advice interval for the newer summaries (the screen counts
// those updates); it is simulated again when an input moves materially (a deadband
// change here), and after a restart.
func TestAdviceRunsWhenInputsMove(t *testing.T) {
	var runs atomic.Int64
	adv := func(s *analysis.Summary) (*advice.Advice, error) {
		runs.Add(1)
		db := int(*s.Board.DeadbandCounts) + 1
		return &advice.Advice{DeadbandCounts: &db}, nil
	}
	p := newPipeline("steady", 0, adv)
	p.advIn = Options{}.adviceInputs()
	p.closeFn = func() error { close(p.closed); return nil }
	defer p.Close()
	acc := &fixedAcc{}
	c := newEngine(p, func() analyzer { return acc })
	clock := time.Unix(1000, 0)
	c.now = func() time.Time { return clock }

	// step runs one advice interval of a steady board and returns the advice handed over.
	step := func(db, jitter float64) *advice.Advice {
		t.Helper()
		clock = clock.Add(adviceInterval)
		c.samples += 2000
		acc.s = steadySummary(c.samples, db, jitter)
		c.flush(false)
		deadline := time.Now().Add(5 * time.Second)
		for {
			select {
			case <-p.Ready():
			case <-time.After(50 * time.Millisecond):
			}
			p.mu.Lock()
			a, seq := p.box.Advice, p.advSeq
			p.box.Advice = nil
			p.mu.Unlock()
			if a != nil && seq == c.samples {
				return a
			}
			if time.Now().After(deadline) {
				t.Fatalf("no advice for the summary at %d samples", c.samples)
			}
		}
	}
	wantDB := func(a *advice.Advice, want int) {
		t.Helper()
		if a.DeadbandCounts == nil || *a.DeadbandCounts != want {
			t.Fatalf("advised deadband %v, want %d", a.DeadbandCounts, want)
		}
	}
	for i := 0; i < 6; i++ {
		// Noise wandering by ±1 % is not a material change (adviceRel is 3 %).
		wantDB(step(6, 0.01*float64(i%2*2-1)), 7)
	}
	if got := runs.Load(); got != 1 {
		t.Errorf("advice simulated %d times over 6 steady intervals, want 1", got)
	}
	wantDB(step(8, 0), 9)
	if got := runs.Load(); got != 2 {
		t.Errorf("advice simulated %d times after a deadband change, want 2", got)
	}
	wantDB(step(8, 0.10), 9) // noise 10 % up: material
	if got := runs.Load(); got != 3 {
		t.Errorf("advice simulated %d times after the noise rose 10 %%, want 3", got)
	}
	c.restart()
	c.samples = 0
	wantDB(step(8, 0.10), 9)
	if got := runs.Load(); got != 4 {
		t.Errorf("advice simulated %d times after a restart, want 4", got)
	}
}
