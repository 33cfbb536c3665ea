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
	force                bool
}

func newLiveCmd() *cobra.Command {
	var f liveFlags
	cmd := &cobra.Command{
		Use:   "live [PORT]",
		Short: "the bench screen on a board's serial port",
		Long: `live opens the board's serial port and shows the bench screen: setpoint and measurement
in volts with the band, the figures of the current steady segment, the advice (deadband
and R/C pairs) and the diagnostics, the error spread, the ripple spectrum and the last
step response. Press ? on the screen for the keys; d sends the suggested deadband to the
board (after a y/n question) and shows the figures before and after it.

Without PORT, live uses the only USB serial device; with several it lists them with
their USB ids and asks which one (on a terminal). The screen reconnects by itself after an unplug or a board reset and says so.
--record writes the same capture as caploop record, marks included; an existing
capture is overwritten only with --force, and none is left behind when the port never
opened.`,
		Example: `  caploop live
  caploop live /dev/ttyACM0 --record bench.cap
  caploop live /dev/ttyUSB0 --baud 57600 --parity even --window 500ms`,
		Args: cobra.MaximumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			port := ""
			if len(args) == 1 {
				port = args[0]
			} else {
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
			// Checked before anything is opened, so a session that cannot start leaves
			// no capture file behind.
			if !term.IsTerminal(int(os.Stdout.Fd())) {
				return withCode(2, errNoTerminal)
			}
			if f.record != "" {
				if _, err := checkTarget(f.record); err != nil {
					return withCode(2, fmt.Errorf("live: --record: %w", err))
				}
				if _, err := os.Lstat(f.record); err == nil && !f.force {
					return withCode(2, fmt.Errorf("live: %s exists; use --force to overwrite it", clean(f.record)))
				}
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
	fl.StringVar(&f.record, "record", "", "also write a capture file (the format of caploop record)")
	fl.BoolVar(&f.force, "force", false, "overwrite the --record file if it exists")
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
