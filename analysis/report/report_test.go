package report

import (
	"bytes"
	"encoding/xml"
	"errors"
	"flag"
	"fmt"
	"image/png"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/caploop/caploop/analysis"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata")

// golden compares got with testdata/<test name>.golden, rewriting it with -update.
func golden(t *testing.T, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", filepath.FromSlash(t.Name())+".golden")
	if *update {
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s differs from the golden file; got:\n%s\nwant:\n%s", path, got, want)
	}
}

func TestTablesGolden(t *testing.T) {
	before := Capture{Name: "before", Summary: fixtureSummary(), Advice: fixtureAdvice()}
	after := Capture{Name: "after", Summary: fixtureAfter()}
	tables := DocTables(before, "")
	tables = append(tables, CompareTable([]Capture{before, after}))
	var ids []string
	for _, tb := range tables {
		ids = append(ids, tb.ID)
		t.Run(tb.ID, func(t *testing.T) {
			var buf bytes.Buffer
			if err := RenderTable(&buf, tb); err != nil {
				t.Fatal(err)
			}
			golden(t, buf.Bytes())
		})
	}
	want := "capture board plant segments steps diagnostics rejects advice-goals advice-deadband advice-parts advice-period advice-topology advice-notes compare"
	if got := strings.Join(ids, " "); got != want {
		t.Errorf("tables:\ngot  %s\nwant %s", got, want)
	}
}

// links matches anything in a page that could make a browser fetch: src/href attributes,
// CSS url() and @import.
var links = regexp.MustCompile(`(?i)\b(src|href|xlink:href|action|srcset)\s*=|url\(|@import`)

func TestWriteHTML(t *testing.T) {
	one := []Capture{synth(benchBefore)}
	two := []Capture{synth(benchBefore), synth(benchAfter)}
	tests := []struct {
		name  string
		docs  []Capture
		plots map[string]int // data-plot kind -> count
		ids   []string       // table ids that must be present
	}{
		{"one capture", one, map[string]int{"overview": 1, "zoom": 3, "histogram": 1, "spectrum": 1, "step": 2, "ripple": 0},
			[]string{"capture", "segments", "diagnostics"}},
		{"before and after", two, map[string]int{"overview": 2, "zoom": 6, "histogram": 2, "spectrum": 2, "step": 4, "ripple": 1},
			[]string{"compare", "c1-capture", "c2-segments"}},
		{"counts only (no vref)", []Capture{inCounts(synth(benchBefore))}, map[string]int{"overview": 1, "zoom": 3, "histogram": 1, "spectrum": 1, "step": 2},
			[]string{"capture", "segments"}},
		{"volts and counts compared", []Capture{synth(benchBefore), inCounts(synth(benchAfter))}, map[string]int{"overview": 2, "ripple": 1},
			[]string{"compare"}},
		{"no waveforms", []Capture{{Name: "bare", Summary: fixtureSummary(), Advice: fixtureAdvice()}},
			map[string]int{"overview": 0, "zoom": 0}, []string{"capture", "advice-parts"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := WriteHTML(&buf, tc.docs, Options{Title: "bench reference", Note: "made by a test"}); err != nil {
				t.Fatal(err)
			}
			page := buf.String()
			if !strings.HasPrefix(page, "<!DOCTYPE html>") {
				t.Errorf("page does not start with a doctype: %.40q", page)
			}
			for kind, n := range tc.plots {
				if got := strings.Count(page, `data-plot="`+kind+`"`); got != n {
					t.Errorf("plots of kind %s: got %d, want %d", kind, got, n)
				}
			}
			for _, id := range tc.ids {
				if !strings.Contains(page, `<table id="`+id+`">`) {
					t.Errorf("table %q missing", id)
				}
			}
			if strings.Contains(strings.ToLower(page), "<script") {
				t.Errorf("page holds a script")
			}
			if m := links.FindString(page); m != "" {
				t.Errorf("page could fetch something: %q", m)
			}
			// The only URLs are the SVG namespaces.
			rest := strings.NewReplacer(`"http://www.w3.org/2000/svg"`, "", `"http://www.w3.org/1999/xlink"`, "").Replace(page)
			if i := strings.Index(rest, "://"); i >= 0 {
				t.Errorf("page names a URL: %q", rest[i:min(len(rest), i+60)])
			}
			if !strings.Contains(page, "Content-Security-Policy") {
				t.Errorf("page has no Content-Security-Policy")
			}
		})
	}
}

// inCounts turns a synthetic doc into one whose board never said vref: traces in counts,
// no volts anywhere.
func inCounts(d Capture) Capture {
	s := d.Summary
	q, _ := lsb(s)
	scale := func(v []float64) {
		for i := range v {
			v[i] /= q
		}
	}
	tr := s.Traces
	for _, v := range [][]float64{tr.SP, tr.PV, tr.PVMin, tr.PVMax} {
		scale(v)
	}
	for _, z := range tr.Zoom {
		scale(z.PV)
	}
	for _, st := range tr.StepTraces {
		scale(st.PV)
		scale(st.Fitted)
	}
	tr.Volts = false
	s.Board.VrefV = nil
	for i := range s.Segments {
		g := &s.Segments[i]
		g.SetpointV, g.MeanErrorV, g.RipplePPV, g.RippleRMSV = nil, nil, nil, nil
	}
	for i := range s.Steps {
		s.Steps[i].FromV, s.Steps[i].ToV = nil, nil
	}
	d.Name += " (counts)"
	return d
}

func TestWriteHTMLNoDocs(t *testing.T) {
	if err := WriteHTML(&bytes.Buffer{}, nil, Options{}); !errors.Is(err, ErrNoDocs) {
		t.Errorf("got %v, want ErrNoDocs", err)
	}
}

func TestHostileText(t *testing.T) {
	hostile := "<script>alert(1)</script>\x1b[2J\xff\xfe\u202egnp.exe"
	a := synth(benchBefore)
	a.Name = hostile
	a.Summary.Source = hostile
	a.Summary.FirstRejects = []analysis.Reject{{Line: 3, Reason: "</td><img src=x onerror=alert(1)>" + hostile}}
	a.Summary.RejectedLines = 1
	a.Summary.Diagnostics = append(a.Summary.Diagnostics, analysis.Diagnostic{Code: "x\"><b>", Severity: "warning", Message: hostile})
	a.Summary.Board.Mode = hostile
	b := synth(benchAfter)
	b.Name = "after " + hostile
	docs := []Capture{a, b}
	var html, svg bytes.Buffer
	if err := WriteHTML(&html, docs, Options{Title: hostile, Note: hostile}); err != nil {
		t.Fatal(err)
	}
	if err := WritePicture(&svg, docs, "svg"); err != nil {
		t.Fatal(err)
	}
	for _, out := range []struct {
		name string
		text string
	}{{"html", html.String()}, {"svg", svg.String()}} {
		t.Run(out.name, func(t *testing.T) {
			for _, bad := range []string{"<script>", "<img", "<b>", "\x1b", "\u202e", "\xff"} {
				if strings.Contains(out.text, bad) {
					t.Errorf("output holds %q", bad)
				}
			}
			if !utf8.ValidString(out.text) {
				t.Errorf("output is not valid UTF-8")
			}
			if !strings.Contains(out.text, `&lt;script&gt;alert(1)&lt;/script&gt;\x1b[2J\xff\xfe\u{202e}gnp.exe`) {
				t.Errorf("output does not show the name escaped and sanitised")
			}
		})
	}
}

func TestWritePicture(t *testing.T) {
	tests := []struct {
		name   string
		docs   []Capture
		format string
		wantW  int // PNG width in pixels: 30 cm at 96 dpi
	}{
		{"svg one", []Capture{synth(benchBefore)}, "svg", 0},
		{"svg two", []Capture{synth(benchBefore), synth(benchAfter)}, "SVG", 0},
		{"png one", []Capture{synth(benchBefore)}, "png", 1134},
		{"png two", []Capture{synth(benchBefore), synth(benchAfter)}, "png", 1134},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := WritePicture(&buf, tc.docs, tc.format); err != nil {
				t.Fatal(err)
			}
			if tc.wantW == 0 {
				paths, texts := 0, 0
				dec := xml.NewDecoder(bytes.NewReader(buf.Bytes()))
				for {
					tok, err := dec.Token()
					if err != nil {
						if err.Error() != "EOF" {
							t.Fatalf("svg does not parse: %v", err)
						}
						break
					}
					if se, ok := tok.(xml.StartElement); ok {
						switch se.Name.Local {
						case "path":
							paths++
						case "text":
							texts++
						}
					}
				}
				if paths < 50 || texts < 20 {
					t.Errorf("svg has %d paths and %d texts, want at least 50 and 20", paths, texts)
				}
				return
			}
			img, err := png.Decode(&buf)
			if err != nil {
				t.Fatalf("png does not decode: %v", err)
			}
			bnd := img.Bounds()
			if bnd.Dx() != tc.wantW {
				t.Errorf("png width: got %d, want %d", bnd.Dx(), tc.wantW)
			}
			ink := 0
			for y := bnd.Min.Y; y < bnd.Max.Y; y += 2 {
				for x := bnd.Min.X; x < bnd.Max.X; x += 2 {
					if r, g, b, _ := img.At(x, y).RGBA(); r < 0xc000 || g < 0xc000 || b < 0xc000 {
						ink++
					}
				}
			}
			if frac := float64(ink) / float64(bnd.Dx()*bnd.Dy()/4); frac < 0.01 {
				t.Errorf("png is nearly blank: %.3f of pixels inked", frac)
			}
		})
	}
}

func TestWritePictureErrors(t *testing.T) {
	tests := []struct {
		name   string
		docs   []Capture
		format string
		want   string
	}{
		{"bad format", []Capture{synth(benchBefore)}, "gif", "want svg or png"},
		{"no docs", nil, "svg", "no capture"},
		{"no traces", []Capture{{Name: "bare", Summary: fixtureSummary()}}, "png", "nothing to draw"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := WritePicture(&bytes.Buffer{}, tc.docs, tc.format)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("got %v, want an error containing %q", err, tc.want)
			}
		})
	}
}

func TestNiceTicks(t *testing.T) {
	tests := []struct {
		name   string
		lo, hi float64
		want   []string
	}{
		{"unit range", 0, 10, []string{"0", "2", "4", "6", "8", "10"}},
		{"narrow ripple around 1.46 V", 1.455, 1.49, []string{"1.455", "1.460", "1.465", "1.470", "1.475", "1.480", "1.485", "1.490"}},
		{"negative to positive", -1.3, 1.3, []string{"-1.0", "-0.5", "0.0", "0.5", "1.0"}},
		{"large", 0, 120000, []string{"0", "20000", "40000", "60000", "80000", "100000", "120000"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var got []string
			for _, tk := range (niceTicks{}).Ticks(tc.lo, tc.hi) {
				if tk.Label != "" {
					got = append(got, tk.Label)
				}
				if tk.Value < tc.lo-1e-9 || tk.Value > tc.hi+1e-9 {
					t.Errorf("tick %v outside [%v, %v]", tk.Value, tc.lo, tc.hi)
				}
			}
			if strings.Join(got, " ") != strings.Join(tc.want, " ") {
				t.Errorf("labels: got %v, want %v", got, tc.want)
			}
		})
	}
}

func TestTrimZoom(t *testing.T) {
	// A drive that charges every 10 samples from sample 3 on.
	mk := func(n, every int) analysis.ZoomTrace {
		z := analysis.ZoomTrace{}
		for i := 0; i < n; i++ {
			u := 0.0
			if i >= 3 && (i-3)%every == 0 {
				u = 1
			}
			z.T = append(z.T, float64(i)*1e-3)
			z.PV = append(z.PV, float64(i))
			z.U = append(z.U, u)
		}
		return z
	}
	tests := []struct {
		name      string
		z         analysis.ZoomTrace
		wantFirst float64 // first PV kept (= index)
		wantLen   int
	}{
		{"three cycles from the first onset", mk(200, 10), 3, 31},
		{"short cycles: at least 20 samples", mk(200, 2), 3, 20},
		{"too few onsets: unchanged", mk(25, 10), 0, 25},
		{"no drive: unchanged", analysis.ZoomTrace{T: []float64{0, 1, 2}, PV: []float64{0, 1, 2}}, 0, 3},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := trimZoom(tc.z)
			if len(got.T) != tc.wantLen || len(got.PV) != tc.wantLen {
				t.Fatalf("length: got %d/%d, want %d", len(got.T), len(got.PV), tc.wantLen)
			}
			if got.PV[0] != tc.wantFirst {
				t.Errorf("first sample: got %v, want %v", got.PV[0], tc.wantFirst)
			}
		})
	}
}

func TestZoomsBySetpoint(t *testing.T) {
	s := &analysis.Summary{
		Segments: []analysis.Segment{
			{SetpointCounts: 246, SteadySamples: 100},
			{SetpointCounts: 410, SteadySamples: 100},
			{SetpointCounts: 246, SteadySamples: 300},
			{SetpointCounts: 410, SteadySamples: 50},
		},
		Traces: &analysis.Traces{Zoom: []analysis.ZoomTrace{{Segment: 0}, {Segment: 1}, {Segment: 2}, {Segment: 3}, {Segment: 9}}},
	}
	var got []int
	for _, z := range zoomsBySetpoint(s) {
		got = append(got, z.Segment)
	}
	// 246 counts: segment 2 has the most steady samples; 410: segment 1; 9 has no segment.
	if want := []int{1, 2, 9}; fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("zooms: got segments %v, want %v", got, want)
	}
}

func TestMatchStep(t *testing.T) {
	s := &analysis.Summary{SamplePeriodS: ptr(1e-3), Steps: []analysis.StepFigures{{AtS: 3}, {AtS: 6}, {AtS: 9}}}
	tests := []struct {
		name string
		t0   float64
		want int
	}{
		{"at the second step", 6, 1},
		{"one sample after the third", 9.001, 2},
		{"between steps", 4.5, -1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			st := analysis.StepTrace{T: []float64{tc.t0, tc.t0 + 0.5}}
			if got := matchStep(s, st); got != tc.want {
				t.Errorf("got %d, want %d", got, tc.want)
			}
		})
	}
}

func TestTablesBounded(t *testing.T) {
	s := fixtureSummary()
	s.Segments = nil
	s.Steps = nil
	for i := 0; i < 500; i++ {
		s.Segments = append(s.Segments, analysis.Segment{SetpointCounts: float64(100 + i)})
		s.Steps = append(s.Steps, analysis.StepFigures{AtS: float64(i)})
	}
	s.SegmentsOmitted = 7
	d := Capture{Name: "ramp", Summary: s}
	tests := []struct {
		name     string
		table    Table
		rows     int
		lastNote string
	}{
		{"segments", segmentsTable(s, ""), maxRows + 2, "7 more segments seen but not kept by the analysis (the list is bounded)"},
		{"steps", stepsTable(s, ""), maxRows + 1, "460 more steps not shown here (caploop summary --json lists them)"},
		{"compare", CompareTable([]Capture{d, d}), 0, "488 more setpoints not compared here"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if tc.rows > 0 && len(tc.table.Rows) != tc.rows {
				t.Errorf("rows: got %d, want %d", len(tc.table.Rows), tc.rows)
			}
			last := tc.table.Rows[len(tc.table.Rows)-1]
			if last.Class != "note" || last.Cells[0] != tc.lastNote {
				t.Errorf("last row: got %q %q, want note %q", last.Class, last.Cells, tc.lastNote)
			}
		})
	}
}

func TestCompareUnits(t *testing.T) {
	seg := func(sp float64, volts bool) analysis.Segment {
		g := analysis.Segment{SetpointCounts: sp, MeanErrorCounts: ptr(-1.5)}
		if volts {
			g.MeanErrorV = ptr(-0.0073)
		}
		return g
	}
	doc := func(name string, segs ...analysis.Segment) Capture {
		return Capture{Name: name, Summary: &analysis.Summary{Segments: segs}}
	}
	tests := []struct {
		name string
		docs []Capture
		want string // the mean error cell of the first capture
	}{
		{"volts in both", []Capture{doc("a", seg(100, true)), doc("b", seg(100, true))}, "-7.3 mV"},
		{"setpoint only in the first: still volts", []Capture{doc("a", seg(100, true)), doc("b", seg(200, true))}, "-7.3 mV"},
		{"volts missing in one: counts", []Capture{doc("a", seg(100, true)), doc("b", seg(100, false))}, "-1.5 counts"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tb := CompareTable(tc.docs)
			for _, r := range tb.Rows {
				if r.Cells[0] == "mean error" {
					if r.Cells[1] != tc.want {
						t.Errorf("mean error: got %q, want %q", r.Cells[1], tc.want)
					}
					return
				}
			}
			t.Errorf("no mean error row")
		})
	}
}
