package report

import (
	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
)

// FileResult is what summary made of one file.
type FileResult struct {
	Name      string
	Summary   *analysis.Summary
	Advice    *advice.Advice
	AdviceErr error
	Err       error // unusable input
	Gates     []GateResult
}

// SummaryDoc is the JSON document of one file: the schema version, the Summary's fields,
// the advice and the gate results.
type SummaryDoc struct {
	SchemaVersion int `json:"schema_version"`
	*analysis.Summary
	Advice      *advice.Advice `json:"advice"`
	AdviceError *string        `json:"advice_error,omitempty"`
	Gates       []GateResult   `json:"gates,omitempty"`
}

// Doc returns the JSON document of r (which must have a Summary).
func (r *FileResult) Doc() SummaryDoc {
	d := SummaryDoc{SchemaVersion: SchemaVersion, Summary: r.Summary, Advice: r.Advice, Gates: r.Gates}
	if r.AdviceErr != nil {
		s := r.AdviceErr.Error()
		d.AdviceError = &s
	}
	return d
}

// Failed returns the gates of r that failed.
func (r *FileResult) Failed() []GateResult {
	var out []GateResult
	for _, g := range r.Gates {
		if g.Status == GateFail {
			out = append(out, g)
		}
	}
	return out
}

// severityRank orders the diagnostic levels; an unknown level ranks as info.
var severityRank = map[string]int{"info": 0, "warning": 1, "error": 2}

// ValidFailOn reports whether level is a level --fail-on takes.
func ValidFailOn(level string) bool { return level == "warning" || level == "error" }

// DiagnosticsAtLeast returns the diagnostics of r at level or above ("warning" or
// "error").
func (r *FileResult) DiagnosticsAtLeast(level string) []analysis.Diagnostic {
	if r.Summary == nil {
		return nil
	}
	var out []analysis.Diagnostic
	for _, d := range r.Summary.Diagnostics {
		if severityRank[d.Severity] >= severityRank[level] {
			out = append(out, d)
		}
	}
	return out
}

// ErrorDoc stands for a file summary could not use, in the array of several files and
// in JSON Lines: its name and why.
type ErrorDoc struct {
	SchemaVersion int    `json:"schema_version"`
	File          string `json:"file"`
	Error         string `json:"error"`
}
