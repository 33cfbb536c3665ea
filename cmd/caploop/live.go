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
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui/live"
)

func init() { commands = append(commands, newLiveCmd) }

// liveFlags are the flags of `caploop live`.
type liveFlags struct {
	baud, parity, record string
	dataBits, stopBits   int
	span                 time.Duration
	force, all           bool
	gates                report.GateText
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
their USB ids and asks which one (on a terminal). The screen reconnects by itself after an unplug or a board reset and says so.
--record writes the same capture as caploop record, marks included.

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
			} else if len(ports) == 0 {
				p, err := pickPort()
				if err != nil {
					return withCode(2, err)
				}
				port = p
			}
			baud, err := si.Parse(f.baud)
			if err != nil || baud <= 0 || baud > math.MaxInt32 || baud != math.Trunc(baud) {
				return withCode(2, fmt.Errorf("live: --baud %q: want a whole positive number such as 115200 or 1M", f.baud))
			}
			if f.record != "" && !f.force && len(ports) <= 1 {
				if _, err := os.Stat(f.record); err == nil {
					return withCode(2, fmt.Errorf("live: %s exists; use --force to overwrite it", f.record))
				}
			}
			if len(ports) > 1 {
				cfgOf := func(path string) wire.SerialConfig {
					return wire.SerialConfig{Path: path, Baud: int(baud), DataBits: f.dataBits, Parity: f.parity, StopBits: f.stopBits}
				}
				return runRack(ports, f, cfgOf, cmd.ErrOrStderr())
			}
			cfg := wire.SerialConfig{Path: port, Baud: int(baud), DataBits: f.dataBits, Parity: f.parity, StopBits: f.stopBits}
			p := live.NewPort(live.PortOptions{Serial: cfg, Record: f.record})
			return runScreen(p, f.span)
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
	fl.DurationVar(&f.span, "window", 2*time.Second, "time window of the plot at start (+/- change it)")
	return cmd
}

// pickPort returns the only USB serial device. With several candidates it asks which one
// on a terminal, and otherwise returns an error listing them.
func pickPort() (string, error) {
	ports, err := wire.ListPorts()
	if err != nil {
		return "", fmt.Errorf("live: list serial ports: %w", err)
	}
	path, err := pickFrom(ports)
	if err == nil || !term.IsTerminal(int(os.Stdin.Fd())) {
		return path, err
	}
	list := candidates(ports)
	if len(list) == 0 {
		return "", err
	}
	return askPort(list, os.Stdin, os.Stderr)
}

// candidates are the ports worth offering: the USB ones, or every port when none is USB.
func candidates(ports []wire.PortInfo) []wire.PortInfo {
	var usb []wire.PortInfo
	for _, p := range ports {
		if p.USB {
			usb = append(usb, p)
		}
	}
	if len(usb) == 0 {
		return ports
	}
	return usb
}

// askPort lists the candidates with their USB ids, numbered, and reads the number of the
// one to use from in.
func askPort(list []wire.PortInfo, in io.Reader, out io.Writer) (string, error) {
	fmt.Fprintln(out, "serial ports:")
	for i, p := range list {
		fmt.Fprintf(out, "  %d) %s\n", i+1, describePort(p))
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

// describePort is one line about a port: path, USB VID:PID, serial number and product,
// with the device's own strings sanitised.
func describePort(p wire.PortInfo) string {
	var b strings.Builder
	b.WriteString(p.Path)
	if id := p.VIDPID(); id != "" {
		fmt.Fprintf(&b, "  %s", id)
	}
	if p.Serial != "" {
		fmt.Fprintf(&b, "  serial %s", telemetry.SanitizeN([]byte(p.Serial), 40))
	}
	if p.Product != "" {
		fmt.Fprintf(&b, "  %s", telemetry.SanitizeN([]byte(p.Product), 40))
	}
	return b.String()
}

// pickFrom picks the only USB serial device of ports, or lists the candidates (the USB
// ones with their ids, else every port) in the error.
func pickFrom(ports []wire.PortInfo) (string, error) {
	var usb []wire.PortInfo
	for _, p := range ports {
		if p.USB {
			usb = append(usb, p)
		}
	}
	if len(usb) == 1 {
		return usb[0].Path, nil
	}
	list := usb
	if len(list) == 0 {
		list = ports
	}
	if len(list) == 0 {
		return "", errors.New("live: no serial port found; plug the board in or name the port (caploop live /dev/ttyACM0)")
	}
	var b strings.Builder
	if len(usb) == 0 {
		b.WriteString("live: no USB serial device; name one of these ports:")
	} else {
		fmt.Fprintf(&b, "live: %d USB serial devices; name one:", len(usb))
	}
	for _, p := range list {
		b.WriteString("\n  " + describePort(p))
	}
	return "", errors.New(b.String())
}
