package export_test

import (
	"math"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/export"
	"github.com/caploop/caploop/telemetry"
)

// TestAgreesWithSummary: the segment column and the time axis are the summary's. For
// every testdata capture, the export has as many segments as `caploop summary` counts,
// and each listed segment's first row sits at the segment's start_s with its setpoint
// and deadband.
func TestAgreesWithSummary(t *testing.T) {
	t.Parallel()
	for _, path := range captures(t) {
		t.Run(filepath.Base(path), func(t *testing.T) {
			t.Parallel()
			src, err := telemetry.OpenFile(path)
			if err != nil {
				t.Fatal(err)
			}
			defer src.Close()
			sum, err := analysis.Summarize(telemetry.NewScanner(src), analysis.Options{})
			if err != nil {
				t.Fatal(err)
			}
			out, _, _ := exportFile(t, path, export.Options{})
			header, rows := readTable(t, out, false)
			col := map[string]int{}
			for i, h := range header {
				col[h] = i
			}
			first := map[int][]string{} // segment -> its first row
			last := -1
			for _, r := range rows {
				k, _ := strconv.Atoi(r[col["segment"]])
				if k != last {
					first[k] = r
					last = k
				}
			}
			if got, want := int64(last+1), int64(len(sum.Segments))+sum.SegmentsOmitted; got != want {
				t.Fatalf("%d segments in the export, the summary has %d", got, want)
			}
			if len(sum.Segments) == 0 {
				t.Fatal("the summary lists no segment")
			}
			t.Logf("%d segments, %d listed", last+1, len(sum.Segments))
			for i, s := range sum.Segments {
				r := first[i]
				if got := num(t, r[col["board_time_s"]], "board_time_s", i); math.Abs(got-s.StartS) > 1e-9*max(1, s.StartS) {
					t.Errorf("segment %d starts at %v s in the export, %v s in the summary", i, got, s.StartS)
				}
				if got := num(t, r[col["sp_counts"]], "sp_counts", i); got != s.SetpointCounts {
					t.Errorf("segment %d: setpoint %v, summary %v", i, got, s.SetpointCounts)
				}
				if s.DeadbandCounts != nil {
					if got := num(t, r[col["deadband_counts"]], "deadband_counts", i); got != *s.DeadbandCounts {
						t.Errorf("segment %d: deadband %v, summary %v", i, got, *s.DeadbandCounts)
					}
				}
			}
		})
	}
}
