// Command caploop reads the telemetry of a switched-RC analog output loop (a
// microcontroller pin charging a capacitor through a resistor), measures it, identifies
// the real circuit and suggests the deadband and the R and C values to use.
//
// Run it with no arguments to see the bench screen on the built-in virtual board.
package main

import (
	"errors"
	"fmt"
	"os"
	"strings"

	"github.com/spf13/cobra"

	"github.com/caploop/caploop/telemetry"
)

// commands holds the constructors of the subcommands; each subcommand's file adds its own
// in an init function, so the files do not step on each other.
var commands []func() *cobra.Command

// rootRun, when set by the screen's file, is what caploop does with no command: the bench
// screen on the built-in virtual board.
var rootRun func(cmd *cobra.Command, args []string) error

// exitError carries an exit code out of a command: 1 for a failed gate, 2 for unusable input.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

// withCode wraps err so that main exits with code.
func withCode(code int, err error) error {
	if err == nil {
		return nil
	}
	return &exitError{code: code, err: err}
}

func newRoot() *cobra.Command {
	root := &cobra.Command{
		Use:   "caploop",
		Short: "measure and tune a capacitor-and-resistor analog output loop",
		Long: `caploop reads the line telemetry of a microcontroller that makes a DC level by
charging a capacitor through a resistor from a digital pin, measures ripple, duty,
limit-cycle period and deadband hits, identifies the real RC from the data, and suggests
the deadband count and standard R and C values, each checked by simulating the loop.

With no command, caploop shows the bench screen on its built-in virtual board.`,
		Example: `  caploop                                   # the bench screen on the virtual board
  caploop live /dev/ttyACM0 --record bench.cap
  caploop summary bench.cap --max-ripple 20mV --max-jumps 0
  caploop design --supply 5 --period 1ms --ripple 100mV --series E12`,
		SilenceUsage:  true,
		SilenceErrors: true,
		Version:       versionString(),
	}
	root.SetVersionTemplate("caploop {{.Version}}\n")
	if rootRun != nil {
		root.RunE = rootRun
	}
	for _, c := range commands {
		root.AddCommand(c())
	}
	return root
}

func main() {
	root := newRoot()
	stopProfile := startProfile()
	err := root.Execute()
	stopProfile()
	if err != nil {
		fmt.Fprintln(os.Stderr, "caploop:", errorText(err))
		var ee *exitError
		if errors.As(err, &ee) {
			os.Exit(ee.code)
		}
		os.Exit(2)
	}
}

// errorText is the message of err made safe for a terminal: each line passes the one
// sanitiser, so a file or port name with control bytes in an error from any layer never
// reaches standard error raw.
func errorText(err error) string {
	lines := strings.Split(err.Error(), "\n")
	for i, l := range lines {
		lines[i] = telemetry.Sanitize([]byte(l))
	}
	return strings.Join(lines, "\n")
}
