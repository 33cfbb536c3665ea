package export_test

import (
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/caploop/caploop/analysis/export"
)

// pyReader reads each CSV named on its command line with Python's csv module (default
// dialect, newline="" as its documentation asks) and prints, per file, the header, the
// row count, the widths seen and the column sums of every numeric cell.
const pyReader = `
import csv, json, sys
out = []
for path in sys.argv[1:]:
    with open(path, newline="", encoding="utf-8") as f:
        r = csv.reader(f)
        header = next(r)
        rows, widths, sums = 0, set(), [0.0] * len(header)
        for row in r:
            rows += 1
            widths.add(len(row))
            for i, cell in enumerate(row):
                if cell != "":
                    sums[i] += float(cell)
        out.append({"header": header, "rows": rows, "widths": sorted(widths), "sums": sums})
json.dump(out, sys.stdout)
`

// TestPythonReadsExport: every testdata capture exported as CSV reads in Python's csv
// module to the same header, row count and column sums as in encoding/csv. It needs
// python3: skipped under -short or when it is missing, except under CI=true.
func TestPythonReadsExport(t *testing.T) {
	if testing.Short() {
		t.Skip("-short: skips the test that runs python3")
	}
	py, err := exec.LookPath("python3")
	if err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("python3 is required in CI: %v", err)
		}
		t.Skipf("python3 is not installed (%v): the Python csv check is skipped", err)
	}
	t.Parallel()
	dir := t.TempDir()
	var paths []string
	type want struct {
		header []string
		rows   int
		sums   []float64
	}
	var wants []want
	for i, in := range captures(t) {
		out, _, _ := exportFile(t, in, export.Options{})
		p := filepath.Join(dir, strconv.Itoa(i)+".csv")
		if err := os.WriteFile(p, out, 0o644); err != nil {
			t.Fatal(err)
		}
		header, rows := readTable(t, out, false)
		w := want{header: header, rows: len(rows), sums: make([]float64, len(header))}
		for _, r := range rows {
			for k, cell := range r {
				if cell != "" {
					w.sums[k] += num(t, cell, header[k], k)
				}
			}
		}
		paths = append(paths, p)
		wants = append(wants, w)
	}
	cmd := exec.Command(py, append([]string{"-c", pyReader}, paths...)...)
	b, err := cmd.Output()
	if err != nil {
		t.Fatalf("python3: %v", err)
	}
	var got []struct {
		Header []string
		Rows   int
		Widths []int
		Sums   []float64
	}
	if err := json.Unmarshal(b, &got); err != nil {
		t.Fatalf("python3 output: %v", err)
	}
	if len(got) != len(wants) {
		t.Fatalf("python3 read %d files, want %d", len(got), len(wants))
	}
	for i, w := range wants {
		g := got[i]
		if g.Rows != w.rows || len(g.Widths) != 1 || g.Widths[0] != len(w.header) {
			t.Errorf("%s: python3 read %d rows of widths %v, want %d rows of %d", paths[i], g.Rows, g.Widths, w.rows, len(w.header))
		}
		for k, h := range w.header {
			if k >= len(g.Header) || g.Header[k] != h {
				t.Errorf("%s: python3 header %q, want %q", paths[i], g.Header, w.header)
				break
			}
			// Both sum the same decimal cells in the same order with IEEE doubles.
			if math.Abs(g.Sums[k]-w.sums[k]) > 1e-9*math.Max(1, math.Abs(w.sums[k])) {
				t.Errorf("%s: column %s sums to %v in python3, %v in Go", paths[i], h, g.Sums[k], w.sums[k])
			}
		}
	}
}
