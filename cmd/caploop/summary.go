package main

import (
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
	jsonl     bool
	failOn    string
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

Gates turn it into a CI check: the exit code is 1 when a gate fails (or, with
--fail-on, a diagnostic at that level is present), 2 when a file cannot be used
(missing, unreadable, no samples), a flag is wrong or an output cannot be written, 0
otherwise. A gate's limit carries its unit (20mV, 150ms); a bare number or an empty
value is refused. The count gates (--max-jumps, --max-rejected, --max-gaps) take plain
whole numbers. --junit writes a JUnit XML report with one test case per gate per
segment (or step); --junit - (or --report -) prints that file on standard output
instead of the text.

--json prints one document for one file and an array for several; --jsonl one compact
document per line. Each carries schema_version; numbers keep 6 significant digits. A
file that cannot be used is {"schema_version": 1, "file": ..., "error": ...} among them.
Derived files (--junit, --report, --plot) are replaced; a path that is a symbolic
link, a device or a FIFO is refused.

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
			if err := emptyGateFlags(cmd.Flags()); err != nil {
				return withCode(2, err)
			}
			return runSummary(cmd.OutOrStdout(), cmd.ErrOrStderr(), args, &f, strings.Join(append([]string{"caploop summary"}, args...), " "))
		},
	}
	fl := cmd.Flags()
	fl.BoolVar(&f.json, "json", false, "print JSON instead of text: one document for one file, an array for several")
	fl.BoolVar(&f.jsonl, "jsonl", false, "print JSON Lines instead of text: one compact document per file, one per line")
	fl.StringVar(&f.failOn, "fail-on", "", "exit 1 when a diagnostic at this level or above is present: error or warning (default: diagnostics never fail)")
	fl.StringVar(&f.junit, "junit", "", "write a JUnit XML report of the gates to this file (- = standard output)")
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
	if f.failOn != "" && !report.ValidFailOn(f.failOn) {
		return withCode(2, fmt.Errorf("summary: --fail-on %q: want error or warning", clean(f.failOn)))
	}
	if f.json && f.jsonl {
		return withCode(2, errors.New("summary: give --json or --jsonl, not both"))
	}
	toStdout := 0
	for _, p := range []string{f.junit, f.rep.report} {
		if p == "-" {
			toStdout++
		}
	}
	switch {
	case toStdout > 1:
		return withCode(2, errors.New("summary: only one of --junit and --report can be - (standard output)"))
	case toStdout == 1 && (f.json || f.jsonl):
		return withCode(2, errors.New("summary: JSON and a --junit or --report on - would share standard output; write one of them to a file"))
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
			fmt.Fprintf(stderr, "caploop: %s\n", errorText(r.Err))
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

	// With a derived file on standard output, that file is the only thing printed there.
	text := stdout
	if toStdout > 0 {
		text = io.Discard
	}
	out := newCheckedWriter(text)
	if !f.json && !f.jsonl {
		out = newTextWriter(text)
	}
	switch {
	case f.json || f.jsonl:
		writeSummaryJSON(out, results, f.jsonl)
	case len(results) == 1:
		if r := results[0]; r.Err == nil {
			report.WriteFileText(out, r)
		}
	default:
		if f.detail {
			for _, r := range results {
				if r.Err == nil {
					report.WriteFileText(out, r)
					fmt.Fprintln(out)
				}
			}
		}
		report.WriteComparison(out, results)
	}
	if err := out.Close("summary"); err != nil {
		return err
	}

	if f.junit != "" {
		err := writeOutput(f.junit, stdout, func(w io.Writer) error { return report.WriteJUnit(w, results) })
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
			if err := f.rep.write(docs, note, stdout); err != nil {
				return err
			}
		}
	}
	switch {
	case unusable > 0:
		return withCode(2, fmt.Errorf("summary: %d of %d files could not be used", unusable, len(files)))
	case failed > 0:
		return withCode(1, fmt.Errorf("summary: %s failed: %s", figure.Count(failed, "gate"), failedGates(results)))
	}
	if f.failOn != "" {
		return failOn(results, f.failOn)
	}
	return nil
}

// writeSummaryJSON writes the JSON of the files: one document for one file, an array
// for several, or one compact document per line with jsonl. A file that could not be
// used is an entry {schema_version, file, error} in the array and in JSON Lines (alone,
// it prints nothing: its error is on standard error and the exit code is 2). Write
// errors are kept by out.
func writeSummaryJSON(out io.Writer, results []*report.FileResult, jsonl bool) {
	var docs []any
	usable := 0
	for _, r := range results {
		switch {
		case r.Summary != nil && r.Err == nil:
			docs = append(docs, r.Doc())
			usable++
		case r.Err != nil:
			docs = append(docs, report.ErrorDoc{SchemaVersion: report.SchemaVersion,
				File: telemetry.Sanitize([]byte(r.Name)), Error: errorText(r.Err)})
		}
	}
	if len(results) == 1 && usable == 0 && !jsonl {
		return
	}
	var err error
	switch {
	case jsonl:
		for _, d := range docs {
			if err = report.WriteJSON(out, d, false); err != nil {
				break
			}
		}
	case len(results) == 1 && len(docs) == 1 && usable == 1:
		err = report.WriteJSON(out, docs[0], true)
	case len(docs) > 0:
		err = report.WriteJSON(out, docs, true)
	}
	if err != nil {
		if cw, ok := out.(*checkedWriter); ok && cw.err == nil {
			cw.err = err
		}
	}
}

// failedGates names the failing gates with their files: "run.cap: max-ripple segment 2
// (2.93 V), ...", at most five, then how many more.
func failedGates(results []*report.FileResult) string {
	var parts []string
	n := 0
	for _, r := range results {
		for _, g := range r.Failed() {
			n++
			if n <= 5 {
				parts = append(parts, fmt.Sprintf("%s: %s %s", clean(r.Name), g.Gate, g.Scope))
			}
		}
	}
	if n > 5 {
		parts = append(parts, fmt.Sprintf("and %d more", n-5))
	}
	return strings.Join(parts, "; ")
}

// failOn returns exit code 1 when a file has a diagnostic at level or above.
func failOn(results []*report.FileResult, level string) error {
	var parts []string
	n := 0
	for _, r := range results {
		for _, d := range r.DiagnosticsAtLeast(level) {
			n++
			if n <= 5 {
				parts = append(parts, fmt.Sprintf("%s: %s %s", clean(r.Name), d.Severity, d.Code))
			}
		}
	}
	if n == 0 {
		return nil
	}
	if n > 5 {
		parts = append(parts, fmt.Sprintf("and %d more", n-5))
	}
	return withCode(1, fmt.Errorf("summary: --fail-on %s: %s at %s or above: %s", level, figure.Count(n, "diagnostic"), level, strings.Join(parts, "; ")))
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
		msg := fmt.Sprintf("%s: no samples in %s", clean(name), figure.Count(st.Lines, "line"))
		if len(st.FirstRejects) > 0 {
			msg += fmt.Sprintf(" (%d rejected; first: %v)", st.Rejected, st.FirstRejects[0])
		}
		r.Err = errors.New("summary: " + msg)
	case err != nil:
		line := sc.Stats().Lines
		r.Err = fmt.Errorf("summary: %s: read stopped after line %d: %w", clean(name), line, err)
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
