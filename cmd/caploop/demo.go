package main

import (
	"github.com/spf13/cobra"

	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/tui"
)

func init() { rootRun = runDemo }

// runDemo is caploop with no command: the bench screen on the built-in virtual board
// (the default scenario of caploop sim), served on a pseudo-terminal inside this process
// so the screen reads it exactly as it reads a board on USB.
func runDemo(cmd *cobra.Command, args []string) error {
	if len(args) > 0 {
		return withCode(2, errUnknownCommand(args[0]))
	}
	p, err := tui.NewDemo(virtual.DefaultScenario(), tui.SourceOptions{})
	if err != nil {
		return withCode(2, err)
	}
	return runScreen(p, 0)
}

type errUnknownCommand string

func (e errUnknownCommand) Error() string {
	return "unknown command " + string(e) + " (caploop --help lists the commands)"
}
