package report

import (
	"bufio"
	"errors"
	"fmt"
	"html/template"
	"io"
	"strconv"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/analysis/figure"
)

// Capture is one capture in a report: its name (the file name, or a label such as
// "before"), its summary and, when computed, its advice.
type Capture struct {
	Name    string
	Summary *analysis.Summary
	Advice  *advice.Advice
}

// Options tune a report. The zero value is a report with the default title and limits.
type Options struct {
	Title    string // page title; "caploop report" when empty
	Note     string // one line under the title, e.g. the command that made the report
	MaxZooms int    // segment zooms drawn per capture; 0 means 8
	MaxSteps int    // step plots drawn per capture; 0 means 8
}

// ErrNoDocs is returned when a report is asked for no capture at all.
var ErrNoDocs = errors.New("report: no capture to report")

// figureHTML is one rendered chart in the page.
type figureHTML struct {
	Kind    string
	Caption string
	SVG     template.HTML // produced by gonum's SVG canvas, which escapes its text
	Wide    bool
}

type docHTML struct {
	ID      string
	Name    string
	Figures []figureHTML
	Missing []string // plots that could not be drawn, and why
	Tables  []Table
}

type pageHTML struct {
	Title   string
	Note    string
	Names   []string
	Compare *Table
	Overlay []figureHTML
	Docs    []docHTML
}

// WriteHTML writes one self-contained HTML page for docs: inline CSS and inline SVG, no
// script and no outside fetch (a Content-Security-Policy forbids them), so it opens
// offline. With two or more docs the page starts with a side-by-side table of their
// figures and an overlay of their steady ripple.
func WriteHTML(w io.Writer, docs []Capture, opts Options) error {
	if len(docs) == 0 {
		return ErrNoDocs
	}
	page, err := buildPage(docs, opts)
	if err != nil {
		return err
	}
	bw := bufio.NewWriterSize(w, 64<<10)
	if err := pageTmpl.Execute(bw, page); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}

func render(c chart) (figureHTML, error) {
	s, err := c.svg()
	if err != nil {
		return figureHTML{}, err
	}
	return figureHTML{Kind: c.kind, Caption: c.caption, SVG: template.HTML(s), Wide: c.kind == "overview"}, nil
}

func buildPage(docs []Capture, opts Options) (*pageHTML, error) {
	if opts.Title == "" {
		opts.Title = "caploop report"
	}
	if opts.MaxZooms <= 0 {
		opts.MaxZooms = 8
	}
	if opts.MaxSteps <= 0 {
		opts.MaxSteps = 8
	}
	page := &pageHTML{Title: clean(opts.Title), Note: clean(opts.Note)}
	for _, d := range docs {
		page.Names = append(page.Names, clean(d.Name))
	}
	if len(docs) > 1 {
		t := CompareTable(docs)
		page.Compare = &t
		if c, ok := rippleChart(docs); ok {
			f, err := render(c)
			if err != nil {
				return nil, err
			}
			page.Overlay = append(page.Overlay, f)
		}
	}
	for i, d := range docs {
		prefix := ""
		if len(docs) > 1 {
			prefix = "c" + strconv.Itoa(i+1) + "-"
		}
		dh := docHTML{ID: prefix + "capture-section", Name: clean(d.Name)}
		if d.Summary == nil {
			dh.Missing = append(dh.Missing, "no summary")
			page.Docs = append(page.Docs, dh)
			continue
		}
		charts, missing := docCharts(d.Summary, opts)
		dh.Missing = missing
		for _, c := range charts {
			f, err := render(c)
			if err != nil {
				return nil, err
			}
			dh.Figures = append(dh.Figures, f)
		}
		dh.Tables = DocTables(d, prefix)
		page.Docs = append(page.Docs, dh)
	}
	return page, nil
}

// docCharts returns the charts of one capture and, for each chart that cannot be drawn,
// a sentence saying why.
func docCharts(s *analysis.Summary, opts Options) (charts []chart, missing []string) {
	if s.Traces == nil {
		return nil, []string{"no waveforms were kept for this capture, so there are no plots"}
	}
	if c, ok := overviewChart(s, "Setpoint and measurement"); ok {
		charts = append(charts, c)
	} else {
		missing = append(missing, "too few samples for the overview plot")
	}
	nz := 0
	zooms := zoomsBySetpoint(s)
	if n := len(s.Traces.Zoom) - len(zooms); n > 0 {
		missing = append(missing, fmt.Sprintf("%s of segments at a setpoint already shown %s left out", figure.Count(n, "zoom"), figure.Pick(n, "is", "are")))
	}
	for _, z := range zooms {
		if nz == opts.MaxZooms {
			missing = append(missing, fmt.Sprintf("%d more segment zooms not drawn", len(zooms)-nz))
			break
		}
		if c, ok := zoomChart(s, z); ok {
			charts = append(charts, c)
			nz++
		}
	}
	if nz == 0 {
		missing = append(missing, "no steady part long enough for a ripple zoom")
	}
	if c, ok := histogramChart(s); ok {
		charts = append(charts, c)
	} else {
		missing = append(missing, "no steady samples for the error histogram")
	}
	if c, ok := spectrumChart(s); ok {
		charts = append(charts, c)
	} else {
		missing = append(missing, "no steady part long enough for the ripple spectrum")
	}
	ns := 0
	for _, st := range s.Traces.StepTraces {
		if ns == opts.MaxSteps {
			missing = append(missing, figure.Count(len(s.Traces.StepTraces)-ns, "more step")+" not drawn")
			break
		}
		if c, ok := stepChart(s, st); ok {
			charts = append(charts, c)
			ns++
		}
	}
	return charts, missing
}

// RenderTable writes one table as an HTML fragment, escaping every cell.
func RenderTable(w io.Writer, t Table) error {
	return pageTmpl.ExecuteTemplate(w, "table", t)
}

var pageTmpl = template.Must(template.New("page").Funcs(template.FuncMap{
	"span": func(t Table) int { return len(t.Head) },
}).Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="default-src 'none'; style-src 'unsafe-inline'; img-src data:">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{.Title}}</title>
<style>
body { font: 14px/1.4 system-ui, sans-serif; color: #1a1a1a; margin: 1.5em auto; max-width: 1400px; padding: 0 1em; }
h1 { font-size: 1.5em; margin-bottom: 0.2em; }
h2 { font-size: 1.25em; border-bottom: 2px solid #1f5fa8; padding-bottom: 0.2em; margin-top: 2em; }
.note { color: #555; margin-top: 0; }
.plots { display: flex; flex-wrap: wrap; gap: 1em; }
figure.plot { margin: 0; flex: 0 1 600px; min-width: 320px; }
figure.plot.wide { flex-basis: 100%; max-width: 100%; }
figure.plot svg { width: 100%; height: auto; display: block; background: #fff; }
.tables { display: flex; flex-wrap: wrap; gap: 1.5em; align-items: flex-start; }
.scroll { overflow-x: auto; max-width: 100%; }
table { border-collapse: collapse; font-size: 0.9em; margin-top: 1em; }
caption { text-align: left; font-weight: 600; padding-bottom: 0.3em; }
th, td { border: 1px solid #d0d0d0; padding: 0.25em 0.6em; text-align: left; vertical-align: top; }
th { background: #eef3fa; }
td { font-variant-numeric: tabular-nums; }
tr.warning td { background: #fff6d6; }
tr.error td { background: #fde2de; }
tr.better td { background: #e3f4e3; }
tr.current td { background: #eef3fa; font-weight: 600; }
tr.group th { background: #dde7f5; }
tr.note td { color: #555; font-style: italic; }
ul.missing { color: #666; font-size: 0.9em; }
</style>
</head>
<body>
<h1>{{.Title}}</h1>
{{if .Note}}<p class="note">{{.Note}}</p>{{end}}
<p class="note">Captures: {{range $i, $n := .Names}}{{if $i}}, {{end}}<strong>{{$n}}</strong>{{end}}</p>
{{if .Compare}}
<section id="comparison">
<h2>Comparison</h2>
<div class="plots">
{{range .Overlay}}{{template "figure" .}}{{end}}
<div class="scroll">{{template "table" .Compare}}</div>
</div>
</section>
{{end}}
{{range .Docs}}
<section id="{{.ID}}">
<h2>{{.Name}}</h2>
<div class="plots">
{{range .Figures}}{{template "figure" .}}{{end}}
</div>
{{if .Missing}}<ul class="missing">{{range .Missing}}<li>{{.}}</li>{{end}}</ul>{{end}}
<div class="tables">
{{range .Tables}}<div class="scroll">{{template "table" .}}</div>
{{end}}
</div>
</section>
{{end}}
</body>
</html>
{{define "figure"}}<figure class="plot{{if .Wide}} wide{{end}}" data-plot="{{.Kind}}">
{{.SVG}}
</figure>
{{end}}
{{define "table"}}<table id="{{.ID}}">
<caption>{{.Caption}}</caption>
<thead><tr>{{range .Head}}<th>{{.}}</th>{{end}}</tr></thead>
<tbody>
{{- $n := span .}}
{{- range .Rows}}
{{if eq .Class "group"}}<tr class="group"><th colspan="{{$n}}">{{index .Cells 0}}</th></tr>{{else if eq .Class "note"}}<tr class="note"><td colspan="{{$n}}">{{index .Cells 0}}</td></tr>{{else}}<tr{{if .Class}} class="{{.Class}}"{{end}}>{{range .Cells}}<td>{{.}}</td>{{end}}</tr>{{end}}
{{- end}}
</tbody>
</table>
{{end}}`))
