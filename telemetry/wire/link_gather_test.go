//go:build unix

package wire

import (
	"fmt"
	"slices"
	"testing"
	"time"

	"github.com/caploop/caploop/telemetry"
)

// TestLinkGathers: a board that writes one line per millisecond is read in few, larger
// reads (the lines of a read share its host time), every line arrives once and in
// order, and a board fast enough to fill the reader's buffer is read without pauses.
func TestLinkGathers(t *testing.T) {
	p, err := OpenPTY()
	if err != nil {
		t.Skipf("no pseudo-terminal: %v", err)
	}
	defer p.Close()
	l := Dial(SerialConfig{Path: p.Path()}, LinkOptions{})
	defer l.Close()
	w := watch(l)
	w.waitFor(t, "connected", func(ls []Line) bool { return countEvents(ls, EventConnected) > 0 })

	const slow, fast = 300, 20000
	p.Master().WriteString("\n") // the first line after an open may be dropped as partial
	start := time.Now()
	for i := 0; i < slow; i++ {
		fmt.Fprintf(p.Master(), "t=%d sp=500 pv=%d\n", i*1000, 500+i%3)
		time.Sleep(time.Millisecond)
	}
	slowFor := time.Since(start)
	line := func(i int) string { return fmt.Sprintf("t=%d sp=600 pv=%d", (slow+i)*1000, 600+i%3) }
	start = time.Now()
	go func() {
		for i := 0; i < fast; i++ {
			fmt.Fprintf(p.Master(), "%s\n", line(i))
		}
	}()
	board := func(ls []Line) []Line {
		var out []Line
		for _, ln := range ls {
			if ln.Dir == telemetry.FromBoard {
				out = append(out, ln)
			}
		}
		return out
	}
	w.waitFor(t, "every line", func(ls []Line) bool { return len(board(ls)) >= slow+fast })
	fastFor := time.Since(start)

	w.mu.Lock()
	got := board(w.lines)
	w.mu.Unlock()
	if len(got) != slow+fast {
		t.Fatalf("%d board lines, want %d", len(got), slow+fast)
	}
	reads := 1
	for i, ln := range got {
		var want string
		if i < slow {
			want = fmt.Sprintf("t=%d sp=500 pv=%d", i*1000, 500+i%3)
		} else {
			want = line(i - slow)
		}
		if string(ln.Raw) != want {
			t.Fatalf("line %d = %q, want %q", i, ln.Raw, want)
		}
		if i > 0 && i < slow && !ln.Host.Equal(got[i-1].Host) {
			reads++
		}
	}
	// One read per Gather (10 ms) at most, with room for a loaded machine: far fewer
	// than the 300 reads of a line each.
	if limit := int(slowFor/defaultGather) + 5; reads > limit {
		t.Errorf("the slow lines came in %d reads over %s, want at most %d", reads, slowFor.Round(time.Millisecond), limit)
	}
	t.Logf("slow: %d lines in %d reads over %s; fast: %d lines in %s", slow, reads, slowFor.Round(time.Millisecond),
		fast, fastFor.Round(time.Millisecond))
	// The fast lines (about 600 KB) fill the reader's buffer: no pause between its reads,
	// so the reads are closer together than a Gather (the median gap, as the machine may
	// hold the reader up now and then).
	var gaps []time.Duration
	for i := slow + 1; i < len(got); i++ {
		if d := got[i].Host.Sub(got[i-1].Host); d > 0 {
			gaps = append(gaps, d)
		}
	}
	if len(gaps) >= 5 {
		slices.Sort(gaps)
		if med := gaps[len(gaps)/2]; med >= defaultGather/2 {
			t.Errorf("fast lines: median time between reads %s, want under %s (no pause after a full read)", med, defaultGather/2)
		}
	}
}
