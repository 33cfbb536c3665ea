package report

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"html"
	"image/color"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"
)

// findChromium returns the headless browser the report test uses: Debian's chromium
// (installed by .ci/run). Without it the test skips, except under CI=true where it fails.
func findChromium(t *testing.T) string {
	t.Helper()
	if testing.Short() {
		t.Skip("-short: skips the report browser test (it runs chromium)")
	}
	for _, name := range []string{"chromium", "chromium-browser", "/usr/bin/chromium"} {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	if os.Getenv("CI") == "true" {
		t.Fatal("chromium not found: the report browser test needs Debian's chromium (apt-get install chromium)")
	}
	t.Skip("chromium not found: skipping the report browser test (install Debian's chromium to run it)")
	return ""
}

// runChromium runs headless chromium with a fresh profile and no network chatter, and
// returns its standard output and standard error.
func runChromium(t *testing.T, bin, profile string, args ...string) (stdout, stderr string) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 25*time.Second)
	defer cancel()
	base := []string{"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--disable-extensions", "--disable-default-apps", "--mute-audio", "--hide-scrollbars",
		"--enable-logging=stderr", "--v=0", "--user-data-dir=" + profile}
	cmd := exec.CommandContext(ctx, bin, append(base, args...)...)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	cmd.Env = append(os.Environ(), "HOME="+profile)
	if err := cmd.Run(); err != nil {
		t.Fatalf("chromium %v: %v\nstderr:\n%s", args, err, errb.String())
	}
	return out.String(), errb.String()
}

// probeHead and probeTail are added to a copy of the page: the first records script
// errors, console errors and Content-Security-Policy violations (a fetch the page tried);
// the second measures every plot once the page is laid out and writes the result into
// the DOM, where --dump-dom shows it.
const probeHead = `<script>
window.__probe = [];
window.onerror = function (m, src, line) { window.__probe.push("error: " + m + " at " + line); };
var __ce = console.error;
console.error = function () { window.__probe.push("console.error: " + Array.prototype.join.call(arguments, " ")); __ce.apply(console, arguments); };
document.addEventListener("securitypolicyviolation", function (e) { window.__probe.push("csp: " + e.violatedDirective + " " + e.blockedURI); });
</script>`

// The data colours are the plots' own (plots.go), so a change of palette keeps the probe.
var probeTail = strings.Replace(probeTailText, "__DATA_COLOURS__", dataColoursJS(), 1)

func dataColoursJS() string {
	cols := append([]color.RGBA{colPV, colSP, colFit, colBars, colDrive}, palette...)
	var q []string
	for _, c := range cols {
		q = append(q, fmt.Sprintf("%q", fmt.Sprintf("#%02x%02x%02x", c.R, c.G, c.B)))
	}
	return "[" + strings.Join(q, ", ") + "]"
}

const probeTailText = `<script>
(function () {
  var dataColours = __DATA_COLOURS__;
  var out = { plots: [], errors: window.__probe };
  document.querySelectorAll("figure.plot").forEach(function (f) {
    var svg = f.querySelector("svg");
    var p = { kind: f.getAttribute("data-plot"), w: 0, h: 0, texts: 0, axes: 0, marks: 0, points: 0 };
    if (svg) {
      var r = svg.getBoundingClientRect();
      p.w = r.width; p.h = r.height;
      svg.querySelectorAll("text").forEach(function (e) {
        var b = e.getBBox();
        if (b.width > 0 && b.height > 0 && e.textContent.trim() !== "") p.texts++;
      });
      svg.querySelectorAll("path").forEach(function (e) {
        var b = e.getBBox();
        if (b.width <= 0 && b.height <= 0) return;
        var st = (e.getAttribute("style") || "").toLowerCase();
        if (st.indexOf("stroke:#000000") >= 0) p.axes++;
        for (var i = 0; i < dataColours.length; i++) {
          if (st.indexOf(dataColours[i]) >= 0) {
            p.marks++;
            var n = ((e.getAttribute("d") || "").match(/[ML]/g) || []).length;
            if (n > p.points) p.points = n;
            break;
          }
        }
      });
    }
    out.plots.push(p);
  });
  var pre = document.createElement("pre");
  pre.id = "probe-result";
  pre.textContent = JSON.stringify(out);
  document.body.appendChild(pre);
})();
</script>`

type probePlot struct {
	Kind                       string
	W, H                       float64
	Texts, Axes, Marks, Points int
}

type probeResult struct {
	Plots  []probePlot
	Errors []string
}

var probeRE = regexp.MustCompile(`(?s)<pre id="probe-result">(.*?)</pre>`)

// TestBrowserRendersReport opens a before/after report in headless chromium, checks that
// every plot rendered with axes and data and that the page logged no error and tried no
// fetch, and saves a screenshot of the unmodified page into the test's temporary folder
// (set CAPLOOP_SHOT to also copy it there).
func TestBrowserRendersReport(t *testing.T) {
	bin := findChromium(t)
	dir := t.TempDir()
	a := synth(benchBefore)
	a.Advice = fixtureAdvice()
	a.Summary.FirstRejects = fixtureSummary().FirstRejects
	a.Summary.RejectedLines = 3
	docs := []Capture{a, synth(benchAfter)}
	// A capture from the module's testdata through the real analysis, when present.
	if m, _ := filepath.Glob(filepath.Join("..", "..", "testdata", "tuned.cap")); len(m) == 1 {
		docs = append(docs, summarizeCapture(t, m[0]))
	}
	var page bytes.Buffer
	if err := WriteHTML(&page, docs, Options{Title: "bench reference: before and after", Note: "browser test"}); err != nil {
		t.Fatal(err)
	}
	wantPlots := strings.Count(page.String(), "data-plot=")
	report := filepath.Join(dir, "report.html")
	if err := os.WriteFile(report, page.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	// The probe copy: allow inline script (still no fetch of any kind) and add the probes.
	probe := page.String()
	const csp = `default-src 'none'; style-src 'unsafe-inline'; img-src data:`
	if !strings.Contains(probe, csp) {
		t.Fatalf("report lacks its Content-Security-Policy %q", csp)
	}
	probe = strings.Replace(probe, csp, csp+"; script-src 'unsafe-inline'", 1)
	probe = strings.Replace(probe, "<head>", "<head>\n"+probeHead, 1)
	probe = strings.Replace(probe, "</body>", probeTail+"\n</body>", 1)
	probePath := filepath.Join(dir, "probe.html")
	if err := os.WriteFile(probePath, []byte(probe), 0o644); err != nil {
		t.Fatal(err)
	}

	dom, logs := runChromium(t, bin, filepath.Join(dir, "profile1"), "--window-size=1280,2000", "--dump-dom", "file://"+probePath)
	m := probeRE.FindStringSubmatch(dom)
	if m == nil {
		t.Fatalf("no probe result in the dumped DOM (the probe did not run); stderr:\n%s", logs)
	}
	var res probeResult
	if err := json.Unmarshal([]byte(html.UnescapeString(m[1])), &res); err != nil {
		t.Fatalf("probe result %q: %v", m[1], err)
	}
	for _, e := range res.Errors {
		t.Errorf("page error: %s", e)
	}
	for _, line := range strings.Split(logs, "\n") {
		if strings.Contains(line, "Uncaught") || strings.Contains(line, ":CONSOLE") {
			t.Errorf("browser console: %s", line)
		}
	}
	if len(res.Plots) != wantPlots || wantPlots < 10 {
		t.Errorf("plots measured: got %d, want %d (at least 10)", len(res.Plots), wantPlots)
	}
	for i, p := range res.Plots {
		ok := p.W > 200 && p.H > 100 && p.Texts >= 4 && p.Axes >= 2 && p.Marks >= 1 && (p.Points >= 10 || p.Marks >= 3)
		if !ok {
			t.Errorf("plot %d (%s) did not render with axes and data: %+v", i, p.Kind, p)
		}
	}

	shot := filepath.Join(dir, "shot.png")
	runChromium(t, bin, filepath.Join(dir, "profile2"), "--window-size=1280,2000", "--screenshot="+shot, "file://"+report)
	b, err := os.ReadFile(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v", err)
	}
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("screenshot does not decode: %v", err)
	}
	if got := img.Bounds().Dx(); got != 1280 {
		t.Errorf("screenshot width: got %d, want 1280", got)
	}
	t.Logf("screenshot: %s (%d bytes)", shot, len(b))
	if d := os.Getenv("CAPLOOP_SHOT"); d != "" {
		if err := os.WriteFile(filepath.Join(d, "report-shot.png"), b, 0o644); err != nil {
			t.Error(err)
		}
	}
}
