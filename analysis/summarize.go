package analysis

import (
	"errors"

	"github.com/caploop/caploop/telemetry"
)

// ErrNoSamples is returned by Summarize when the input held no sample at all.
var ErrNoSamples = errors.New("analysis: no samples in the input")

// batchLen is the number of samples handed from the reading goroutine to the analysing
// one at a time.
const batchLen = 8192

// metaAt is a record between samples: a meta line, a comment or a capture event.
type metaAt struct {
	at   int // the record comes before samples[at]
	kind telemetry.RecordKind
	m    telemetry.Meta
	line int64
	ev   telemetry.Event
}

type batch struct {
	samples []telemetry.Sample
	metas   []metaAt
}

// Summarize reads sc to its end and returns the Summary of everything it held: the
// whole-file pass of `caploop summary`. Parsing and analysis run on two goroutines,
// handing samples over in batches (reused, so a batch costs one channel send each way),
// and the end of each segment (its spectra and figures) is worked out on a third, so
// that a file costs about the parse, not the sum of the three; memory stays bounded (a
// few batches and segment states in flight).
//
// A read error ends the pass: the Summary of what was read is returned with the error.
// An input without samples returns ErrNoSamples (and the Summary, which has the line
// counts).
func Summarize(sc *telemetry.Scanner, opts Options) (*Summary, error) {
	if opts.Source == "" {
		opts.Source = sc.Name
	}
	acc := New(opts)
	acc.startFinisher()
	const inFlight = 4
	full := make(chan *batch, inFlight)
	free := make(chan *batch, inFlight+2)
	for range inFlight + 2 {
		free <- &batch{samples: make([]telemetry.Sample, 0, batchLen)}
	}
	done := make(chan struct{})
	go func() {
		defer close(done)
		for b := range full {
			// The runs of samples between meta lines go through in one call each.
			at := 0
			for _, m := range b.metas {
				acc.addRun(b.samples[at:m.at])
				switch m.kind {
				case telemetry.RecMeta:
					acc.SetMetaLine(m.m, m.line)
				case telemetry.RecEvent:
					acc.AddEvent(m.ev)
				default:
					acc.Comment(m.line)
				}
				at = m.at
			}
			acc.addRun(b.samples[at:])
			free <- b
		}
	}()
	b := <-free
	// The scanner parses each sample straight into the batch's next slot.
	sc.SetSampleDst(&b.samples[:batchLen][0])
	var feed recordFeed
	for sc.Scan() {
		switch sc.Kind() {
		case telemetry.RecSample:
			n := len(b.samples) + 1
			b.samples = b.samples[:n]
			feed.lastLine = b.samples[n-1].Line
			if n == batchLen {
				full <- b
				b = <-free
				b.samples, b.metas = b.samples[:0], b.metas[:0]
				n = 0
			}
			sc.SetSampleDst(&b.samples[:batchLen][n])
		case telemetry.RecMeta:
			// Comment lines between the last sample and this meta line (the scanner
			// skips them, its counts show them) may open a restart banner.
			st := sc.Stats()
			if line, ok := feed.banner(st); ok {
				b.metas = append(b.metas, metaAt{at: len(b.samples), kind: telemetry.RecNone, line: line})
			}
			b.metas = append(b.metas, metaAt{at: len(b.samples), kind: telemetry.RecMeta, m: sc.Meta(), line: st.Lines})
		case telemetry.RecEvent:
			b.metas = append(b.metas, metaAt{at: len(b.samples), kind: telemetry.RecEvent, ev: sc.Event()})
		}
	}
	sc.SetSampleDst(nil)
	full <- b
	close(full)
	<-done
	acc.stopFinisher()
	acc.SetStats(sc.Stats())
	sum := acc.Summary()
	if err := sc.Err(); err != nil {
		return sum, err
	}
	if sum.Samples == 0 {
		return sum, ErrNoSamples
	}
	return sum, nil
}
