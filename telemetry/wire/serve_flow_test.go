//go:build unix

package wire_test

import (
	"bufio"
	"context"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"go.bug.st/serial"

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry/wire"
)

// stalledReader serves the default scenario at 50 times real time (50 k lines/s), opens
// the device, reads nothing for stall, then reads for another second, and returns the
// number of data lines read and the sample numbers missing between them (gaps).
func stalledReader(t *testing.T, drop bool, stall time.Duration) (lines, gaps int) {
	t.Helper()
	b, err := virtual.NewBoard(virtual.DefaultScenario())
	if err != nil {
		t.Fatal(err)
	}
	b.Speed = 50
	ctx, cancel := context.WithCancel(context.Background())
	ready := make(chan string, 1)
	done := make(chan error, 1)
	go func() {
		done <- wire.Serve(ctx, b, wire.ServeOptions{Link: filepath.Join(t.TempDir(), "board"),
			Ready: func(p string) { ready <- p }, DropWhenFull: drop})
	}()
	defer func() {
		cancel()
		select {
		case <-done:
		case <-time.After(2 * time.Second):
			t.Error("Serve did not return within 2 s of the cancel")
		}
	}()
	path := <-ready
	p, err := serial.Open(path, &serial.Mode{BaudRate: 115200})
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	time.Sleep(stall)
	p.SetReadTimeout(100 * time.Millisecond)
	sc := bufio.NewScanner(p)
	end := time.Now().Add(time.Second)
	last := int64(-1)
	for time.Now().Before(end) && sc.Scan() {
		l := sc.Text()
		i := strings.Index(l, " n=")
		if !strings.HasPrefix(l, "t=") || i < 0 {
			continue
		}
		f := strings.Fields(l[i+3:])
		if len(f) == 0 {
			continue
		}
		n, err := strconv.ParseInt(f[0], 10, 64)
		if err != nil {
			continue // a line cut by a drop
		}
		lines++
		if last >= 0 && n > last+1 {
			gaps += int(n - last - 1)
		}
		last = n
	}
	return lines, gaps
}

// TestServeFlowControl: a reader that stalls for 2 s loses nothing by default (the board
// waits, as on a link with flow control) and loses lines with DropWhenFull (as behind a
// USB bridge without flow control).
func TestServeFlowControl(t *testing.T) {
	if testing.Short() {
		t.Skip("runs a stalled reader for 3 s; skipped with -short")
	}
	t.Parallel()
	t.Run("waits", func(t *testing.T) {
		t.Parallel()
		lines, gaps := stalledReader(t, false, 2*time.Second)
		t.Logf("flow control: %d lines, %d missing", lines, gaps)
		if lines < 1000 || gaps != 0 {
			t.Errorf("with flow control: %d lines read, %d missing; want > 1000 and none missing", lines, gaps)
		}
	})
	t.Run("drops", func(t *testing.T) {
		if raceEnabled {
			t.Skip("under the race detector the board is too slow to outrun the reader")
		}
		t.Parallel()
		lines, gaps := stalledReader(t, true, 2*time.Second)
		t.Logf("without flow control: %d lines, %d missing", lines, gaps)
		if lines < 1000 || gaps == 0 {
			t.Errorf("without flow control: %d lines read, %d missing; want > 1000 and some missing", lines, gaps)
		}
	})
}
