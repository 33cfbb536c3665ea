package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"os/signal"
	"syscall"
	"time"

	"github.com/spf13/cobra"
	"golang.org/x/term"

	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
	"github.com/caploop/caploop/telemetry/wire"
)

func init() { commands = append(commands, newRecordCmd) }

// recordFlags are the flags of `caploop record`.
type recordFlags struct {
	port, out, baud, parity string
	dataBits, stopBits      int
	duration                time.Duration
	exitOnUnplug, wait      bool
	force, quiet            bool
}

func newRecordCmd() *cobra.Command {
	var f recordFlags
	cmd := &cobra.Command{
		Use:   "record PORT... --out FILE|DIR",
		Short: "capture a board's serial telemetry to a file, without a screen",
		Long: `record reads the board's serial port PORT and writes every line, byte for byte, with the
time the host received it, to a capture file (plain text; its first line starts with
#caploop-capture and names the format version). replay and summary read captures.

The capture is flushed and synced to disk at least every second and on every unplug, so
it is complete and readable after Ctrl-C, a SIGTERM or a pulled cable. The partial line
the board may be in the middle of when the port opens is dropped and noted in the
capture as a "partial" event.

When the board is unplugged, record writes an "unplugged" event and waits for the same
port path to come back (give a stable path, such as a /dev/serial/by-id/ link, to survive
a different device number); --exit-on-unplug ends the recording instead (exit code 0).

A status line goes to standard error; it never shows the board's own text.

With several ports (a test rig), --out is a folder (made when missing): each board gets
its own capture there, named by its USB serial number (the port's name when it has
none, with -2, -3... when two collide), and rig.json lists them (see the README's "Test
rig"); caploop summary DIR then gives one row per board. Each board is read and
recorded on its own, so one board's unplug holds up no other.`,
		Example: `  caploop record /dev/ttyACM0 --out bench.cap
  caploop record /dev/ttyUSB0 --baud 57600 --out greenhouse.cap --duration 2h
  caploop record /dev/serial/by-id/usb-board-if00 --out rig.cap --exit-on-unplug --force
  caploop record /dev/ttyACM0 /dev/ttyACM1 /dev/ttyACM2 /dev/ttyACM3 --out rig1 --duration 10m`,
		Args: cobra.ArbitraryArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			ports := args
			if f.port != "" {
				ports = append([]string{f.port}, args...)
			}
			ports, err := expandPorts(ports, false, cmd.ErrOrStderr())
			switch {
			case err != nil:
				return withCode(2, fmt.Errorf("record: %w", err))
			case len(ports) == 0:
				return withCode(2, errors.New("record: name the port: caploop record PORT --out FILE (caploop ports lists them)"))
			case f.out == "":
				return withCode(2, errors.New(`record: --out FILE is required (the capture to write)`))
			case len(ports) > 1:
				return runRecordRig(cmd.Context(), f, ports, cmd.ErrOrStderr())
			}
			f.port = ports[0]
			return runRecord(cmd.Context(), f, cmd.ErrOrStderr())
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&f.port, "port", "", "serial port path (caploop ports lists them)")
	_ = fl.MarkHidden("port")
	_ = fl.MarkDeprecated("port", "name the port as the first argument: caploop record PORT --out FILE")
	fl.StringVar(&f.out, "out", "", "capture file to write; with several ports, the rig folder")
	fl.StringVar(&f.baud, "baud", "115200", "baud rate (115200, 1M, 250k)")
	fl.IntVar(&f.dataBits, "data-bits", 8, "data bits: 5, 6, 7 or 8")
	fl.StringVar(&f.parity, "parity", "none", "parity: none, odd, even, mark or space")
	fl.IntVar(&f.stopBits, "stop-bits", 1, "stop bits: 1 or 2")
	fl.DurationVar(&f.duration, "duration", 0, "stop after this long (Go duration: 90s, 10m, 2h); 0 = until Ctrl-C")
	fl.BoolVar(&f.exitOnUnplug, "exit-on-unplug", false, "stop when the board is unplugged instead of waiting for it")
	fl.BoolVar(&f.wait, "wait", false, "wait for the port to appear instead of failing when it cannot be opened")
	fl.BoolVar(&f.force, "force", false, "overwrite the capture file if it exists")
	fl.BoolVar(&f.quiet, "quiet", false, "print only errors and the final summary")
	return cmd
}

// serialConfig turns the port flags into a telemetry.SerialConfig.
func (f recordFlags) serialConfig() (wire.SerialConfig, error) {
	baud, err := si.Parse(f.baud)
	if err != nil || baud <= 0 || baud > math.MaxInt32 || baud != math.Trunc(baud) {
		return wire.SerialConfig{}, fmt.Errorf("record: --baud %q: want a whole positive number such as 115200 or 1M", f.baud)
	}
	cfg := wire.SerialConfig{Path: f.port, Baud: int(baud), DataBits: f.dataBits, Parity: f.parity, StopBits: f.stopBits}
	return cfg, nil
}

func runRecord(ctx context.Context, f recordFlags, stderr io.Writer) error {
	if ctx == nil {
		ctx = context.Background()
	}
	cfg, err := f.serialConfig()
	if err != nil {
		return withCode(2, err)
	}
	if f.duration < 0 {
		return withCode(2, fmt.Errorf("record: --duration %v is negative", f.duration))
	}
	out, err := createCapture(f.out, f.force)
	if err != nil {
		return withCode(2, fmt.Errorf("record: %w", err))
	}

	// Signals first, so a Ctrl-C during the first open is not lost.
	ctx, stop := signal.NotifyContext(ctx, os.Interrupt, syscall.SIGTERM)
	defer stop()

	link := wire.Dial(cfg, wire.LinkOptions{
		Record:      out,
		RecordAttrs: []string{"tool=caploop-record"},
		FailFirst:   !f.wait,
	})
	st := newRecordStatus(stderr, f, cfg)

	var deadline <-chan time.Time
	if f.duration > 0 {
		timer := time.NewTimer(f.duration)
		defer timer.Stop()
		deadline = timer.C
	}
	tick := time.NewTicker(time.Second)
	defer tick.Stop()
	reason := ""
	batches := link.Batches()
loop:
	for {
		select {
		case b, ok := <-batches:
			if !ok {
				reason = "stopped"
				break loop
			}
			if st.events(b) && f.exitOnUnplug {
				reason = "unplugged"
				break loop
			}
		case <-tick.C:
			if link.Err() != nil {
				reason = "capture write failed"
				break loop
			}
			st.status(link.Stats())
		case <-deadline:
			reason = "duration reached"
			break loop
		case <-ctx.Done():
			reason = "interrupted"
			break loop
		}
	}
	stop() // a second Ctrl-C from here on ends the process at once
	closeErr := link.Close()
	if errors.Is(closeErr, wire.ErrStuck) {
		// The capture is flushed and closed; the stuck read or write ends with the process.
		st.endStatus()
		fmt.Fprintln(stderr, "note:", clean(closeErr.Error()))
		closeErr = nil
	}
	linkErr := link.Err()
	syncErr := out.Sync()
	outErr := out.Close()
	stats := link.Stats()
	st.endStatus()

	if reason == "stopped" && stats.Opens == 0 && linkErr != nil {
		// The port could not be opened at all: the file holds only a header.
		os.Remove(f.out)
		return withCode(2, fmt.Errorf("record: %w", linkErr))
	}
	if err := errors.Join(closeErr, syncErr, outErr); err != nil {
		return withCode(1, fmt.Errorf("record: capture %s may be incomplete: %w", clean(f.out), err))
	}
	fmt.Fprintf(stderr, "%s: recorded %s in %s to %s (%d partial dropped, %s)\n",
		reason, figure.Count(stats.Lines, "line"), time.Since(link.StartedAt()).Round(time.Millisecond), clean(f.out), stats.Partial, figure.Count(stats.Unplugs, "unplug"))
	return nil
}

// clean makes a user- or device-supplied string safe to print.
func clean(s string) string { return telemetry.SanitizeN([]byte(s), 200) }

// recordStatus prints the status of a recording: a line rewritten every second on a
// terminal; events only otherwise.
type recordStatus struct {
	w       io.Writer
	tty     bool
	quiet   bool
	cfg     wire.SerialConfig
	out     string
	start   time.Time
	onLine  bool // a status line is on screen and must be ended before other output
	exitOn  bool
	lastLen int
}

func newRecordStatus(w io.Writer, f recordFlags, cfg wire.SerialConfig) *recordStatus {
	tty := false
	if fd, ok := w.(interface{ Fd() uintptr }); ok {
		tty = term.IsTerminal(int(fd.Fd()))
	}
	return &recordStatus{w: w, tty: tty, quiet: f.quiet, cfg: cfg, out: f.out, start: time.Now(), exitOn: f.exitOnUnplug}
}

func (s *recordStatus) printf(format string, a ...any) {
	if s.quiet {
		return
	}
	if s.onLine {
		fmt.Fprint(s.w, "\n")
		s.onLine = false
	}
	fmt.Fprintf(s.w, format, a...)
}

// events prints the host events of a batch and reports whether the board was unplugged.
func (s *recordStatus) events(b []wire.Line) (unplugged bool) {
	for _, ln := range b {
		switch ln.EventKind() {
		case wire.EventConnected:
			s.printf("recording %s (%s) to %s; Ctrl-C stops\n", clean(s.cfg.Path), s.cfg, clean(s.out))
		case wire.EventReconnected:
			s.printf("reconnected\n")
		case wire.EventUnplugged:
			unplugged = true
			if s.exitOn {
				s.printf("unplugged\n")
			} else {
				s.printf("unplugged; waiting for the board to come back\n")
			}
		case wire.EventWaiting:
			s.printf("waiting: %s\n", telemetry.SanitizeN(ln.Raw[len(wire.EventWaiting):], 300))
		}
	}
	return unplugged
}

// status rewrites the status line on a terminal.
func (s *recordStatus) status(st wire.LinkStats) {
	if s.quiet || !s.tty {
		return
	}
	state := "connected"
	if !st.Connected {
		state = "waiting for the port"
	}
	line := fmt.Sprintf("\r%s  %s  %d partial  %s  %s",
		time.Since(s.start).Round(time.Second), figure.Count(st.Lines, "line"), st.Partial, figure.Count(st.Unplugs, "unplug"), state)
	pad := s.lastLen - len(line)
	s.lastLen = len(line)
	if pad > 0 {
		line += fmt.Sprintf("%*s", pad, "")
	}
	fmt.Fprint(s.w, line)
	s.onLine = true
}

// endStatus ends the status line so the summary starts on a fresh line.
func (s *recordStatus) endStatus() {
	if s.onLine {
		fmt.Fprint(s.w, "\n")
		s.onLine = false
	}
}
