package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/telemetry"
)

func init() { commands = append(commands, newSummaryCmd) }

// summaryFlags are the flags of `caploop summary`.
type summaryFlags struct {
	json      bool
	junit     string
	detail    bool
	noAdvice  bool
	supplyTol string
	gates     report.GateText
	rep       reportFlags
}

func newSummaryCmd() *cobra.Command {
	var f summaryFlags
	cmd := &cobra.Command{
		Use:   "summary FILE...|DIR",
		Short: "measure a capture: ripple, duty, limit cycle, real RC, diagnostics, CI gates",
		Long: `summary reads telemetry files (plain lines, CSV/TSV with a header, or captures made by
caploop record; .gz is read directly; - is standard input) in one streaming pass and
prints what the loop did: per setpoint segment the mean error, ripple peak-to-peak and
rms, the drive duty, the limit-cycle period, deadband entries and band jumps; per setpoint
step the rise, settling, overshoot and slew; the identified plant (the real tau for
charge, discharge and hold, v_high and v_low with 95 % intervals, ADC noise); and
diagnostics as plain sentences, followed by the advice on deadband and R and C.

Gates turn it into a CI check: the exit code is 1 when a gate fails, 2 when a file
cannot be used (missing, unreadable, no samples), 0 otherwise. --junit writes a JUnit
XML report with one test case per gate per segment (or step).

With several files, a table gives one row per file and compares each with the first
(before and after tuning); --detail adds each file's full text.

With a folder (a test rig recorded by caploop record PORT... --out DIR), one table gives
a row per board listed in its rig.json (or per *.cap capture when there is none) with
its verdict; --json gives an array with one document per board. The exit code is 1 when
any board fails a gate, 2 when a capture cannot be used.`,
		Example: `  caploop summary greenhouse-bias.cap
  caploop summary --json bench.log.gz > bench.json
  caploop summary --max-ripple 20mV --max-settle 150ms --max-error 5mV --max-jumps 0 --junit gates.xml run.cap
  caploop summary before.cap after.cap
  caploop summary rig1 --max-ripple 20mV --json > rig1.json`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runSummary(cmd.OutOrStdout(), cmd.ErrOrStderr(), args, &f, strings.Join(append([]string{"caploop summary"}, args...), " "))
		},
	}
	fl := cmd.Flags()
	fl.BoolVar(&f.json, "json", false, "print one JSON document per file instead of text")
	fl.StringVar(&f.junit, "junit", "", "write a JUnit XML report of the gates to this file")
	fl.BoolVar(&f.detail, "detail", false, "with several files, print each file's full text too")
	fl.BoolVar(&f.noAdvice, "no-advice", false, "leave out the advice block")
	fl.StringVar(&f.supplyTol, "supply-tol", "5%", "the supply's tolerance: a load or buffer drop seen only in v_high must exceed it (e.g. 5%, 1%)")
	registerGates(fl, &f.gates)
	f.rep.register(fl)
	return cmd
}

func runSummary(stdout, stderr io.Writer, files []string, f *summaryFlags, note string) error {
	if dir, ok, err := oneRigFolder(files); ok || err != nil {
		if err != nil {
			return withCode(2, err)
		}
		return runRigSummary(stdout, stderr, dir, f)
	}
	gs, err := f.gates.Parse()
	if err != nil {
		return withCode(2, err)
	}
	if err := f.rep.check(); err != nil {
		return err
	}
	tol, err := parseSupplyTol(f.supplyTol)
	if err != nil {
		return withCode(2, err)
	}
	var results []*report.FileResult
	unusable, failed := 0, 0
	for _, name := range files {
		r := summarizeFile(name, stderr, f.rep.quiet, tol)
		if r.Err != nil {
			unusable++
			fmt.Fprintf(stderr, "caploop: %v\n", r.Err)
		}
		if r.Summary != nil && r.Err == nil {
			if !f.noAdvice {
				r.Advice, r.AdviceErr = adviceFor(r.Summary)
			}
			r.Gates = gs.Check(r.Summary)
			for _, g := range r.Gates {
				if g.Status == report.GateFail {
					failed++
				}
			}
		}
		results = append(results, r)
	}

	switch {
	case f.json:
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		for _, r := range results {
			if r.Summary == nil || r.Err != nil {
				continue
			}
			d := report.SummaryDoc{Summary: r.Summary, Advice: r.Advice, Gates: r.Gates}
			if r.AdviceErr != nil {
				s := r.AdviceErr.Error()
				d.AdviceError = &s
			}
			if err := enc.Encode(d); err != nil {
				return withCode(2, err)
			}
		}
	case len(results) == 1:
		if r := results[0]; r.Err == nil {
			report.WriteFileText(stdout, r)
		}
	default:
		if f.detail {
			for _, r := range results {
				if r.Err == nil {
					report.WriteFileText(stdout, r)
					fmt.Fprintln(stdout)
				}
			}
		}
		report.WriteComparison(stdout, results)
	}

	if f.junit != "" {
		err := writeFileAtomic(f.junit, func(w io.Writer) error { return report.WriteJUnit(w, results) })
		if err != nil {
			return withCode(2, err)
		}
	}
	if f.rep.wanted() {
		var docs []report.Capture
		for _, r := range results {
			if r.Err == nil {
				docs = append(docs, report.Capture{Name: r.Name, Summary: r.Summary, Advice: r.Advice})
			}
		}
		if len(docs) > 0 {
			if err := f.rep.write(docs, note); err != nil {
				return err
			}
		}
	}
	switch {
	case unusable > 0:
		return withCode(2, fmt.Errorf("summary: %d of %d files could not be used", unusable, len(files)))
	case failed > 0:
		return withCode(1, fmt.Errorf("summary: %s failed", figure.Count(failed, "gate")))
	}
	return nil
}

// summarizeFile runs the whole-file pass over one file. err is set when the file cannot
// be used: it cannot be opened or read to its end, or holds no sample.
func summarizeFile(name string, stderr io.Writer, quiet bool, supplyTol float64) *report.FileResult {
	r := &report.FileResult{Name: name}
	src, err := openWithProgress(name, stderr, quiet)
	if err != nil {
		r.Err = err
		return r
	}
	defer src.Close()
	sc := telemetry.NewScanner(src)
	sc.Name = name
	r.Summary, err = analysis.Summarize(sc, analysis.Options{Source: name, SupplyTol: supplyTol})
	switch {
	case errors.Is(err, analysis.ErrNoSamples):
		st := sc.Stats()
		msg := fmt.Sprintf("%s: no samples in %s", name, figure.Count(st.Lines, "line"))
		if len(st.FirstRejects) > 0 {
			msg += fmt.Sprintf(" (%d rejected; first: %v)", st.Rejected, st.FirstRejects[0])
		}
		r.Err = errors.New("summary: " + msg)
	case err != nil:
		line := sc.Stats().Lines
		r.Err = fmt.Errorf("summary: %s: read stopped after line %d: %w", name, line, err)
	}
	return r
}

// adviceFor attaches the advice block to a summary (goals at their defaults).
func adviceFor(s *analysis.Summary) (*advice.Advice, error) {
	return advice.FromSummary(s, advice.Goals{})
}

// parseSupplyTol reads --supply-tol: a percentage with its unit ("5%"), above 0 and
// below 50 %.
func parseSupplyTol(v string) (float64, error) {
	num, ok := strings.CutSuffix(strings.TrimSpace(v), "%")
	if !ok {
		return 0, fmt.Errorf("--supply-tol %q: give it in percent, e.g. 5%%", v)
	}
	x, err := strconv.ParseFloat(strings.TrimSpace(num), 64)
	if err != nil || !(x > 0 && x < 50) {
		return 0, fmt.Errorf("--supply-tol %q: want a percentage above 0 and below 50 %%", v)
	}
	return x / 100, nil
}
