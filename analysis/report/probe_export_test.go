package report

import (
	"encoding/json"
	"html"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// FindChromium is findChromium for the external test package (tests that need packages
// which import this one, such as the tune sequencer).
var FindChromium = findChromium

// ProbePage writes page into dir with the probes of TestBrowserRendersReport, loads it
// in headless chromium and returns the plots the page holds, the plots that rendered
// with axes and data, and every page error, console error and blocked fetch.
func ProbePage(t *testing.T, bin, dir string, page []byte) (want, rendered int, errs []string) {
	t.Helper()
	probe := string(page)
	const csp = `default-src 'none'; style-src 'unsafe-inline'; img-src data:`
	if !strings.Contains(probe, csp) {
		t.Fatalf("report lacks its Content-Security-Policy %q", csp)
	}
	want = strings.Count(probe, "data-plot=")
	probe = strings.Replace(probe, csp, csp+"; script-src 'unsafe-inline'", 1)
	probe = strings.Replace(probe, "<head>", "<head>\n"+probeHead, 1)
	probe = strings.Replace(probe, "</body>", probeTail+"\n</body>", 1)
	path := filepath.Join(dir, "probe.html")
	if err := os.WriteFile(path, []byte(probe), 0o644); err != nil {
		t.Fatal(err)
	}
	dom, logs := runChromium(t, bin, filepath.Join(dir, "profile"), "--window-size=1280,2000", "--dump-dom", "file://"+path)
	m := probeRE.FindStringSubmatch(dom)
	if m == nil {
		t.Fatalf("no probe result in the dumped DOM (the probe did not run); stderr:\n%s", logs)
	}
	var res probeResult
	if err := json.Unmarshal([]byte(html.UnescapeString(m[1])), &res); err != nil {
		t.Fatalf("probe result %q: %v", m[1], err)
	}
	errs = append(errs, res.Errors...)
	for _, line := range strings.Split(logs, "\n") {
		if strings.Contains(line, "Uncaught") || strings.Contains(line, ":CONSOLE") {
			errs = append(errs, "browser console: "+line)
		}
	}
	for _, p := range res.Plots {
		if p.W > 200 && p.H > 100 && p.Texts >= 4 && p.Axes >= 2 && p.Marks >= 1 && (p.Points >= 10 || p.Marks >= 3) {
			rendered++
		} else {
			t.Logf("plot %s: %+v", p.Kind, p)
		}
	}
	return want, rendered, errs
}
