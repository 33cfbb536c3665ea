package report

import (
	"bytes"
	"io"
	"path/filepath"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/telemetry"
)

// captures lists the demo and test captures of the module's testdata folder (made by
// the virtual board, see testdata/README.md).
func captures(tb testing.TB) []string {
	tb.Helper()
	var out []string
	for _, pat := range []string{"*.txt", "*.cap", "*.gz", "*.csv"} {
		m, err := filepath.Glob(filepath.Join("..", "..", "testdata", pat))
		if err != nil {
			tb.Fatal(err)
		}
		out = append(out, m...)
	}
	return out
}

// summarizeCapture runs the whole-file pass and the advice over one capture, as
// `caploop summary` does.
func summarizeCapture(tb testing.TB, path string) Capture {
	tb.Helper()
	src, err := telemetry.OpenFile(path)
	if err != nil {
		tb.Fatal(err)
	}
	defer src.Close()
	sc := telemetry.NewScanner(src)
	sc.Name = filepath.Base(path)
	s, err := analysis.Summarize(sc, analysis.Options{Source: sc.Name})
	if err != nil {
		tb.Fatalf("%s: %v", path, err)
	}
	d := Capture{Name: sc.Name, Summary: s}
	if a, err := advice.FromSummary(s, advice.Goals{}); err == nil {
		d.Advice = a
	}
	return d
}

// TestTestdataReports makes the report and the picture of every testdata capture and
// checks that each has its overview and at least one zoom.
func TestTestdataReports(t *testing.T) {
	files := captures(t)
	if len(files) == 0 {
		t.Skip("no captures in testdata")
	}
	for _, path := range files {
		t.Run(filepath.Base(path), func(t *testing.T) {
			d := summarizeCapture(t, path)
			var page bytes.Buffer
			if err := WriteHTML(&page, []Capture{d}, Options{}); err != nil {
				t.Fatal(err)
			}
			for _, kind := range []string{"overview", "zoom"} {
				if !strings.Contains(page.String(), `data-plot="`+kind+`"`) {
					t.Errorf("no %s plot", kind)
				}
			}
			if err := WritePicture(io.Discard, []Capture{d}, "png"); err != nil {
				t.Errorf("picture: %v", err)
			}
		})
	}
}

// BenchmarkReport makes the report of each testdata capture: "full" is what
// `caploop summary FILE --report out.html` does (read, summarise, advise, write the
// page); "html" and "png" are the report and the picture alone from a ready summary.
// The target is under a second per capture for "full".
func BenchmarkReport(b *testing.B) {
	files := captures(b)
	if len(files) == 0 {
		b.Skip("no captures in testdata")
	}
	for _, path := range files {
		name := filepath.Base(path)
		b.Run(name+"/full", func(b *testing.B) {
			for b.Loop() {
				d := summarizeCapture(b, path)
				if err := WriteHTML(io.Discard, []Capture{d}, Options{}); err != nil {
					b.Fatal(err)
				}
			}
		})
		d := summarizeCapture(b, path)
		b.Run(name+"/html", func(b *testing.B) {
			var n int
			for b.Loop() {
				var buf bytes.Buffer
				if err := WriteHTML(&buf, []Capture{d}, Options{}); err != nil {
					b.Fatal(err)
				}
				n = buf.Len()
			}
			b.ReportMetric(float64(n), "page-bytes")
		})
		b.Run(name+"/png", func(b *testing.B) {
			for b.Loop() {
				if err := WritePicture(io.Discard, []Capture{d}, "png"); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
