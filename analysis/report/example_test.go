package report_test

import (
	"bytes"
	"fmt"
	"strings"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/report"
)

// A report of one capture. Without waveforms (Summary.Traces nil) the page holds the
// tables only; the accumulator fills Traces for the plots.
func ExampleWriteHTML() {
	vref, bits := 5.0, 10
	s := &analysis.Summary{
		Source:  "greenhouse-bias.txt",
		Samples: 6000,
		Board:   analysis.Board{VrefV: &vref, ADCBits: &bits, Mode: "three-state"},
		Segments: []analysis.Segment{
			{SetpointCounts: 246, StartS: 0, EndS: 6, SteadySamples: 5800},
		},
	}
	var page bytes.Buffer
	err := report.WriteHTML(&page, []report.Capture{{Name: "greenhouse-bias.txt", Summary: s}}, report.Options{Title: "greenhouse bias"})
	fmt.Println(err)
	fmt.Println(strings.Count(page.String(), "<table"), "tables")
	fmt.Println(strings.Contains(page.String(), "<script"))
	// Output:
	// <nil>
	// 5 tables
	// false
}
