//go:build unix

package wire_test

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"go.bug.st/serial"

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry/wire"
)

// serveBoard starts sc on a pseudo-terminal behind a link in a temporary directory and
// returns the link path; the board stops when the test ends.
func serveBoard(t *testing.T, sc virtual.Scenario, speed float64) (string, *virtual.Board) {
	return serveBoardOpt(t, sc, speed, false)
}

func serveBoardOpt(t *testing.T, sc virtual.Scenario, speed float64, waitOpen bool) (string, *virtual.Board) {
	t.Helper()
	b, err := virtual.NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	b.Speed = speed
	ctx, cancel := context.WithCancel(context.Background())
	ready := make(chan string, 1)
	done := make(chan error, 1)
	link := filepath.Join(t.TempDir(), "board")
	go func() {
		done <- wire.Serve(ctx, b, wire.ServeOptions{Link: link, Ready: func(p string) { ready <- p }, WaitOpen: waitOpen})
	}()
	t.Cleanup(func() {
		cancel()
		select {
		case err := <-done:
			if err != nil {
				t.Errorf("Serve: %v", err)
			}
		case <-time.After(5 * time.Second):
			t.Error("Serve did not return after cancel")
		}
		if _, err := os.Lstat(link); !errors.Is(err, os.ErrNotExist) {
			t.Errorf("link %s left behind after Serve returned", link)
		}
	})
	select {
	case p := <-ready:
		if p != link {
			t.Fatalf("Ready path = %q, want %q", p, link)
		}
	case err := <-done:
		t.Fatalf("Serve returned early: %v", err)
	case <-time.After(5 * time.Second):
		t.Fatal("Serve never became ready")
	}
	return link, b
}

// portLines opens path with go.bug.st/serial, as caploop live does, and delivers its lines.
// The channel closes when the port reports an error (an unplug) or the test ends.
func portLines(t *testing.T, path string) (serial.Port, <-chan string) {
	t.Helper()
	p, err := serial.Open(path, &serial.Mode{BaudRate: 115200})
	if err != nil {
		t.Fatalf("serial.Open(%s): %v", path, err)
	}
	t.Cleanup(func() { p.Close() })
	ch := make(chan string, 4096)
	go func() {
		defer close(ch)
		s := bufio.NewScanner(p)
		for s.Scan() {
			ch <- s.Text()
		}
	}()
	return p, ch
}

func nextLine(t *testing.T, ch <-chan string) string {
	t.Helper()
	select {
	case l, ok := <-ch:
		if !ok {
			t.Fatal("port closed")
		}
		return l
	case <-time.After(5 * time.Second):
		t.Fatal("no line from the port in 5 s")
	}
	return ""
}

// TestServeSetDeadband is the acceptance check of the virtual board: a serial program reads
// data lines from the device path, writes `set deadband=9`, gets the meta answer and sees
// the loop hold with errors of up to 9 counts, which the old deadband of 4 forbids.
func TestServeSetDeadband(t *testing.T) {
	sc := virtual.DefaultScenario()
	path, _ := serveBoard(t, sc, 4)
	port, lines := portLines(t, path)

	checkRule := func(l string, db int) (hold bool, e int) {
		t.Helper()
		d, ok := boardLine(l)
		if !ok {
			t.Fatalf("not a data line: %q", l)
		}
		e = d.pv - d.sp
		want := 0
		switch {
		case e > db:
			want = -1
		case e < -db:
			want = 1
		}
		if d.u != want {
			t.Fatalf("deadband %d: line %q: u = %d, want %d", db, l, d.u, want)
		}
		return d.u == 0, e
	}

	// Before: deadband 4.
	data := 0
	for data < 300 {
		l := nextLine(t, lines)
		if strings.HasPrefix(l, "t=") {
			checkRule(l, 4)
			data++
		}
	}
	if _, err := port.Write([]byte("set deadband=9\n")); err != nil {
		t.Fatal(err)
	}
	// The answer, then only deadband-9 behaviour.
	for {
		l := nextLine(t, lines)
		if l == "# deadband=9" {
			break
		}
		if strings.HasPrefix(l, "#") {
			t.Fatalf("unexpected answer %q", l)
		}
		checkRule(l, 4)
	}
	wide := 0
	for n := 0; n < 2000; n++ {
		l := nextLine(t, lines)
		if hold, e := checkRule(l, 9); hold && (e > 4 || e < -4) {
			wide++
		}
	}
	if wide == 0 {
		t.Errorf("no hold with |pv - sp| in 5..9 in 2000 lines after set deadband=9")
	}
}

// TestServeUnplugReplug: an unplug closes the port under the reader and removes the path;
// the re-plug brings the same path back, and the board boots again.
func TestServeUnplugReplug(t *testing.T) {
	sc := virtual.DefaultScenario()
	sc.Faults.UnplugAfter = 0.3
	sc.Faults.ReplugAfter = 0.4
	sc.Faults.BootTime = 0.3 // time to reopen the port before the banner
	path, _ := serveBoardOpt(t, sc, 1, true)
	_, lines := portLines(t, path)
	got := 0
	for l := range lines { // ends when the port reports the unplug
		if strings.HasPrefix(l, "t=") {
			got++
		}
	}
	// 300 lines in 0.3 s from boot, plus the cut one; the unplug drops those still on
	// their way, as a real one does: a few, or a few tens when the machine is loaded and
	// the reader lags.
	if got < 200 || got > 301 {
		t.Errorf("read %d data lines before the unplug, want 200 to 301", got)
	}
	if _, err := os.Lstat(path); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("path still there while unplugged: %v", err)
	}
	deadline := time.Now().Add(5 * time.Second)
	for {
		if _, err := os.Stat(path); err == nil {
			break
		}
		if time.Now().After(deadline) {
			t.Fatal("path did not come back after the re-plug")
		}
		time.Sleep(10 * time.Millisecond)
	}
	_, lines = portLines(t, path)
	want := []string{virtual.Banner, "# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=4"}
	for i, w := range want {
		if l := nextLine(t, lines); l != w {
			t.Fatalf("line %d after re-plug = %q, want %q", i+1, l, w)
		}
	}
	nextLine(t, lines) // parts meta line
	d, ok := boardLine(nextLine(t, lines))
	if !ok || d.t != 0 || d.n != 0 {
		t.Errorf("first data line after re-plug = %+v, want t=0 n=0", d)
	}
}

// TestStreamSend drives the in-process stream the demo screen uses.
func TestStreamSend(t *testing.T) {
	sc := virtual.DefaultScenario()
	b, err := virtual.NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	b.Speed = 20
	r := b.Stream(context.Background())
	defer r.Close()
	s := bufio.NewScanner(r)
	data := 0
	sent := false
	for s.Scan() {
		l := s.Text()
		if strings.HasPrefix(l, "t=") {
			data++
		}
		if data == 100 && !sent {
			b.Send("set mode=two-state")
			sent = true
		}
		if l == "# mode=two-state" {
			break
		}
		if data > 5000 {
			t.Fatal("no answer to set mode=two-state in 4900 lines")
		}
	}
	// Two-state never holds.
	for i := 0; i < 200 && s.Scan(); i++ {
		if d, ok := boardLine(s.Text()); !ok || d.u == 0 {
			t.Fatalf("line %q after mode=two-state: want a data line with u=+-1", s.Text())
		}
	}
	if err := r.Close(); err != nil {
		t.Fatal(err)
	}
}

// TestServePTY serves a caller's telemetry.PTY: set commands work through it, and a
// scenario unplug closes it and ends ServePTY.
func TestServePTY(t *testing.T) {
	p, err := wire.OpenPTY()
	if err != nil {
		t.Fatal(err)
	}
	sc := virtual.DefaultScenario()
	sc.Faults.UnplugAfter = 1.5
	b, err := virtual.NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	b.Speed = 2
	done := make(chan error, 1)
	go func() { done <- wire.ServePTY(context.Background(), b, p) }()
	_, lines := portLines(t, p.Path())
	for data := 0; data < 50; {
		if strings.HasPrefix(nextLine(t, lines), "t=") {
			data++
		}
	}
	b.Send("set deadband=9") // in-process, besides the port
	for i := 0; nextLine(t, lines) != "# deadband=9"; i++ {
		if i > 5000 {
			t.Fatal("no answer")
		}
	}
	for range lines { // the unplug ends the port's lines
	}
	select {
	case err := <-done:
		if err != nil {
			t.Errorf("ServePTY: %v, want nil after the unplug", err)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("ServePTY did not return after the unplug")
	}
}

// TestServeBytesExact: through the pseudo-terminal a reader gets exactly the bytes the
// board writes, garbage included (raw mode: no signal characters, no CR/LF translation,
// no erase), from the boot (WaitOpen) to the end of a limited run.
func TestServeBytesExact(t *testing.T) {
	sc := virtual.DefaultScenario()
	sc.Samples = 600
	sc.Faults.GarbageEvery = 0.05
	ref, err := virtual.NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	var wantBuf bytes.Buffer
	if err := ref.Run(context.Background(), &wantBuf, false); err != nil {
		t.Fatal(err)
	}
	want := wantBuf.String()

	b, err := virtual.NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	b.Speed = 3
	link := filepath.Join(t.TempDir(), "board")
	ready := make(chan string, 1)
	done := make(chan error, 1)
	go func() {
		done <- wire.Serve(context.Background(), b, wire.ServeOptions{Link: link, Ready: func(p string) { ready <- p }, WaitOpen: true})
	}()
	p, err := serial.Open(<-ready, &serial.Mode{BaudRate: 115200})
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	var got []byte
	buf := make([]byte, 4096)
	for {
		n, err := p.Read(buf)
		got = append(got, buf[:n]...)
		if err != nil || n == 0 {
			break // the end of the run hangs the terminal up
		}
	}
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	if string(got) != want {
		t.Errorf("read %d bytes; want the %d bytes of a fast run of the same scenario", len(got), len(want))
	}
}

// dataLine is one data line of the virtual board.
type dataLine struct{ t, n, sp, pv, u int }

// boardLine reads a data line in the exact form the virtual board writes it.
func boardLine(l string) (dataLine, bool) {
	var d dataLine
	n, err := fmt.Sscanf(l, "t=%d n=%d sp=%d pv=%d u=%d", &d.t, &d.n, &d.sp, &d.pv, &d.u)
	return d, err == nil && n == 5 && strings.Count(l, " ") == 4
}
