//go:build unix

package wire

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/caploop/caploop/telemetry"
)

// lineWatcher collects a Link's batches in the background.
type lineWatcher struct {
	mu    sync.Mutex
	lines []Line
	done  chan struct{}
}

func watch(l *Link) *lineWatcher {
	w := &lineWatcher{done: make(chan struct{})}
	go func() {
		defer close(w.done)
		for b := range l.Batches() {
			w.mu.Lock()
			w.lines = append(w.lines, b...)
			w.mu.Unlock()
		}
	}()
	return w
}

// waitFor waits until cond holds for the lines seen so far.
func (w *lineWatcher) waitFor(t *testing.T, what string, cond func([]Line) bool) {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for time.Now().Before(deadline) {
		w.mu.Lock()
		ok := cond(w.lines)
		w.mu.Unlock()
		if ok {
			return
		}
		time.Sleep(5 * time.Millisecond)
	}
	t.Fatalf("timeout waiting for %s; seen %s", what, w.summary())
}

func (w *lineWatcher) summary() string {
	w.mu.Lock()
	defer w.mu.Unlock()
	var ev []string
	nb := 0
	for _, ln := range w.lines {
		if ln.Dir == telemetry.HostEvent {
			ev = append(ev, string(ln.Raw))
		} else if ln.Dir == telemetry.FromBoard {
			nb++
		}
	}
	return fmt.Sprintf("%d board lines, events %q", nb, ev)
}

func countEvents(lines []Line, kind string) int {
	n := 0
	for _, ln := range lines {
		if ln.EventKind() == kind {
			n++
		}
	}
	return n
}

func boardLines(lines []Line) []string {
	var out []string
	for _, ln := range lines {
		if ln.Dir == telemetry.FromBoard {
			out = append(out, string(ln.Raw))
		}
	}
	return out
}

// TestLinkUnplugReplug runs a Link on a stable symlink to a pseudo-terminal, unplugs the
// board (closes the master), plugs in a new one (a new pty, the symlink re-pointed) and
// checks the events, that every line arrives once and in order, that the partial first
// line after each open is dropped and counted, and that commands reach the board.
func TestLinkUnplugReplug(t *testing.T) {
	dir := t.TempDir()
	link := filepath.Join(dir, "board")
	a, err := OpenPTY()
	if err != nil {
		t.Fatalf("OpenPTY: %v", err)
	}
	defer a.Close()
	if err := a.Symlink(link); err != nil {
		t.Fatal(err)
	}
	var rec bytes.Buffer
	l := Dial(SerialConfig{Path: link}, LinkOptions{Poll: 20 * time.Millisecond, Record: &rec})
	w := watch(l)
	w.waitFor(t, "connected", func(ls []Line) bool { return countEvents(ls, EventConnected) == 1 })

	var want []string
	write := func(p *PTY, from, to int) {
		t.Helper()
		var b strings.Builder
		b.WriteString("pv=4") // tail of a line cut by the open: dropped
		b.WriteString("98 u=1\r\n")
		for k := from; k < to; k++ {
			b.WriteString(dataLine(k) + "\r\n")
			want = append(want, dataLine(k))
		}
		if _, err := io.WriteString(p.Master(), b.String()); err != nil {
			t.Fatalf("write master: %v", err)
		}
	}
	write(a, 0, 200)
	w.waitFor(t, "first 200 lines", func(ls []Line) bool { return len(boardLines(ls)) == 200 })

	// Commands go to the board.
	if err := l.Send("set deadband=14"); err != nil {
		t.Fatalf("Send: %v", err)
	}
	if got := readLines(t, bufio.NewScanner(a.Master()), 1); got[0] != "set deadband=14" {
		t.Errorf("board read %q, want %q", got[0], "set deadband=14")
	}
	if err := l.Send("two\nlines"); err == nil {
		t.Error("Send with a newline: got no error")
	}

	// Unplug.
	a.Close()
	w.waitFor(t, "unplugged", func(ls []Line) bool { return countEvents(ls, EventUnplugged) == 1 })
	if st := l.Stats(); st.Connected {
		t.Errorf("Stats().Connected = true after unplug")
	}
	if err := l.Send("set deadband=3"); err == nil {
		t.Error("Send while unplugged: got no error")
	}
	time.Sleep(100 * time.Millisecond) // a few polls find nothing

	// Re-plug: a new pty (new path), the same symlink.
	b, err := OpenPTY()
	if err != nil {
		t.Fatalf("OpenPTY: %v", err)
	}
	defer b.Close()
	if b.Path() == a.Path() {
		t.Logf("the kernel reused %s", b.Path())
	}
	if err := b.Symlink(link); err != nil {
		t.Fatal(err)
	}
	w.waitFor(t, "reconnected", func(ls []Line) bool { return countEvents(ls, EventReconnected) == 1 })
	write(b, 200, 500)
	w.waitFor(t, "all 500 lines", func(ls []Line) bool { return len(boardLines(ls)) == 500 })

	if err := l.Close(); err != nil {
		t.Fatalf("Close: %v", err)
	}
	<-w.done // Batches is closed by Close
	got := boardLines(w.lines)
	if len(got) != len(want) {
		t.Fatalf("got %d lines, want %d", len(got), len(want))
	}
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("line %d: got %q, want %q", i, got[i], want[i])
		}
	}
	st := l.Stats()
	checks := []struct {
		name      string
		got, want int64
	}{
		{"Lines", st.Lines, 500},
		{"Partial", st.Partial, 2},
		{"Opens", st.Opens, 2},
		{"Unplugs", st.Unplugs, 1},
		{"Sent", st.Sent, 1},
		{"Dropped", st.Dropped, 0},
		{"Cut", st.Cut, 0},
		{"partial events", int64(countEvents(w.lines, EventPartial)), 2},
	}
	for _, c := range checks {
		if c.got != c.want {
			t.Errorf("%s = %d, want %d", c.name, c.got, c.want)
		}
	}

	// The recording holds the same lines, the command and the events, in the capture format.
	recs := parseCaptureForTest(t, rec.String())
	var recBoard []string
	var recEvents []string
	for _, r := range recs {
		switch r.dir {
		case telemetry.FromBoard:
			recBoard = append(recBoard, r.raw)
		case telemetry.HostEvent:
			// A "waiting" event may come from a pty number reused by the kernel and opened
			// before it is unlocked (EIO); it is informational, so the order check skips it.
			if k := strings.Fields(r.raw)[0]; k != EventWaiting {
				recEvents = append(recEvents, k)
			}
		case telemetry.ToBoard:
			if r.raw != "set deadband=14" {
				t.Errorf("recorded command %q", r.raw)
			}
		}
	}
	if strings.Join(recBoard, "\n") != strings.Join(want, "\n") {
		t.Errorf("recorded %d board lines, want the %d sent", len(recBoard), len(want))
	}
	wantEvents := "connected partial unplugged reconnected partial"
	if got := strings.Join(recEvents, " "); got != wantEvents {
		t.Errorf("recorded events %q, want %q", got, wantEvents)
	}
}

// captureRecord is one record line of a capture, split by the test's own reading of the
// documented format (the Scanner is tested elsewhere).
type captureRecord struct {
	at  time.Duration
	dir telemetry.Direction
	raw string
}

// parseCaptureForTest checks the capture layout: the header line, then records
// "<seconds with 6 decimals> <dir> <raw>", each ending in a newline, times not decreasing.
func parseCaptureForTest(t *testing.T, s string) []captureRecord {
	t.Helper()
	if !strings.HasPrefix(s, telemetry.CaptureMagic+" v1 start=") {
		t.Fatalf("capture header: got %q", strings.SplitN(s, "\n", 2)[0])
	}
	if !strings.HasSuffix(s, "\n") {
		t.Fatalf("capture does not end with a complete record: ...%q", s[max(0, len(s)-40):])
	}
	lines := strings.Split(strings.TrimSuffix(s, "\n"), "\n")[1:]
	out := make([]captureRecord, 0, len(lines))
	var last time.Duration
	for i, ln := range lines {
		var sec, usec int64
		var dir byte
		if len(ln) < 11 || ln[len(ln)-len(strings.TrimLeft(ln, "0123456789")):][0] != '.' {
			t.Fatalf("capture line %d: bad record %q", i+2, ln)
		}
		head, raw, ok := cut3(ln)
		if !ok {
			t.Fatalf("capture line %d: bad record %q", i+2, ln)
		}
		if _, err := fmt.Sscanf(head, "%d.%06d %c", &sec, &usec, &dir); err != nil {
			t.Fatalf("capture line %d: %v in %q", i+2, err, ln)
		}
		at := time.Duration(sec)*time.Second + time.Duration(usec)*time.Microsecond
		if at < last {
			t.Errorf("capture line %d: time goes back (%v after %v)", i+2, at, last)
		}
		last = at
		switch telemetry.Direction(dir) {
		case telemetry.FromBoard, telemetry.ToBoard, telemetry.HostEvent:
		default:
			t.Fatalf("capture line %d: direction %q", i+2, dir)
		}
		out = append(out, captureRecord{at, telemetry.Direction(dir), raw})
	}
	return out
}

// cut3 splits "<time> <dir> <raw>" into "<time> <dir>" and raw.
func cut3(ln string) (head, raw string, ok bool) {
	i := strings.IndexByte(ln, ' ')
	if i < 0 || len(ln) < i+3 || ln[i+2] != ' ' {
		return "", "", false
	}
	return ln[:i+2], ln[i+3:], true
}

// TestLinkNeverBlocksOnConsumer feeds many lines to a Link whose consumer does not read:
// the reader goroutine must keep going (the recording gets every line) and the display
// queue must stay bounded, with the dropped lines counted.
func TestLinkNeverBlocksOnConsumer(t *testing.T) {
	p, err := OpenPTY()
	if err != nil {
		t.Fatalf("OpenPTY: %v", err)
	}
	defer p.Close()
	var rec bytes.Buffer
	l := Dial(SerialConfig{Path: p.Path()}, LinkOptions{Record: &rec, Queue: 100})
	deadline := time.Now().Add(10 * time.Second)
	for l.Stats().Opens == 0 {
		if time.Now().After(deadline) {
			t.Fatal("timeout waiting for the link to open")
		}
		time.Sleep(5 * time.Millisecond)
	}
	const n = 5000
	var b strings.Builder
	b.WriteString("\n") // end of the (empty) partial first line
	for k := 0; k < n; k++ {
		b.WriteString(dataLine(k) + "\n")
	}
	// The write completes only if the Link keeps reading although nobody takes batches.
	werr := make(chan error, 1)
	go func() { _, err := io.WriteString(p.Master(), b.String()); werr <- err }()
	select {
	case err := <-werr:
		if err != nil {
			t.Fatal(err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("the Link stopped reading while its consumer was idle")
	}
	for l.Stats().Lines < n {
		if time.Now().After(deadline) {
			t.Fatalf("timeout: %d of %d lines read", l.Stats().Lines, n)
		}
		time.Sleep(5 * time.Millisecond)
	}
	st := l.Stats()
	if st.Dropped == 0 {
		t.Errorf("Stats().Dropped = 0, want > 0 with a queue of 100 and no consumer")
	}
	if err := l.Close(); err != nil {
		t.Fatal(err)
	}
	var got int
	for _, r := range parseCaptureForTest(t, rec.String()) {
		if r.dir == telemetry.FromBoard {
			if want := dataLine(got); r.raw != want {
				t.Fatalf("recorded line %d: got %q, want %q", got, r.raw, want)
			}
			got++
		}
	}
	if got != n {
		t.Errorf("recorded %d board lines, want %d", got, n)
	}
	if st.Partial != 0 {
		t.Errorf("Partial = %d, want 0 (the first line was empty)", st.Partial)
	}
}

// TestLinkCutsLongLines checks that a line longer than MaxLine is cut, counted, and does
// not swallow the next line.
func TestLinkCutsLongLines(t *testing.T) {
	p, err := OpenPTY()
	if err != nil {
		t.Fatalf("OpenPTY: %v", err)
	}
	defer p.Close()
	l := Dial(SerialConfig{Path: p.Path()}, LinkOptions{MaxLine: 64})
	w := watch(l)
	defer l.Close()
	w.waitFor(t, "connected", func(ls []Line) bool { return countEvents(ls, EventConnected) == 1 })
	long := strings.Repeat("x", 10000)
	go io.WriteString(p.Master(), "\n"+long+"\n"+dataLine(1)+"\n")
	w.waitFor(t, "two lines", func(ls []Line) bool { return len(boardLines(ls)) == 2 })
	w.mu.Lock()
	got := boardLines(w.lines)
	w.mu.Unlock()
	if got[0] != long[:64] {
		t.Errorf("cut line: got %d bytes, want 64", len(got[0]))
	}
	if got[1] != dataLine(1) {
		t.Errorf("next line: got %q, want %q", got[1], dataLine(1))
	}
	if c := l.Stats().Cut; c != 1 {
		t.Errorf("Cut = %d, want 1", c)
	}
}

// TestLinkFailFirst checks that FailFirst stops the Link with the open error.
func TestLinkFailFirst(t *testing.T) {
	l := Dial(SerialConfig{Path: filepath.Join(t.TempDir(), "ttyNONE")}, LinkOptions{FailFirst: true})
	select {
	case _, ok := <-l.Batches():
		for ok {
			_, ok = <-l.Batches()
		}
	case <-time.After(5 * time.Second):
		t.Fatal("Batches not closed after a failed first open")
	}
	if err := l.Err(); err == nil || !strings.Contains(err.Error(), "not found") {
		t.Errorf("Err() = %v, want a not-found error", err)
	}
	if err := l.Close(); err != nil {
		t.Errorf("Close: %v", err)
	}
}

// TestLinkWaitsForPort starts a Link before the port exists: it reports waiting, then
// connects when the port appears.
func TestLinkWaitsForPort(t *testing.T) {
	link := filepath.Join(t.TempDir(), "board")
	l := Dial(SerialConfig{Path: link}, LinkOptions{Poll: 20 * time.Millisecond})
	defer l.Close()
	w := watch(l)
	w.waitFor(t, "waiting", func(ls []Line) bool { return countEvents(ls, EventWaiting) == 1 })
	p, err := OpenPTY()
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	if err := p.Symlink(link); err != nil {
		t.Fatal(err)
	}
	w.waitFor(t, "connected", func(ls []Line) bool { return countEvents(ls, EventConnected) == 1 })
	w.mu.Lock()
	n := countEvents(w.lines, EventWaiting)
	w.mu.Unlock()
	if n != 1 {
		t.Errorf("waiting events = %d, want 1 (repeats of the same reason are not reported)", n)
	}
}

// TestLinkRecordPath records to a file the Link creates, syncs and closes; the Scanner
// reads it back as a capture.
func TestLinkRecordPath(t *testing.T) {
	p, err := OpenPTY()
	if err != nil {
		t.Fatalf("OpenPTY: %v", err)
	}
	defer p.Close()
	path := filepath.Join(t.TempDir(), "run.cap")
	l := Dial(SerialConfig{Path: p.Path(), Baud: 9600}, LinkOptions{RecordPath: path, RecordAttrs: []string{"note=greenhouse-bias"}})
	t.Cleanup(func() { l.Close() }) // a Link left open would take over a reused pty number
	w := watch(l)
	w.waitFor(t, "connected", func(ls []Line) bool { return countEvents(ls, EventConnected) == 1 })
	go io.WriteString(p.Master(), "# vref=5 adc_bits=10 period_us=1000\n"+dataLine(1)+"\n"+dataLine(2)+"\n")
	w.waitFor(t, "three lines", func(ls []Line) bool { return len(boardLines(ls)) == 3 })
	if err := l.Close(); err != nil {
		t.Fatalf("Close: %v", err)
	}
	src, err := telemetry.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	sc := telemetry.NewScanner(src)
	var samples, events int
	for sc.Scan() {
		switch sc.Kind() {
		case telemetry.RecSample:
			samples++
			if !sc.Sample().Has(telemetry.HasHost) {
				t.Error("replayed sample without host time")
			}
		case telemetry.RecEvent:
			events++
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	// The meta line came first after the open, whole: kept (wholeRecord), and its values
	// apply to the replay.
	if samples != 2 || events != 1 {
		t.Errorf("replay: %d samples, %d events; want 2 and 1 (connected)", samples, events)
	}
	if m := sc.Meta(); !m.Has(telemetry.FieldVref) || m.Vref != 5 || m.Period != 1e-3 {
		t.Errorf("replay meta = %+v, want vref 5 V and period 1 ms from the first line", m)
	}
	head, _ := os.ReadFile(path)
	first := strings.SplitN(string(head), "\n", 2)[0]
	for _, want := range []string{"source=" + p.Path(), "baud=9600", "framing=8N1", "note=greenhouse-bias"} {
		if !strings.Contains(first, want) {
			t.Errorf("header %q lacks %q", first, want)
		}
	}
}

// BenchmarkLinkPTY measures lines per second through a real pseudo-terminal and a Link
// (read, split, time-stamp, record to memory, deliver in batches).
func BenchmarkLinkPTY(b *testing.B) {
	p, err := OpenPTY()
	if err != nil {
		b.Fatal(err)
	}
	defer p.Close()
	var rec bytes.Buffer
	l := Dial(SerialConfig{Path: p.Path()}, LinkOptions{Record: &rec})
	defer l.Close()
	for l.Stats().Opens == 0 {
		time.Sleep(time.Millisecond)
	}
	var chunk strings.Builder
	for k := 0; k < 1000; k++ {
		chunk.WriteString(dataLine(k) + "\n")
	}
	b.SetBytes(int64(chunk.Len() / 1000))
	b.ResetTimer()
	go func() {
		io.WriteString(p.Master(), "\n")
		for sent := 0; sent < b.N; sent += 1000 {
			if _, err := io.WriteString(p.Master(), chunk.String()); err != nil {
				return
			}
		}
	}()
	got := 0
	for got < b.N {
		for _, ln := range <-l.Batches() {
			if ln.Dir == telemetry.FromBoard {
				got++
			}
		}
	}
	b.StopTimer()
	b.ReportMetric(float64(got)/b.Elapsed().Seconds(), "lines/s")
}

// TestWholeRecord: the first line after an open is kept only when it reads as a whole
// data or meta line on its own; a line cut by the open is dropped.
func TestWholeRecord(t *testing.T) {
	tests := []struct {
		line string
		want bool
	}{
		{"t=1000 n=1 sp=512 pv=498 u=1", true},
		{"# vref=5 adc_bits=10 period_us=1000", true},
		{" sp=512 pv=498 u=1", true}, // cut at a separator: whole fields, real readings
		{"12 pv=498 u=1", false},     // cut inside sp's value
		{"p=512 pv=498 u=1", false},  // cut inside sp's key
		{"=1000 sp=512 pv=498", false},
		{"000 n=1 sp=512 pv=498", false},
		{"ref=5 adc_bits=10", false}, // the rest of a meta line
		{"12,498,1", false},          // a numeric row: its header may not have been seen
		{"# virtual board boot", false},
		{"", false},
		{"pv=4", false},
	}
	for _, tc := range tests {
		if got := wholeRecord([]byte(tc.line)); got != tc.want {
			t.Errorf("wholeRecord(%q) = %v, want %v", tc.line, got, tc.want)
		}
	}
}
