package main

import (
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"github.com/caploop/caploop/tui/live"
)

func init() { commands = append(commands, newReplayCmd) }

func newReplayCmd() *cobra.Command {
	var (
		speed  string
		paused bool
		span   time.Duration
	)
	cmd := &cobra.Command{
		Use:   "replay FILE",
		Short: "the bench screen on a capture or telemetry file",
		Long: `replay plays a capture (from caploop record or live --record) or a plain telemetry file
(.gz too) on the bench screen, the same screen as live: in real time, faster or as fast
as possible, held and advanced, or jumping by landmark. On the screen: space holds and
runs, x and X change the speed (1x, 2x, 10x, max), n advances while held, s/S go to the
next/previous setpoint, g/G segment, m/M mark, e/E event, j and a digit to that tenth of
the capture, home to its start; ? shows every key. Marks and sent commands of a capture
appear on the plot.`,
		Example: `  caploop replay bench.cap
  caploop replay greenhouse.cap.gz --speed 10
  caploop replay log.txt --speed max --paused`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := checkWindow("replay", span); err != nil {
				return err
			}
			sp, err := parseSpeed(speed)
			if err != nil {
				return withCode(2, err)
			}
			p, err := live.NewReplay(live.ReplayOptions{Path: args[0], Speed: sp, Paused: paused, Open: replayOpener(args[0])})
			if err != nil {
				return withCode(2, fmt.Errorf("replay: %w", err))
			}
			return runScreen(p, span)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&speed, "speed", "1", "replay speed: 1, 2, 10 (times real time) or max")
	fl.BoolVar(&paused, "paused", false, "start held (space runs, n advances)")
	fl.DurationVar(&span, "window", 2*time.Second, "time window of the plot at start (+/- change it)")
	return cmd
}

// parseSpeed reads --speed: a positive factor ("2", "10x") or "max" (0).
func parseSpeed(s string) (float64, error) {
	t := strings.ToLower(strings.TrimSpace(s))
	if t == "max" {
		return 0, nil
	}
	t = strings.TrimSuffix(t, "x")
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || v <= 0 || v > 1e6 {
		return 0, fmt.Errorf("replay: --speed %q: want a positive factor such as 1, 2, 10, or max", s)
	}
	return v, nil
}
