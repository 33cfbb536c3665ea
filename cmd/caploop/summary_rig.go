package main

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"text/tabwriter"

	"github.com/caploop/caploop/analysis/figure"
	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/rig"
)

// rigSchemaVersion is the schema_version of each board's document in summary DIR --json.
const rigSchemaVersion = 1

// rigDoc is one board's document of summary DIR --json: the board as the rig file lists
// it, its verdict ("pass", "fail", or "unusable" with error), and the summary document
// of its capture (absent when unusable).
type rigDoc struct {
	SchemaVersion int       `json:"schema_version"`
	Board         rig.Board `json:"board"`
	Verdict       string    `json:"verdict"`
	Error         *string   `json:"error,omitempty"`
	report.SummaryDoc
}

// isDir reports whether path is a folder.
func isDir(path string) bool {
	fi, err := os.Stat(path)
	return err == nil && fi.IsDir()
}

// rigBoards lists the boards of a rig folder: from its rig file, or, without one, every
// capture (*.cap, *.cap.gz) in it, by name.
func rigBoards(dir string) ([]rig.Board, error) {
	f, err := rig.Read(dir)
	if err == nil {
		return f.Boards, nil
	}
	if !errors.Is(err, rig.ErrNoRigFile) {
		return nil, err
	}
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("summary: %w", err)
	}
	var out []rig.Board
	for _, e := range ents {
		n := e.Name()
		if e.Type().IsRegular() && !strings.HasPrefix(n, ".") && (strings.HasSuffix(n, ".cap") || strings.HasSuffix(n, ".cap.gz")) {
			out = append(out, rig.Board{Capture: n})
		}
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Capture < out[j].Capture })
	if len(out) == 0 {
		return nil, fmt.Errorf("summary: %s has no %s and no capture (*.cap)", clean(dir), rig.FileName)
	}
	return out, nil
}

// runRigSummary summarises a rig folder: one row per board, or with --json an array of
// per-board documents. Exit code 2 when a capture cannot be used, else 1 when any board
// fails a gate.
func runRigSummary(stdout, stderr io.Writer, dir string, f *summaryFlags) error {
	gs, err := f.gates.Parse()
	if err != nil {
		return withCode(2, err)
	}
	if f.rep.wanted() {
		return withCode(2, fmt.Errorf("summary: --report and --plot draw capture files; for a rig give its captures: caploop summary %s/*.cap --report rig.html", clean(dir)))
	}
	tol, err := parseSupplyTol(f.supplyTol)
	if err != nil {
		return withCode(2, err)
	}
	boards, err := rigBoards(dir)
	if err != nil {
		return withCode(2, err)
	}
	results := make([]*report.FileResult, len(boards))
	unusable, failedBoards := 0, 0
	for i, b := range boards {
		r := summarizeFile(filepath.Join(dir, b.Capture), stderr, f.rep.quiet, tol)
		r.Name = b.Capture
		if r.Err != nil {
			unusable++
			fmt.Fprintf(stderr, "caploop: %v\n", r.Err)
		} else if r.Summary != nil {
			if !f.noAdvice {
				r.Advice, r.AdviceErr = adviceFor(r.Summary)
			}
			r.Gates = gs.Check(r.Summary)
			if gateFails(r) > 0 {
				failedBoards++
			}
		}
		results[i] = r
	}
	if f.json {
		docs := make([]rigDoc, len(boards))
		for i, r := range results {
			docs[i] = rigDoc{SchemaVersion: rigSchemaVersion, Board: boards[i], Verdict: verdictWord(r)}
			if r.Err != nil {
				s := r.Err.Error()
				docs[i].Error = &s
				continue
			}
			docs[i].SummaryDoc = report.SummaryDoc{Summary: r.Summary, Advice: r.Advice, Gates: r.Gates}
			if r.AdviceErr != nil {
				s := r.AdviceErr.Error()
				docs[i].AdviceError = &s
			}
		}
		if err := report.WriteJSON(stdout, docs, true); err != nil {
			return withCode(2, err)
		}
	} else {
		writeRigTable(stdout, dir, boards, results)
	}
	if f.junit != "" {
		err := writeOutput(f.junit, stdout, func(w io.Writer) error { return report.WriteJUnit(w, results) })
		if err != nil {
			return withCode(2, err)
		}
	}
	switch {
	case unusable > 0:
		return withCode(2, fmt.Errorf("summary: %d of %d boards' captures could not be used", unusable, len(boards)))
	case failedBoards > 0:
		return withCode(1, fmt.Errorf("summary: %d of %d boards fail a gate", failedBoards, len(boards)))
	}
	return nil
}

func gateFails(r *report.FileResult) int {
	n := 0
	for _, g := range r.Gates {
		if g.Status == report.GateFail {
			n++
		}
	}
	return n
}

// verdictWord is a board's verdict: "unusable", "fail" (a gate failed) or "pass" (every
// gate passed or was skipped, or there was none).
func verdictWord(r *report.FileResult) string {
	switch {
	case r.Err != nil || r.Summary == nil:
		return "unusable"
	case gateFails(r) > 0:
		return "fail"
	}
	return "pass"
}

// rigRow is a board's worst figures over its segments and steps.
type rigRow struct {
	tau, ripple, err, settle, cycle float64
	jumps                           int64
}

func rigRowOf(r *report.FileResult) rigRow {
	nan := math.NaN()
	row := rigRow{tau: nan, ripple: nan, err: nan, settle: nan, cycle: nan}
	worst := func(cur *float64, p *float64, abs bool) {
		if p == nil {
			return
		}
		v := *p
		if abs {
			v = math.Abs(v)
		}
		if math.IsNaN(*cur) || v > *cur {
			*cur = v
		}
	}
	s := r.Summary
	if s.Plant.TauChargeS != nil {
		row.tau = *s.Plant.TauChargeS
	}
	for i := range s.Segments {
		g := &s.Segments[i]
		worst(&row.ripple, g.RipplePPV, false)
		worst(&row.err, g.MeanErrorV, true)
		worst(&row.cycle, g.LimitCyclePeriodS, false)
		row.jumps += g.BandJumps
	}
	for i := range s.Steps {
		worst(&row.settle, s.Steps[i].SettleS, false)
	}
	return row
}

// writeRigTable writes the rig's table: one row per board with its worst figures and
// its verdict.
func writeRigTable(w io.Writer, dir string, boards []rig.Board, results []*report.FileResult) {
	fmt.Fprintf(w, "rig %s: %d boards (worst segment and step of each)\n", clean(dir), len(boards))
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "  #\tcapture\tport\tserial\tsamples\ttau charge\tripple p-p\t|mean err|\tsettle\tcycle\tjumps\tverdict\t")
	for i, r := range results {
		b := boards[i]
		lead := fmt.Sprintf("  %d\t%s\t%s\t%s\t", i+1, telemetry.SanitizeN([]byte(b.Capture), 40),
			dash(telemetry.SanitizeN([]byte(b.Port), 30)), dash(telemetry.SanitizeN([]byte(b.Serial), 24)))
		if r.Err != nil || r.Summary == nil {
			fmt.Fprintf(tw, "%sunusable\t\t\t\t\t\t\tunusable\t\n", lead)
			continue
		}
		row := rigRowOf(r)
		v := verdictWord(r)
		if n := gateFails(r); n > 0 {
			v = fmt.Sprintf("FAIL (%d gates)", n)
		}
		fmt.Fprintf(tw, "%s%d\t%s\t%s\t%s\t%s\t%s\t%d\t%s\t\n", lead, r.Summary.Samples,
			figure.Value(row.tau, "s"), figure.Value(row.ripple, "V"), figure.Value(row.err, "V"),
			figure.Value(row.settle, "s"), figure.Value(row.cycle, "s"), row.jumps, v)
	}
	tw.Flush()
	for i, r := range results {
		for _, g := range r.Gates {
			if g.Status == report.GateFail {
				fmt.Fprintf(w, "board %d %s: %s %s: %s\n", i+1, telemetry.SanitizeN([]byte(boards[i].Capture), 40), g.Gate, g.Scope, g.Message)
				break
			}
		}
	}
}

// oneRigFolder reports whether the arguments name a rig folder: one folder alone. A
// folder among other arguments is an error.
func oneRigFolder(files []string) (string, bool, error) {
	for _, f := range files {
		if f != "-" && isDir(f) {
			if len(files) > 1 {
				return "", false, fmt.Errorf("summary: %s is a folder; give one rig folder alone, or capture files", clean(f))
			}
			return f, true, nil
		}
	}
	return "", false, nil
}
