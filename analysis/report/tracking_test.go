package report

import (
	"bytes"
	"path/filepath"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/telemetry"
)

// TestTrackingTables analyses the project's ramp capture (testdata/two-state-ramp.txt)
// and checks that the report shows the tracking table before the segments and folds the
// short segments into a note, against testdata/TestTrackingTables/... (regenerate with
// -update).
func TestTrackingTables(t *testing.T) {
	path := filepath.Join("..", "..", "testdata", "two-state-ramp.txt")
	src, err := telemetry.OpenFile(path)
	if err != nil {
		t.Skipf("testdata capture %s is not there: %v", path, err)
	}
	defer src.Close()
	sc := telemetry.NewScanner(src)
	sc.Name = "two-state-ramp.txt"
	sum, err := analysis.Summarize(sc, analysis.Options{})
	if err != nil {
		t.Fatalf("Summarize: %v", err)
	}
	tables := DocTables(Capture{Name: "ramp", Summary: sum}, "")
	var ids []string
	for _, tb := range tables {
		ids = append(ids, tb.ID)
		if tb.ID != "tracking" && tb.ID != "segments" {
			continue
		}
		t.Run(tb.ID, func(t *testing.T) {
			if tb.ID == "segments" && len(tb.Rows) > 5 {
				t.Errorf("segments table has %d rows, want the short segments folded into a note", len(tb.Rows))
			}
			var buf bytes.Buffer
			if err := RenderTable(&buf, tb); err != nil {
				t.Fatal(err)
			}
			golden(t, buf.Bytes())
		})
	}
	if got := strings.Join(ids, " "); !strings.HasPrefix(got, "capture board plant tracking segments") {
		t.Errorf("tables: got %s, want the tracking table before the segments", got)
	}
}
