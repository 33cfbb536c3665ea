package main

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"

	"github.com/spf13/cobra"

	"github.com/caploop/caploop/analysis/export"
	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/telemetry"
)

func init() { commands = append(commands, newExportCmd) }

// exportFlags are the flags of `caploop export`.
type exportFlags struct {
	csv, tsv bool
	out      string
	force    bool
}

func newExportCmd() *cobra.Command {
	var f exportFlags
	cmd := &cobra.Command{
		Use:   "export FILE",
		Short: "write a capture as a spreadsheet table (CSV or TSV), one row per sample",
		Long: `export writes one row per sample of a telemetry file or capture (.gz is read
directly): board time in seconds from the first sample, the capture's host time, the
setpoint and the measurement in counts and in volts, the drive (1 charge, 0 hold,
-1 discharge), the segment index and the deadband in force, and every extra channel
the board sent, under a header that names the units. --csv (the default) is RFC 4180
with CRLF line ends; --tsv separates with tabs.

The file is read twice (the first pass finds the columns), so memory stays small
whatever its size; standard input cannot be exported. The table goes to standard
output, or to -o FILE, which is replaced as a whole (it keeps its permissions); a
symbolic link, device or FIFO there is refused, and so is a capture unless --force.`,
		Example: `  caploop export greenhouse-bias.cap > bias.csv
  caploop export bench.txt.gz --tsv -o bench.tsv`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runExport(cmd.OutOrStdout(), cmd.ErrOrStderr(), args[0], &f)
		},
	}
	fl := cmd.Flags()
	fl.BoolVar(&f.csv, "csv", false, "write comma-separated values, RFC 4180 (the default)")
	fl.BoolVar(&f.tsv, "tsv", false, "write tab-separated values")
	fl.StringVarP(&f.out, "out", "o", "-", "write the table to this file (- is standard output)")
	fl.BoolVar(&f.force, "force", false, "replace the output file even when it is a capture")
	return cmd
}

func runExport(stdout, stderr io.Writer, in string, f *exportFlags) error {
	if f.csv && f.tsv {
		return withCode(2, errors.New("export: give --csv or --tsv, not both"))
	}
	if in == "-" {
		return withCode(2, errors.New("export: reads its input twice, so it needs a file, not standard input"))
	}
	if f.out != "" && f.out != "-" {
		if err := checkExportTarget(in, f.out, f.force); err != nil {
			return withCode(2, err)
		}
	}
	open := func() (*telemetry.Scanner, io.Closer, error) {
		src, err := telemetry.OpenFile(in)
		if err != nil {
			return nil, nil, err
		}
		sc := telemetry.NewScanner(src)
		sc.Name = telemetry.Sanitize([]byte(in))
		return sc, src, nil
	}
	sc, c, err := open()
	if err != nil {
		return withCode(2, err)
	}
	layout, err := export.Survey(sc)
	c.Close()
	if err != nil {
		return withCode(2, fmt.Errorf("export %s: %w", sc.Name, err))
	}
	stats := sc.Stats()

	var res export.Result
	err = writeOutput(f.out, stdout, func(w io.Writer) error {
		sc, c, err := open()
		if err != nil {
			return err
		}
		defer c.Close()
		res, err = export.Write(w, sc, layout, export.Options{TSV: f.tsv})
		return err
	})
	if err != nil {
		return withCode(2, err)
	}
	if stats.Rejected > 0 {
		fmt.Fprintf(stderr, "caploop: export: %s of %s could not be read and %s left out\n", figure.Count(stats.Rejected, "line"), clean(sc.Name), figure.Pick(stats.Rejected, "was", "were"))
	}
	if res.Beyond > 0 {
		fmt.Fprintf(stderr, "caploop: export: %s grew while it was read; the %s after the first pass %s left out\n", clean(sc.Name), figure.Count(res.Beyond, "sample"), figure.Pick(res.Beyond, "is", "are"))
	}
	if res.UnknownExtras > 0 {
		fmt.Fprintf(stderr, "caploop: export: %s of channels that appeared after the first pass %s left out\n", figure.Count(res.UnknownExtras, "value"), figure.Pick(res.UnknownExtras, "is", "are"))
	}
	if f.out != "" && f.out != "-" {
		fmt.Fprintf(stderr, "caploop: export: %s, %s to %s\n", figure.Count(res.Rows, "row"), figure.Count(len(layout.Columns()), "column"), telemetry.Sanitize([]byte(f.out)))
	}
	return nil
}

// checkExportTarget refuses an output that would destroy data: the input itself, or an
// existing capture or gzip file (unless force).
func checkExportTarget(in, out string, force bool) error {
	name := telemetry.Sanitize([]byte(out))
	oi, err := os.Stat(out)
	if err != nil {
		return nil // missing (or unreadable: writeReplacing says why)
	}
	if ii, err := os.Stat(in); err == nil && os.SameFile(ii, oi) {
		return fmt.Errorf("export: refusing to write %s over its own input", name)
	}
	if force || !oi.Mode().IsRegular() {
		return nil
	}
	head := make([]byte, len(telemetry.CaptureMagic))
	fh, err := os.Open(out)
	if err != nil {
		return nil
	}
	n, _ := io.ReadFull(fh, head)
	fh.Close()
	head = head[:n]
	if bytes.HasPrefix(head, []byte(telemetry.CaptureMagic)) || bytes.HasPrefix(head, []byte{0x1f, 0x8b}) {
		return fmt.Errorf("export: refusing to replace %s: it holds a capture or compressed data (--force replaces it)", name)
	}
	return nil
}
