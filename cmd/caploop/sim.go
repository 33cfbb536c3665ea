package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"strings"
	"syscall"
	"time"

	"github.com/spf13/cobra"

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
)

func init() { commands = append(commands, newSimCmd) }

func newSimCmd() *cobra.Command {
	var (
		scenarioFile, out, link string
		force                   bool
		fast, usePTY, verbose   bool
		capture, waitOpen       bool
		speed                   float64
		boards                  int
	)
	def := virtual.DefaultScenario()
	var keys strings.Builder
	for _, k := range virtual.Keys {
		fmt.Fprintf(&keys, "  %-14s %s\n", k.Name, k.Help)
	}
	cmd := &cobra.Command{
		Use:   "sim",
		Short: "run the virtual board: telemetry to stdout, a file or a pseudo-terminal",
		Long: `sim runs caploop's virtual board: an exact model of the capacitor, resistor, pin and ADC
loop behind firmware that prints the line protocol (a boot comment, meta lines, then one
data line t= n= sp= pv= u= per sample period) and obeys host lines:

  set deadband=N    three-state half-width in counts   answer: # deadband=N
  set mode=M        two-state or three-state          answer: # mode=M
  set period_us=N   sample period in microseconds     answer: # period_us=N
  set sp=N|auto     hold a setpoint (counts) or follow the profile again
  info              send the meta lines again

Settings changed with set are lost when the board resets, as on real firmware.

Output goes to standard output in real time, to a file (--out), as fast as possible
(--fast, with --samples or --duration), as a caploop capture instead of plain telemetry
(--capture: host lines of "at" appear as sent records), or to a pseudo-terminal (--pty): sim then prints
one line, the device path, and serves until killed (SIGTERM or Ctrl-C), then removes
the path and its temporary folder. The path is a symbolic link that follows the board
across an unplug and re-plug, so caploop live and caploop record can keep reading it.
A reader slower than the board makes it wait, as on a link with flow control;
--no-flow-control true drops the bytes instead, as a USB bridge without flow control does.
With --boards N (a test rig without hardware), sim serves N boards, each with its own
seed and parts, and prints their N paths, one a line.

The scenario starts from the built-in demo (a greenhouse sensor bias at 1.2, 2.0 and
2.8 V, three-state, deadband 4: a little narrow), then a scenario file (--scenario),
then the flags below. A scenario file has one "key = value" per line with the keys
below (the flag names); blank lines and lines starting with # are ignored, and "at" may
repeat:

  # bench reference
  supply = 3.3
  r = 10k
  c = 10u
  bits = 12
  mode = two-state
  profile = ramp
  sp = 0.5, 2.5
  dwell = 4s
  at = 6s set mode=three-state

Values take SI prefixes and units (47k, 4k7, 1u, 100mV, 1ms). Keys:

` + keys.String(),
		Example: `  caploop sim --pty
  caploop sim --pty --link /tmp/board0 --unplug-after 5s --replug-after 2s
  caploop sim --pty --boards 4 --link /tmp/rack
  caploop sim --fast --duration 10s --out bench.txt --r 22k --c 2.2u --deadband 9
  caploop sim --fast --samples 5000 --mode two-state --profile sine --sp 1,4 --dwell 2s
  caploop sim --fast --duration 6s --capture --at "3s set deadband=9" --out tuned.cap
  caploop sim --scenario bench.scn --noise 1.5 --garbage-every 1s --reset-after 3s`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			sc := def
			if scenarioFile != "" {
				if err := virtual.LoadScenario(&sc, scenarioFile); err != nil {
					return withCode(2, err)
				}
			}
			fl := cmd.Flags()
			for _, k := range virtual.Keys {
				if !fl.Changed(k.Name) {
					continue
				}
				var vals []string
				if k.Name == "at" {
					vals, _ = fl.GetStringArray(k.Name)
				} else {
					v, _ := fl.GetString(k.Name)
					vals = []string{v}
				}
				for _, v := range vals {
					if err := sc.Set(k.Name, v); err != nil {
						return withCode(2, fmt.Errorf("--%s: %w", k.Name, err))
					}
				}
			}
			switch {
			case usePTY && (fast || out != ""):
				return withCode(2, errors.New("sim: --pty serves in real time; drop --fast and --out"))
			case usePTY && capture:
				return withCode(2, errors.New("sim: --capture writes a file or standard output, not a pseudo-terminal"))
			case fast && sc.Samples == 0 && sc.Duration == 0:
				return withCode(2, errors.New("sim: --fast needs --samples or --duration"))
			case boards != 1 && !usePTY:
				return withCode(2, errors.New("sim: --boards serves pseudo-terminals; add --pty"))
			case boards < 1 || boards > maxSimBoards:
				return withCode(2, fmt.Errorf("sim: --boards %d: want 1 to %d", boards, maxSimBoards))
			case speed < 0:
				return withCode(2, errors.New("sim: --speed must be above 0"))
			}
			if boards > 1 {
				ctx, stop := signal.NotifyContext(cmd.Context(), os.Interrupt, syscall.SIGTERM)
				defer stop()
				return withCode(2, serveRack(ctx, sc, boards, speed, link, waitOpen, cmd.OutOrStdout(), cmd.ErrOrStderr()))
			}
			b, err := virtual.NewBoard(sc)
			if err != nil {
				return withCode(2, err)
			}
			b.Speed = speed
			stderr := cmd.ErrOrStderr()
			if verbose || usePTY {
				b.OnEvent = func(e virtual.Event) {
					d := ""
					if e.Detail != "" {
						d = " " + telemetry.SanitizeN([]byte(e.Detail), 120)
					}
					fmt.Fprintf(stderr, "sim: %.3fs %s%s\n", e.At, e.Kind, d)
				}
			}
			ctx, stop := signal.NotifyContext(cmd.Context(), os.Interrupt, syscall.SIGTERM)
			defer stop()
			go func() {
				// After the first signal the board stops and cleans up at once; a second
				// one ends the process the default way.
				<-ctx.Done()
				stop()
			}()

			if usePTY {
				err := wire.Serve(ctx, b, wire.ServeOptions{
					Link:         link,
					Ready:        func(path string) { fmt.Fprintln(cmd.OutOrStdout(), path) },
					WaitOpen:     waitOpen,
					DropWhenFull: sc.Faults.NoFlowControl,
				})
				return withCode(2, err)
			}
			err = simOutput(out, capture, force, cmd.OutOrStdout(), func(w io.Writer) error {
				var co *virtual.CaptureOutput
				if capture {
					var err error
					if co, err = virtual.NewCaptureOutput(w, time.Now(), "virtual:"+sc.Name); err != nil {
						return err
					}
					w = co
				}
				err := b.Run(ctx, w, !fast)
				if errors.Is(err, context.Canceled) {
					err = nil
				}
				if co != nil {
					err = errors.Join(err, co.Flush())
				}
				return err
			})
			if err != nil {
				return withCode(2, fmt.Errorf("sim: %w", err))
			}
			return nil
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&scenarioFile, "scenario", "", "scenario file (key = value lines, see above)")
	fl.StringVarP(&out, "out", "o", "", "write to this file instead of standard output (plain telemetry: written whole when the run ends, replacing an older file; with --capture: written as it comes, an existing file needs --force); a symbolic link, device or FIFO is refused")
	fl.BoolVar(&force, "force", false, "with --capture --out: overwrite the capture file if it exists")
	fl.BoolVar(&fast, "fast", false, "write as fast as possible instead of in real time")
	fl.BoolVar(&capture, "capture", false, "write a caploop capture (host time, direction, line; host times from the board clock) instead of plain telemetry")
	fl.BoolVar(&usePTY, "pty", false, "serve a pseudo-terminal and print its stable path")
	fl.StringVar(&link, "link", "", "with --pty: the stable path (a symbolic link) to create (default: a new temporary directory)")
	fl.IntVar(&boards, "boards", 1, "with --pty: serve this many boards, each with its own seed and parts (R and C a step or two apart in E12); one path a line, and --link gets the board's number appended")
	fl.BoolVar(&waitOpen, "wait-open", false, "with --pty: boot only when a program first opens the device, so it sees the boot lines")
	fl.Float64Var(&speed, "speed", 1, "real-time factor (2 = twice as fast)")
	fl.BoolVarP(&verbose, "verbose", "v", false, "log boots, answers and faults on standard error")
	for _, k := range virtual.Keys {
		help := k.Help
		if d := k.Get(&def); d != "" && d != "0" && d != "false" {
			help += " (default " + d + ")"
		}
		if k.Name == "at" {
			fl.StringArray(k.Name, nil, help)
			continue
		}
		fl.String(k.Name, "", help)
	}
	return cmd
}
