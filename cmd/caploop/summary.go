package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strings"

	"github.com/spf13/cobra"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/internal/words"
	"github.com/caploop/caploop/telemetry"
)

func init() { commands = append(commands, newSummaryCmd) }

// summaryFlags are the flags of `caploop summary`.
type summaryFlags struct {
	json     bool
	junit    string
	detail   bool
	noAdvice bool
	gates    gateFlags
	rep      reportFlags
}

func newSummaryCmd() *cobra.Command {
	var f summaryFlags
	cmd := &cobra.Command{
		Use:   "summary FILE...",
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
(before and after tuning); --detail adds each file's full text.`,
		Example: `  caploop summary greenhouse-bias.cap
  caploop summary --json bench.log.gz > bench.json
  caploop summary --max-ripple 20mV --max-settle 150ms --max-error 5mV --max-jumps 0 --junit gates.xml run.cap
  caploop summary before.cap after.cap`,
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
	f.gates.register(fl)
	f.rep.register(fl)
	return cmd
}

// fileResult is what summary made of one file.
type fileResult struct {
	name   string
	sum    *analysis.Summary
	adv    *advice.Advice
	advErr error
	err    error // unusable input
	gates  []gateResult
}

// summaryDoc is the JSON document of one file: the Summary's fields, the advice and the
// gate results.
type summaryDoc struct {
	*analysis.Summary
	Advice      *advice.Advice `json:"advice"`
	AdviceError *string        `json:"advice_error,omitempty"`
	Gates       []gateResult   `json:"gates,omitempty"`
}

func runSummary(stdout, stderr io.Writer, files []string, f *summaryFlags, note string) error {
	gs, err := f.gates.parse()
	if err != nil {
		return withCode(2, err)
	}
	if err := f.rep.check(); err != nil {
		return err
	}
	var results []*fileResult
	unusable, failed := 0, 0
	for _, name := range files {
		r := summarizeFile(name, stderr, f.rep.quiet)
		if r.err != nil {
			unusable++
			fmt.Fprintf(stderr, "caploop: %v\n", r.err)
		}
		if r.sum != nil && r.err == nil {
			if !f.noAdvice {
				r.adv, r.advErr = adviceFor(r.sum)
			}
			r.gates = gs.check(r.sum)
			for _, g := range r.gates {
				if g.Status == gateFail {
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
			if r.sum == nil || r.err != nil {
				continue
			}
			d := summaryDoc{Summary: r.sum, Advice: r.adv, Gates: r.gates}
			if r.advErr != nil {
				s := r.advErr.Error()
				d.AdviceError = &s
			}
			if err := enc.Encode(d); err != nil {
				return withCode(2, err)
			}
		}
	case len(results) == 1:
		if r := results[0]; r.err == nil {
			writeFileText(stdout, r)
		}
	default:
		if f.detail {
			for _, r := range results {
				if r.err == nil {
					writeFileText(stdout, r)
					fmt.Fprintln(stdout)
				}
			}
		}
		writeComparison(stdout, results)
	}

	if f.junit != "" {
		err := writeFileAtomic(f.junit, func(w io.Writer) error { return writeJUnit(w, results) })
		if err != nil {
			return withCode(2, err)
		}
	}
	if f.rep.wanted() {
		var docs []report.Doc
		for _, r := range results {
			if r.err == nil {
				docs = append(docs, report.Doc{Name: r.name, Summary: r.sum, Advice: r.adv})
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
		return withCode(1, fmt.Errorf("summary: %s failed", words.Count(failed, "gate")))
	}
	return nil
}

// summarizeFile runs the whole-file pass over one file. err is set when the file cannot
// be used: it cannot be opened or read to its end, or holds no sample.
func summarizeFile(name string, stderr io.Writer, quiet bool) *fileResult {
	r := &fileResult{name: name}
	src, err := openWithProgress(name, stderr, quiet)
	if err != nil {
		r.err = err
		return r
	}
	defer src.Close()
	sc := telemetry.NewScanner(src)
	sc.Name = name
	r.sum, err = analysis.Summarize(sc, analysis.Options{Source: name})
	switch {
	case errors.Is(err, analysis.ErrNoSamples):
		st := sc.Stats()
		msg := fmt.Sprintf("%s: no samples in %s", name, words.Count(st.Lines, "line"))
		if len(st.FirstRejects) > 0 {
			msg += fmt.Sprintf(" (%d rejected; first: %v)", st.Rejected, st.FirstRejects[0])
		}
		r.err = errors.New("summary: " + msg)
	case err != nil:
		line := sc.Stats().Lines
		r.err = fmt.Errorf("summary: %s: read stopped after line %d: %w", name, line, err)
	}
	return r
}

// adviceFor attaches the advice block to a summary (goals at their defaults).
func adviceFor(s *analysis.Summary) (*advice.Advice, error) {
	return advice.FromSummary(s, advice.Goals{})
}
