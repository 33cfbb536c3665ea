package export

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/telemetry"
)

// Options says how Write writes the table. The zero value writes CSV.
type Options struct {
	// TSV writes tab-separated values with "\n" line ends instead of RFC 4180 CSV with
	// "\r\n" line ends.
	TSV bool
}

// Result counts what Write did.
type Result struct {
	Rows int64 // rows written, one per sample
	// Beyond counts the samples past Layout.Samples (the input grew after the survey):
	// read but not written, so the table matches the survey.
	Beyond int64
	// UnknownExtras counts the values of channels the survey did not see, left out.
	UnknownExtras int64
}

// flushAt is the size at which the row buffer goes to the writer.
const flushAt = 64 << 10

// Write reads sc (the second pass over the input Survey read) and writes the header and
// one row per sample to w. The header cells follow encoding/csv's quoting (RFC 4180);
// the numeric cells never need quotes. Memory stays bounded: a row buffer of about 64
// KiB and one slot per extra channel.
//
// A read or write error stops it and is returned; so is an input that holds fewer
// samples than the survey counted (it changed between the passes).
func Write(w io.Writer, sc *telemetry.Scanner, l *Layout, opts Options) (Result, error) {
	var res Result
	sep, eol := byte(','), "\r\n"
	if opts.TSV {
		sep, eol = '\t', "\n"
	}
	hw := csv.NewWriter(w)
	hw.Comma, hw.UseCRLF = rune(sep), !opts.TSV
	if err := hw.Write(l.Columns()); err != nil {
		return res, fmt.Errorf("export: %w", err)
	}
	hw.Flush()
	if err := hw.Error(); err != nil {
		return res, fmt.Errorf("export: %w", err)
	}

	r := newRowMaker(l, sep)
	rule := analysis.NewSegmentRule()
	buf := make([]byte, 0, flushAt+4096)
	for sc.Scan() {
		seg := rule.Record(sc)
		switch sc.Kind() {
		case telemetry.RecMeta:
			r.setMeta(sc.Meta())
		case telemetry.RecSample:
			if res.Rows == l.Samples {
				res.Beyond++
				continue
			}
			buf = r.appendRow(buf, sc.CurrentSample(), sc.Extras(), seg)
			buf = append(buf, eol...)
			res.Rows++
			if len(buf) >= flushAt {
				if _, err := w.Write(buf); err != nil {
					return res, fmt.Errorf("export: %w", err)
				}
				buf = buf[:0]
			}
		}
	}
	if _, err := w.Write(buf); err != nil {
		return res, fmt.Errorf("export: %w", err)
	}
	res.UnknownExtras = r.unknown
	if err := sc.Err(); err != nil {
		return res, err
	}
	if res.Rows < l.Samples {
		return res, fmt.Errorf("export: the input changed between the two passes: %d samples, then %d", l.Samples, res.Rows)
	}
	return res, nil
}

// rowMaker holds the per-row state of the second pass: the time axis, the meta in
// force, the segment and the extra channel slots.
type rowMaker struct {
	l   *Layout
	sep byte

	// time axis (the rule of the summary's clock)
	started  bool
	base     int64 // tick of the current origin
	t0, n0   int64 // board time or sequence number at that origin
	i0       int64
	prevT    int64
	prevN    int64
	lastTick int64
	dts      [31]int64 // the first positive intervals of t, µs
	ndt      int
	perUS    int64 // their median
	nsTick   float64
	hostDec  int

	// meta in force
	lsb       float64 // V per count, NaN when unknown
	vdec      int
	vscale    float64
	db        float64 // deadband in force (0 when none)
	dbCells   []byte  // the two deadband cells, formatted, without separators around
	extraIdx  map[string]int
	lastNames []string // names of the previous row's extras, and their slots
	lastSlots []int
	vals      []float64
	has       []bool
	unknown   int64
}

func newRowMaker(l *Layout, sep byte) *rowMaker {
	r := &rowMaker{l: l, sep: sep, hostDec: 6}
	if l.hostNS {
		r.hostDec = 9
	}
	r.nsTick = l.secondsPerTick() * 1e9
	r.extraIdx = make(map[string]int, len(l.Extras))
	for i, e := range l.Extras {
		r.extraIdx[e] = i
	}
	r.vals = make([]float64, len(l.Extras))
	r.has = make([]bool, len(l.Extras))
	r.setMeta(telemetry.Meta{})
	return r
}

// setMeta takes the merged meta after a meta line.
func (r *rowMaker) setMeta(m telemetry.Meta) {
	r.lsb = m.LSB()
	if !math.IsNaN(r.lsb) {
		r.vdec = voltsDecimals(r.lsb)
		r.vscale = math.Pow(10, float64(r.vdec))
	}
	// The band in force, as the summary's accumulator takes it: a two-state loop has
	// none whatever the meta says.
	r.db = 0
	known := false
	switch {
	case m.Mode == telemetry.TwoState:
		known = true
	case m.Has(telemetry.FieldDeadband):
		r.db, known = m.Deadband, true
	}
	r.dbCells = r.dbCells[:0]
	if known {
		r.dbCells = appendCounts(r.dbCells, r.db)
	}
	r.dbCells = append(r.dbCells, r.sep)
	if known && !math.IsNaN(r.lsb) {
		r.dbCells = appendScaled(r.dbCells, r.db*r.lsb, r.vdec, r.vscale)
	}
}

// tick returns the sample's place on the time axis: µs for board time, samples else.
// It follows the summary's clock: the first sample decides the source; a board time
// that goes back (or jumps ahead by more than 10^4 periods) is a reset and starts a new
// origin one period after the previous sample.
func (r *rowMaker) tick(s *telemetry.Sample) int64 {
	if !r.started {
		r.started = true
		r.t0, r.prevT, r.n0, r.prevN, r.i0 = s.T, s.T, s.N, s.N, s.Index
		r.lastTick = 0
		return 0
	}
	var tk int64
	switch r.l.clock {
	case clockT:
		if s.Flags&telemetry.HasT == 0 {
			tk = r.lastTick + max(r.perUS, 1)
			break
		}
		dt := s.T - r.prevT
		r.prevT = s.T
		if r.ndt < len(r.dts) && dt > 0 {
			r.dts[r.ndt] = dt
			r.ndt++
			w := r.dts // a copy: the intervals stay in arrival order
			m := w[:r.ndt]
			slices.Sort(m)
			r.perUS = m[len(m)/2]
		}
		p := r.perUS
		if dt <= 0 || (p > 0 && dt > 10000*p) {
			r.base = r.lastTick + p
			r.t0 = s.T
		}
		tk = r.base + s.T - r.t0
	case clockN:
		if s.Flags&telemetry.HasN == 0 {
			tk = r.lastTick + 1
			break
		}
		dn := s.N - r.prevN
		r.prevN = s.N
		if dn <= 0 || dn > 1<<20 {
			r.base = r.lastTick + 1
			r.n0 = s.N
		}
		tk = r.base + s.N - r.n0
	default:
		tk = s.Index - r.i0
	}
	r.lastTick = tk
	return tk
}

// appendRow appends the cells of one sample (without the line end).
func (r *rowMaker) appendRow(b []byte, s *telemetry.Sample, ex []telemetry.Extra, seg int64) []byte {
	sep := r.sep
	tk := r.tick(s)
	switch {
	case r.l.clock == clockT:
		b = appendFixed(b, tk, 6)
	case r.nsTick > 0:
		b = appendFixed(b, int64(math.Round(float64(tk)*r.nsTick)), 9)
	}
	if r.l.HasHost {
		b = append(b, sep)
		if s.Flags&telemetry.HasHost != 0 {
			if r.hostDec == 6 {
				b = appendFixed(b, s.Host/1000, 6)
			} else {
				b = appendFixed(b, s.Host, 9)
			}
		}
	}
	if r.l.HasN {
		b = append(b, sep)
		if s.Flags&telemetry.HasN != 0 {
			b = appendInt(b, s.N)
		}
	}
	volts := !math.IsNaN(r.lsb)
	b = append(b, sep)
	b = appendCounts(b, s.SP)
	b = append(b, sep)
	if volts {
		b = appendScaled(b, s.SP*r.lsb, r.vdec, r.vscale)
	}
	b = append(b, sep)
	b = appendCounts(b, s.PV)
	b = append(b, sep)
	if volts {
		b = appendScaled(b, s.PV*r.lsb, r.vdec, r.vscale)
	}
	b = append(b, sep)
	if s.Flags&telemetry.HasU != 0 {
		switch s.U {
		case telemetry.Charge:
			b = append(b, '1')
		case telemetry.Discharge:
			b = append(b, '-', '1')
		default:
			b = append(b, '0')
		}
	}
	b = append(b, sep)
	b = appendInt(b, seg)
	b = append(b, sep)
	b = append(b, r.dbCells...)
	if len(r.vals) > 0 {
		b = r.appendExtras(b, ex)
	}
	return b
}

// appendExtras appends one cell per extra channel of the layout, empty where this
// sample did not carry the channel.
func (r *rowMaker) appendExtras(b []byte, ex []telemetry.Extra) []byte {
	clear(r.has)
	same := len(ex) == len(r.lastNames)
	for i := 0; same && i < len(ex); i++ {
		same = ex[i].Name == r.lastNames[i]
	}
	if !same {
		r.lastNames, r.lastSlots = r.lastNames[:0], r.lastSlots[:0]
		for _, e := range ex {
			k, ok := r.extraIdx[e.Name]
			if !ok {
				k = -1
			}
			r.lastNames = append(r.lastNames, e.Name)
			r.lastSlots = append(r.lastSlots, k)
		}
	}
	for i, e := range ex {
		if k := r.lastSlots[i]; k >= 0 {
			r.vals[k], r.has[k] = e.Value, true
		} else {
			r.unknown++
		}
	}
	for k := range r.vals {
		b = append(b, r.sep)
		if r.has[k] {
			b = appendCounts(b, r.vals[k])
		}
	}
	return b
}

// appendInt appends a decimal integer, small ones without a call into strconv.
func appendInt(b []byte, v int64) []byte {
	if v >= 0 && v < 10 {
		return append(b, byte('0'+v))
	}
	if v < 0 {
		return strconv.AppendInt(b, v, 10)
	}
	var d [20]byte
	i := len(d)
	u := uint64(v)
	for u >= 100 {
		q := u % 100 * 2
		u /= 100
		i -= 2
		d[i], d[i+1] = digitPairs[q], digitPairs[q+1]
	}
	if u >= 10 {
		i -= 2
		d[i], d[i+1] = digitPairs[u*2], digitPairs[u*2+1]
	} else {
		i--
		d[i] = byte('0' + u)
	}
	return append(b, d[i:]...)
}
