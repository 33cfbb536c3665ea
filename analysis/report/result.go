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

// SummaryDoc is the JSON document of one file: the Summary's fields, the advice and the
// gate results.
type SummaryDoc struct {
	*analysis.Summary
	Advice      *advice.Advice `json:"advice"`
	AdviceError *string        `json:"advice_error,omitempty"`
	Gates       []GateResult   `json:"gates,omitempty"`
}
