package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"strings"
	"syscall"
	"time"

	"github.com/spf13/cobra"
	"golang.org/x/term"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/si"
	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui/live/tune"
)

func init() { commands = append(commands, newTuneCmd) }

// tuneFlags are the flags of `caploop tune`.
type tuneFlags struct {
	rng, out, baud, ripple string
	yes, guided, applyPer  bool
	force                  bool
	gates                  report.GateText
	replugWait, guidedWait time.Duration
	stdinTTY               func() bool // tests
	stdin                  io.Reader
}

// captureFile is the capture's name in the record folder.
const captureFile = "capture.cap"

func newTuneCmd() *cobra.Command {
	var f tuneFlags
	cmd := &cobra.Command{
		Use:   "tune [PORT]",
		Short: "identify the board's loop, set the advised deadband and verify it, in one run",
		Long: `tune takes a board from unknown to a tuned, verified loop:

  1 ask       sends info (the only line sent before you confirm) and reads the meta lines
              and the accepts= list: which set keys the board takes
  2 plan      shows the range the output will visit (--range, default the setpoints in
              use) and every set it will send; nothing is set until you confirm (--yes)
  3 identify  steps across the range with the board's own band (the before pass), then
              with a wide band whose holds show the droop, about 5 tau a dwell, until tau
              is identifiable
  4 advise    the deadband from the advice engine (and its period advice)
  5 verify    sends the advised deadband, runs the same steps again (the after pass) and
              prints the before/after line
  6 record    with --out DIR: the capture of the whole run, summary.json, report.html
              (before and after) and caploop_tune.h, constants a firmware build includes

Safety: a reading outside the range plus a margin, Ctrl-C, SIGTERM or q and Enter sends
the restore line at once (the board's original sp, deadband, mode and period). After an
unplug, tune resumes once the board is back (--replug-wait), or says it could not restore.

A board that takes no set sp is tuned in guided mode (--guided): tune says which setpoint
to dial in and waits for it. Progress goes to standard error. Exit code 0 when the
verified loop meets the gates, 1 when not, 2 on an error or an early stop.`,
		Example: `  caploop tune /dev/ttyACM0 --range 0.5V..3V --out tuned
  caploop tune /dev/ttyACM0 --range 0.5V..3V --yes --max-ripple 50mV --max-jumps 0 --out rig-run
  caploop tune /dev/ttyUSB0 --guided --range 1V..4V`,
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
			return runTune(cmd.Context(), port, f, cmd.OutOrStdout(), cmd.ErrOrStderr())
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&f.rng, "range", "", "span the output may visit, LOW..HIGH in volts (e.g. 0.5V..3V); default the setpoints in use")
	fl.StringVar(&f.out, "out", "", "record folder: capture, summary.json, report.html and caploop_tune.h")
	fl.StringVar(&f.baud, "baud", "115200", "baud rate (115200, 1M, 250k)")
	fl.StringVar(&f.ripple, "ripple", "", "ripple goal of the advice, p-p (e.g. 50mV); default the --max-ripple gate, else the advice's default")
	fl.BoolVar(&f.yes, "yes", false, "go on without asking to confirm the plan (rigs)")
	fl.BoolVar(&f.guided, "guided", false, "when the board takes no set sp, say which setpoint to dial in and wait for it")
	fl.BoolVar(&f.applyPer, "apply-period", false, "also send the advised sample period (the advised band and its check are for the present one)")
	fl.BoolVar(&f.force, "force", false, "write into a record folder that already holds a capture")
	fl.DurationVar(&f.replugWait, "replug-wait", 10*time.Second, "how long to wait for an unplugged board to restore its settings")
	fl.DurationVar(&f.guidedWait, "guided-wait", 2*time.Minute, "how long to wait for each setpoint dialled in by hand")
	registerGates(fl, &f.gates)
	return cmd
}

func runTune(ctx context.Context, port string, f tuneFlags, stdout, stderr io.Writer) error {
	if ctx == nil {
		ctx = context.Background()
	}
	baud, err := si.Parse(f.baud)
	if err != nil || baud <= 0 || baud != float64(int(baud)) {
		return withCode(2, fmt.Errorf("tune: --baud %q: want a whole positive number such as 115200", f.baud))
	}
	var opt tune.Options
	if f.rng != "" {
		if opt.Range, err = tune.ParseRange(f.rng); err != nil {
			return withCode(2, err)
		}
	}
	gates, err := f.gates.Parse()
	if err != nil {
		return withCode(2, errors.New("tune"+strings.TrimPrefix(err.Error(), "summary")))
	}
	opt.Gates = &gates
	ripple := f.ripple
	if ripple == "" {
		ripple = f.gates.Ripple
	}
	if ripple != "" {
		v, err := si.ParseUnit(ripple, "V")
		if err != nil || !(v > 0) {
			return withCode(2, fmt.Errorf("tune: --ripple %q: want a value > 0 in V, such as 50mV", ripple))
		}
		opt.Goals.RippleV = v
	}
	stdin := f.stdin
	if stdin == nil {
		stdin = os.Stdin
	}
	tty := f.stdinTTY
	if tty == nil {
		tty = func() bool { return term.IsTerminal(int(os.Stdin.Fd())) }
	}
	interactive := tty()
	if !f.yes && !interactive {
		return withCode(2, errors.New("tune: no terminal to confirm the plan on; add --yes to go on without asking (rigs)"))
	}
	recordPath := ""
	if f.out != "" {
		if err := os.MkdirAll(f.out, 0o755); err != nil {
			return withCode(2, fmt.Errorf("tune: --out: %w", err))
		}
		recordPath = filepath.Join(f.out, captureFile)
		if fi, err := os.Lstat(recordPath); err == nil {
			if !fi.Mode().IsRegular() {
				return withCode(2, fmt.Errorf("tune: refusing to write %s: not a regular file", clean(recordPath)))
			}
			if !f.force {
				return withCode(2, fmt.Errorf("tune: %s already holds a capture; choose another --out or add --force", clean(f.out)))
			}
		}
	}
	opt.Progress = stderr
	opt.Guided = f.guided
	opt.ApplyPeriod = f.applyPer
	opt.ReplugWait, opt.GuidedWait = f.replugWait, f.guidedWait

	ctx, stop := signal.NotifyContext(ctx, os.Interrupt, syscall.SIGTERM)
	defer stop()
	ctx, quit := context.WithCancel(ctx)
	defer quit()

	lines := make(chan string, 4)
	if interactive {
		go func() {
			sc := bufio.NewScanner(stdin)
			for sc.Scan() {
				lines <- strings.TrimSpace(sc.Text())
			}
			close(lines)
		}()
	}
	confirmed := make(chan struct{})
	opt.Confirm = func(plan string) (bool, error) {
		fmt.Fprint(stdout, plan)
		if f.yes {
			close(confirmed)
			return true, nil
		}
		fmt.Fprint(stderr, "send these settings? [y/N] ")
		select {
		case l, ok := <-lines:
			if ok && (strings.EqualFold(l, "y") || strings.EqualFold(l, "yes")) {
				fmt.Fprintln(stderr, "going on; q and Enter, or Ctrl-C, stops and restores the settings")
				close(confirmed)
				return true, nil
			}
			return false, nil
		case <-ctx.Done():
			return false, tune.ErrQuit
		}
	}
	if interactive {
		go func() {
			select {
			case <-confirmed:
			case <-ctx.Done():
				return
			}
			for l := range lines {
				if strings.EqualFold(l, "q") {
					quit()
					return
				}
			}
		}()
	}

	link := wire.Dial(wire.SerialConfig{Path: port, Baud: int(baud)}, wire.LinkOptions{
		RecordPath:  recordPath,
		RecordAttrs: []string{"tool=caploop-tune"},
		FailFirst:   true,
	})
	res, runErr := tune.Run(ctx, link, opt)
	stop()
	closeErr := link.Close()
	if linkErr := link.Err(); runErr != nil && errors.Is(runErr, tune.ErrLinkClosed) && linkErr != nil {
		runErr = fmt.Errorf("tune: %w", linkErr)
	}
	res.Port = clean(port)

	if res.Compare != nil {
		fmt.Fprintln(stdout, "before -> after: "+res.Compare.Line)
	}
	if res.RestoreNote != "" && res.Plan != nil {
		fmt.Fprintln(stderr, res.RestoreNote)
	}
	if f.out != "" {
		var whole *analysis.Summary
		if closeErr == nil {
			whole = summarizeCapture(recordPath)
		}
		wrote, err := tune.WriteRecord(f.out, res, whole, time.Now())
		if closeErr != nil {
			fmt.Fprintf(stderr, "tune: the capture may be incomplete: %v\n", closeErr)
		}
		fmt.Fprintf(stderr, "record: %s: %s\n", clean(f.out), strings.Join(append([]string{captureFile}, wrote...), ", "))
		if err != nil && runErr == nil {
			return withCode(2, err)
		}
	}
	if runErr != nil {
		return withCode(2, runErr)
	}
	for _, g := range res.Gates {
		if g.Status == report.GateFail {
			fmt.Fprintf(stdout, "gate %s %s: %s\n", g.Gate, g.Scope, g.Message)
		}
	}
	if res.GatesFailed {
		return withCode(1, errors.New("tune: the verified loop does not meet the gates"))
	}
	return nil
}

// summarizeCapture reads the record folder's capture back as `caploop summary` would.
func summarizeCapture(path string) *analysis.Summary {
	fd, err := os.Open(path)
	if err != nil {
		return nil
	}
	defer fd.Close()
	sc := telemetry.NewScanner(fd)
	sc.Name = captureFile
	s, err := analysis.Summarize(sc, analysis.Options{Source: captureFile})
	if err != nil {
		return nil
	}
	return s
}
