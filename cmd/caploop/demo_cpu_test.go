package main

import (
	"fmt"
	"os"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"time"
)

// The demo's cost as a user sees it: the whole caploop process (virtual board on a
// pseudo-terminal, link, analysis, advice and screen) in a real terminal, measured in
// CPU seconds of the process (utime + stime from /proc) over wall seconds, so that other
// programs on the machine do not count. The target (issue "a screen left open all day"):
// under 5 % of one core at 120x40 with the demo's 1 kS/s board. It is a benchmark, not a
// timed test: BenchmarkDemoProcess reports cpu-% (DEVELOPERS.md, Performance).

// demoCPU runs the demo at width x height in a tmux session, lets it settle for warm,
// and returns the process's CPU time and the wall time over the next measure.
func demoCPU(tb testing.TB, width, height int, warm, measure time.Duration) (cpu, wall time.Duration) {
	tb.Helper()
	if runtime.GOOS != "linux" {
		tb.Skip("reads the process's CPU time from /proc (Linux)")
	}
	needTmux(tb)
	bin := buildCaploop(tb, tb.TempDir())
	scr := &tmuxScreen{socket: fmt.Sprintf("caploop-cpu-%d-%d", os.Getpid(), width), name: "demo"}
	if out, err := scr.tmux("new-session", "-d", "-s", scr.name, "-x", strconv.Itoa(width), "-y", strconv.Itoa(height),
		"exec "+bin); err != nil {
		tb.Fatalf("tmux new-session: %v %s", err, out)
	}
	defer scr.tmux("kill-server")
	out, err := scr.tmux("display-message", "-p", "-t", scr.name, "#{pane_pid}")
	if err != nil {
		tb.Fatalf("tmux pane pid: %v %s", err, out)
	}
	pid := strings.TrimSpace(out)
	time.Sleep(warm)
	c0, err := procCPU(pid)
	if err != nil {
		tb.Fatalf("the demo is not running: %v; screen:\n%s", err, scr.capture())
	}
	t0 := time.Now()
	time.Sleep(measure)
	c1, err := procCPU(pid)
	wall = time.Since(t0)
	if err != nil {
		tb.Fatalf("the demo stopped: %v; screen:\n%s", err, scr.capture())
	}
	if screen := scr.capture(); !strings.Contains(screen, "LIVE · virtual board · connected") {
		tb.Fatalf("the demo screen is not live on the virtual board:\n%s", screen)
	}
	return c1 - c0, wall
}

// procCPU returns the user and system CPU time of process pid so far.
func procCPU(pid string) (time.Duration, error) {
	b, err := os.ReadFile("/proc/" + pid + "/stat")
	if err != nil {
		return 0, err
	}
	// The command name (field 2) is in parentheses and may hold spaces: count from ")".
	s := string(b)
	f := strings.Fields(s[strings.LastIndexByte(s, ')')+1:])
	if len(f) < 13 {
		return 0, fmt.Errorf("short /proc/%s/stat", pid)
	}
	// Fields 14 and 15 of the line (utime, stime) are 12 and 13 after the name, in clock
	// ticks; Linux reports them in USER_HZ, 100 a second on every architecture Go runs on.
	ut, err1 := strconv.ParseInt(f[11], 10, 64)
	st, err2 := strconv.ParseInt(f[12], 10, 64)
	if err1 != nil || err2 != nil {
		return 0, fmt.Errorf("bad /proc/%s/stat", pid)
	}
	return time.Duration(ut+st) * 10 * time.Millisecond, nil
}

// BenchmarkDemoProcess measures the demo process over a minute of the demo (after 5 s
// to settle) at two terminal sizes: cpu-% is the process's CPU seconds over wall seconds
// (the board runs in real time, 1 kS/s, so it is also CPU per board-second).
//
//	go test -run x -bench DemoProcess -benchtime 1x ./cmd/caploop/
func BenchmarkDemoProcess(b *testing.B) {
	for _, sz := range []struct{ w, h int }{{120, 40}, {250, 70}} {
		b.Run(fmt.Sprintf("%dx%d", sz.w, sz.h), func(b *testing.B) {
			var cpu, wall time.Duration
			for i := 0; i < b.N; i++ {
				c, w := demoCPU(b, sz.w, sz.h, 5*time.Second, time.Minute)
				cpu += c
				wall += w
			}
			b.ReportMetric(100*cpu.Seconds()/wall.Seconds(), "cpu-%")
		})
	}
}
