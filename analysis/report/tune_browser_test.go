package report_test

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/loop/virtual"
	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/telemetry"
	"github.com/caploop/caploop/telemetry/wire"
	"github.com/caploop/caploop/tui/live/tune"
)

// TestBrowserRendersTuneRecord runs the tune sequencer on the virtual board over a
// pseudo-terminal (4 times real time, a band too narrow for its load), writes the record
// folder as `caploop tune --yes --out DIR` does, and opens DIR/report.html in headless
// chromium: every plot renders with axes and data, the page logs no error and tries no
// fetch, and the before/after line is on the page.
func TestBrowserRendersTuneRecord(t *testing.T) {
	bin := report.FindChromium(t)
	t.Parallel()
	sc := virtual.DefaultScenario()
	sc.Levels, sc.Deadband, sc.V0 = []float64{2.0}, 2, 2.0
	b, err := virtual.NewBoard(sc)
	if err != nil {
		t.Fatal(err)
	}
	b.Speed = 4
	ctx, cancel := context.WithCancel(context.Background())
	ready := make(chan string, 1)
	served := make(chan error, 1)
	go func() {
		served <- wire.Serve(ctx, b, wire.ServeOptions{Link: filepath.Join(t.TempDir(), "tty"), Ready: func(p string) { ready <- p }, WaitOpen: true})
	}()
	t.Cleanup(func() { cancel(); <-served })
	var port string
	select {
	case port = <-ready:
	case err := <-served:
		t.Fatalf("Serve: %v", err)
	case <-time.After(5 * time.Second):
		t.Fatal("the virtual board did not start within 5 s")
	}

	dir := t.TempDir()
	out := filepath.Join(dir, "tuned")
	if err := os.MkdirAll(out, 0o755); err != nil {
		t.Fatal(err)
	}
	capPath := filepath.Join(out, "capture.cap")
	link := wire.Dial(wire.SerialConfig{Path: port, Baud: 115200}, wire.LinkOptions{RecordPath: capPath, FailFirst: true})
	var progress strings.Builder
	res, runErr := tune.Run(context.Background(), link, tune.Options{
		Range: tune.Range{Lo: 0.5, Hi: 4.5}, Progress: &progress, ReplugWait: time.Second,
	})
	if err := link.Close(); err != nil {
		t.Fatalf("closing the link: %v", err)
	}
	if runErr != nil {
		t.Fatalf("tune: %v\n%s", runErr, progress.String())
	}
	if res.Compare == nil {
		t.Fatalf("tune gave no before/after\n%s", progress.String())
	}
	fd, err := os.Open(capPath)
	if err != nil {
		t.Fatal(err)
	}
	sc2 := telemetry.NewScanner(fd)
	sc2.Name = "capture.cap"
	whole, err := analysis.Summarize(sc2, analysis.Options{Source: "capture.cap"})
	fd.Close()
	if err != nil {
		t.Fatalf("summarizing the capture: %v", err)
	}
	wrote, err := tune.WriteRecord(out, res, whole, time.Now())
	if err != nil {
		t.Fatalf("WriteRecord: %v (wrote %v)", err, wrote)
	}
	page, err := os.ReadFile(filepath.Join(out, tune.ReportFile))
	if err != nil {
		t.Fatalf("the record folder has no report: %v (wrote %v)", err, wrote)
	}
	// The report says in words what the run changed: the before/after band jumps.
	for _, want := range []string{"before", "after"} {
		if !strings.Contains(string(page), want) {
			t.Errorf("report.html does not mention %q", want)
		}
	}
	want, rendered, errs := report.ProbePage(t, bin, dir, page)
	for _, e := range errs {
		t.Errorf("page error: %s", e)
	}
	if want < 2 || rendered != want {
		t.Errorf("plots rendered with axes and data: %d of %d (want all, at least 2)", rendered, want)
	}
	t.Logf("before -> after: %s; %d plots rendered", res.Compare.Line, rendered)
}
