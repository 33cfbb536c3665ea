package main

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"
	"golang.org/x/term"

	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/telemetry/si"
	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui/live"
	"github.com/caploop/caploop/tui/live/tune"
)

func init() { commands = append(commands, newLiveCmd) }

// liveFlags are the flags of `caploop live`.
type liveFlags struct {
	baud, parity, record string
	dataBits, stopBits   int
	span                 time.Duration
	force, all, wait     bool
	gates                report.GateText
	tuneRange            string
}

func newLiveCmd() *cobra.Command {
	var f liveFlags
	cmd := &cobra.Command{
		Use:   "live [PORT...]",
		Short: "the bench screen on a board's serial port",
		Long: `live opens the board's serial port and shows the bench screen: setpoint and measurement
in volts with the band, the figures of the current steady segment, the advice (deadband
and R/C pairs) and the diagnostics, the error spread, the ripple spectrum and the last
step response. Press ? on the screen for the keys; d sends the suggested deadband to the
board (after a y/n question) and shows the figures before and after it.

Without PORT, live uses the only USB serial device; with several it lists them with
their USB ids and asks which one (on a terminal). Built-in ports (no USB) are never
chosen for you: name one to use it. A PORT that is not there, not a serial device or
not yours to open ends live at once (exit 2), unless --wait. The screen reconnects by
itself after an unplug or a board reset and says so, and hints at the baud rate, the
port or the firmware when a connected port gives no reading for a few seconds.
--record writes the same capture as caploop record, marks included (an existing
capture is overwritten only with --force, and none is left behind when the port never
opened), and its path and line count are printed on quit; without --record, marks made on the screen are printed on
quit (they are not saved). q ends live within a second, even on a stuck port, after
flushing the capture.

With several ports (or a quoted glob such as '/dev/ttyACM*'), live opens the rack screen:
one row per board with its port, board settings, state (live, unplugged, silent), the
current setpoint, ripple, charge duty, limit cycle, band jumps, tau, a verdict against
the gates (--max-ripple etc., the gates of caploop summary, judged over the run so far,
or since a deadband change sent from the board's screen) and a sparkline of the
reading. Enter opens a board's bench screen, Esc returns. Each
board has its own reader, analysis and recording: one board's unplug or flood holds up
no other. --record DIR then records each board into the folder DIR, as caploop record
does with several ports. On q the exit code is 1 when any board's verdict fails.
--all opens every USB serial port; opening a port resets many boards and may disturb
other devices, so it is never the default.`,
		Example: `  caploop live
  caploop live /dev/ttyACM0 --record bench.cap
  caploop live /dev/ttyUSB0 --baud 57600 --parity even --window 500ms
  caploop live '/dev/ttyACM*' --max-ripple 20mV --record rig1`,
		Args: cobra.ArbitraryArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := checkWindow("live", f.span); err != nil {
				return err
			}
			ports, err := expandPorts(args, f.all, cmd.ErrOrStderr())
			if err != nil {
				return withCode(2, fmt.Errorf("live: %w", err))
			}
			if len(ports) <= 1 && gateNames(f.gates) != "" {
				return withCode(2, errors.New("live: the gates (--max-ripple and the others) judge the rack screen of two or more ports; for one board, record it and run caploop summary with the gates"))
			}
			port := ""
			if len(ports) == 1 {
				port = ports[0]
				if !f.wait {
					if err := wire.CheckPort(port); err != nil {
						return withCode(2, fmt.Errorf("live: %w", err))
					}
				}
			} else if len(ports) == 0 {
				p, err := pickPort()
				if err != nil {
					return withCode(2, err)
				}
				port = p
			}
			// Checked before anything is opened, so a session that cannot start leaves
			// no capture file behind.
			if !term.IsTerminal(int(os.Stdout.Fd())) {
				return withCode(2, errNoTerminal)
			}
			baud, err := si.Parse(f.baud)
			if err != nil || baud <= 0 || baud > math.MaxInt32 || baud != math.Trunc(baud) {
				return withCode(2, fmt.Errorf("live: --baud %q: want a whole positive number such as 115200 or 1M", f.baud))
			}
			if f.record != "" && len(ports) <= 1 {
				if _, err := checkTarget(f.record); err != nil {
					return withCode(2, fmt.Errorf("live: --record: %w", err))
				}
				if _, err := os.Lstat(f.record); err == nil && !f.force {
					return withCode(2, fmt.Errorf("live: %s exists; use --force to overwrite it", clean(f.record)))
				}
			}
			if len(ports) > 1 {
				cfgOf := func(path string) wire.SerialConfig {
					return wire.SerialConfig{Path: path, Baud: int(baud), DataBits: f.dataBits, Parity: f.parity, StopBits: f.stopBits}
				}
				return runRack(ports, f, cfgOf, cmd.ErrOrStderr())
			}
			cfg := wire.SerialConfig{Path: port, Baud: int(baud), DataBits: f.dataBits, Parity: f.parity, StopBits: f.stopBits}
			var to tune.Options
			if f.tuneRange != "" {
				r, err := tune.ParseRange(f.tuneRange)
				if err != nil {
					return withCode(2, fmt.Errorf("live: --range: %w", err))
				}
				to.Range = r
			}
			p := live.NewPort(live.PortOptions{Serial: cfg, Record: f.record})
			return runScreenTune(p, f.span, to)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&f.baud, "baud", "115200", "baud rate (115200, 1M, 250k)")
	fl.IntVar(&f.dataBits, "data-bits", 8, "data bits: 5, 6, 7 or 8")
	fl.StringVar(&f.parity, "parity", "none", "parity: none, odd, even, mark or space")
	fl.IntVar(&f.stopBits, "stop-bits", 1, "stop bits: 1 or 2")
	fl.StringVar(&f.record, "record", "", "also write a capture file (the format of caploop record); with several ports, a folder")
	fl.BoolVar(&f.force, "force", false, "overwrite the --record file if it exists")
	fl.BoolVar(&f.all, "all", false, "rack: open every USB serial port (caution: opening a port resets many boards)")
	registerGates(fl, &f.gates)
	fl.BoolVar(&f.wait, "wait", false, "wait for PORT to appear instead of failing at once when it is not there")
	fl.StringVar(&f.tuneRange, "range", "", "span the tune view (t) may visit, LOW..HIGH in volts (e.g. 0.5V..3V); default the setpoints in use")
	fl.DurationVar(&f.span, "window", 2*time.Second, "time window of the plot at start (+/- change it)")
	return cmd
}

// pickPort returns the port to use when none was named, by the rules of
// wire.ChoosePort; with several USB devices it asks which one on a terminal.
func pickPort() (string, error) {
	ports, err := wire.ListPorts()
	if err != nil {
		return "", fmt.Errorf("live: list serial ports: %w", err)
	}
	path, offer, err := wire.ChoosePort(ports)
	if err == nil {
		return path, nil
	}
	if len(offer) == 0 || !term.IsTerminal(int(os.Stdin.Fd())) {
		return "", fmt.Errorf("live: %w\n(caploop live PORT; caploop ports lists them)", err)
	}
	return askPort(offer, os.Stdin, os.Stderr)
}

// askPort lists the candidates with their USB ids, numbered, and reads the number of the
// one to use from in.
func askPort(list []wire.PortInfo, in io.Reader, out io.Writer) (string, error) {
	fmt.Fprintln(out, "serial ports:")
	for i, p := range list {
		fmt.Fprintf(out, "  %d) %s\n", i+1, wire.DescribePort(p))
	}
	sc := bufio.NewScanner(in)
	for tries := 0; tries < 3; tries++ {
		fmt.Fprintf(out, "which one (1-%d)? ", len(list))
		if !sc.Scan() {
			break
		}
		n, err := strconv.Atoi(strings.TrimSpace(sc.Text()))
		if err == nil && n >= 1 && n <= len(list) {
			return list[n-1].Path, nil
		}
		fmt.Fprintf(out, "please type a number from 1 to %d\n", len(list))
	}
	return "", errors.New("live: no port chosen; name it: caploop live PORT")
}
