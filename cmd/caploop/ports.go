package main

import (
	"encoding/json"
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
)

func init() { commands = append(commands, newPortsCmd) }

func newPortsCmd() *cobra.Command {
	var jsonOut bool
	cmd := &cobra.Command{
		Use:   "ports",
		Short: "list the serial ports of this machine",
		Long: `ports lists the serial ports with, for USB adapters and boards, the vendor and
product IDs (VID:PID), the serial number and the product name the device reports. It does
not open the ports. Give one of the paths to live or record as its first argument
(caploop live PORT, caploop record PORT --out FILE).`,
		Example: `  caploop ports
  caploop ports --json`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			ports, err := wire.ListPorts()
			if err != nil {
				return withCode(2, err)
			}
			if jsonOut {
				return writePortsJSON(cmd.OutOrStdout(), ports)
			}
			return writePorts(cmd.OutOrStdout(), ports)
		},
	}
	cmd.Flags().BoolVar(&jsonOut, "json", false, "print the list as JSON")
	return cmd
}

// writePortsJSON writes the list as a JSON array (empty, not null, when there are none).
func writePortsJSON(w io.Writer, ports []wire.PortInfo) error {
	if ports == nil {
		ports = []wire.PortInfo{}
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	enc.SetEscapeHTML(false) // as every caploop JSON: '<' stays '<'
	return enc.Encode(ports)
}

// writePorts writes a table; the device's own strings are sanitised.
func writePorts(w io.Writer, ports []wire.PortInfo) error {
	if len(ports) == 0 {
		_, err := fmt.Fprintln(w, "no serial ports found (is the board plugged in? a board that needs a driver shows up only once it is loaded)")
		return err
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "PORT\tVID:PID\tSERIAL\tPRODUCT")
	for _, p := range ports {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\n",
			clean(p.Path), dash(clean(p.VIDPID())),
			dash(telemetry.SanitizeN([]byte(p.Serial), 40)), dash(telemetry.SanitizeN([]byte(p.Product), 60)))
	}
	return tw.Flush()
}

func dash(s string) string {
	if s == "" {
		return "-"
	}
	return s
}
