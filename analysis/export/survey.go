package export

import (
	"errors"
	"strconv"

	"github.com/caploop/caploop/telemetry"
)

// ErrNoSamples is returned by Survey when the input held no sample at all.
var ErrNoSamples = errors.New("export: no samples in the input")

// Layout is what the first pass found: the columns of the table and the figures the
// time axis needs. Write uses it for the second pass over the same input.
type Layout struct {
	// Samples is the number of samples in the input; Write writes no more rows.
	Samples int64
	// HasHost, HasN: some sample had a host time (a capture) or a sequence number n.
	HasHost, HasN bool
	// Extras are the extra channel names in the order they first appear, as the lines
	// spelled them (untrusted: Columns gives the sanitised header names).
	Extras []string
	// Meta is the meta merged over the whole input.
	Meta telemetry.Meta

	clock    byte  // clockT, clockN or clockIndex: the first sample decides
	hostNS   bool  // some host time is not a whole microsecond
	hostPer  int64 // host time between the first and last sample, ns
	hostSpan int64 // samples with a host time
}

// Time sources, as the summary's clock chooses them from the first sample.
const (
	clockT     = 't' // board time t, ticks are microseconds
	clockN     = 'n' // sequence number n, ticks are samples
	clockIndex = 'i' // sample index, ticks are samples
)

// Survey reads sc to its end (the first pass) and returns the Layout of its table. A
// read error ends the pass and is returned; an input without samples gives
// ErrNoSamples.
func Survey(sc *telemetry.Scanner) (*Layout, error) {
	l := &Layout{}
	seen := map[string]bool{}
	var last []string // the extra channel names of the previous sample
	var flags telemetry.SampleFlags
	var h0, h1 int64
	for sc.Scan() {
		if sc.Kind() != telemetry.RecSample {
			continue
		}
		s := sc.CurrentSample()
		if l.Samples == 0 {
			switch {
			case s.Flags&telemetry.HasT != 0:
				l.clock = clockT
			case s.Flags&telemetry.HasN != 0:
				l.clock = clockN
			default:
				l.clock = clockIndex
			}
		}
		l.Samples++
		flags |= s.Flags
		if s.Flags&telemetry.HasHost != 0 {
			if l.hostSpan == 0 {
				h0 = s.Host
			}
			h1 = s.Host
			l.hostSpan++
			if s.Host%1000 != 0 {
				l.hostNS = true
			}
		}
		if ex := sc.Extras(); len(ex) > 0 || len(last) > 0 {
			// Lines mostly repeat the previous line's channels: compare with those
			// (interned names, so equal strings share their bytes) before the map.
			same := len(ex) == len(last)
			for i := 0; same && i < len(ex); i++ {
				same = ex[i].Name == last[i]
			}
			if !same {
				last = last[:0]
				for _, e := range ex {
					last = append(last, e.Name)
					if !seen[e.Name] {
						seen[e.Name] = true
						l.Extras = append(l.Extras, e.Name)
					}
				}
			}
		}
	}
	l.HasHost = flags&telemetry.HasHost != 0
	l.HasN = flags&telemetry.HasN != 0
	l.Meta = sc.Meta()
	l.hostPer = h1 - h0
	if err := sc.Err(); err != nil {
		return l, err
	}
	if l.Samples == 0 {
		return l, ErrNoSamples
	}
	return l, nil
}

// secondsPerTick returns the seconds of one tick of the time axis, as the summary works
// it out: 1 µs for board time; for a sequence number or the sample index, the sample
// period of the meta lines, else the mean host interval; 0 when unknown.
func (l *Layout) secondsPerTick() float64 {
	if l.clock == clockT {
		return 1e-6
	}
	if l.Meta.Has(telemetry.FieldPeriod) && l.Meta.Period > 0 {
		return l.Meta.Period
	}
	if l.hostSpan > 1 && l.hostPer > 0 {
		return float64(l.hostPer) * 1e-9 / float64(l.hostSpan-1)
	}
	return 0
}

// Fixed column names, with their units.
const (
	colBoardTime = "board_time_s"
	colHostTime  = "host_time_s"
	colN         = "n"
)

var fixedAfterN = [...]string{"sp_counts", "sp_v", "pv_counts", "pv_v", "drive", "segment", "deadband_counts", "deadband_v"}

// Columns returns the header names. Extra channel names come from the board and are
// untrusted: each passes telemetry.Sanitize, a name a spreadsheet could take for a
// formula (starting with =, +, -, @) gets a leading apostrophe, and a name equal to
// another column's gets a numeric suffix (_2, _3, ...).
func (l *Layout) Columns() []string {
	cols := []string{colBoardTime}
	if l.HasHost {
		cols = append(cols, colHostTime)
	}
	if l.HasN {
		cols = append(cols, colN)
	}
	cols = append(cols, fixedAfterN[:]...)
	used := make(map[string]bool, len(cols)+len(l.Extras))
	for _, c := range cols {
		used[c] = true
	}
	for _, e := range l.Extras {
		name := headerName(e)
		if used[name] {
			base := name
			for k := 2; used[name]; k++ {
				name = base + "_" + strconv.Itoa(k)
			}
		}
		used[name] = true
		cols = append(cols, name)
	}
	return cols
}

// headerName makes an untrusted channel name safe for a header cell.
func headerName(raw string) string {
	s := telemetry.SanitizeN([]byte(raw), 64)
	if s == "" {
		return "extra"
	}
	switch s[0] {
	case '=', '+', '-', '@':
		s = "'" + s
	}
	return s
}
