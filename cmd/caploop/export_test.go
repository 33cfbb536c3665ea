package main

import (
	"bytes"
	"encoding/csv"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// runExportCmd runs `caploop export args...` in process.
func runExportCmd(t *testing.T, args ...string) (stdout, stderr string, code int) {
	t.Helper()
	root := newRoot()
	var out, errb bytes.Buffer
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs(append([]string{"export"}, args...))
	if err := root.Execute(); err != nil {
		code = 2
		var ee *exitError
		if errors.As(err, &ee) {
			code = ee.code
		}
		errb.WriteString(err.Error())
	}
	return out.String(), errb.String(), code
}

func TestExportCommand(t *testing.T) {
	t.Parallel()
	in := capture(t, "tuned.cap")
	dir := t.TempDir()

	// Standard output, CSV by default; a file with -o; TSV.
	stdout, stderr, code := runExportCmd(t, in)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	rows, err := csv.NewReader(strings.NewReader(stdout)).ReadAll()
	if err != nil || len(rows) < 1000 || rows[0][0] != "board_time_s" || rows[0][1] != "host_time_s" {
		t.Fatalf("stdout is not the table: %v, %d rows, header %q", err, len(rows), rows[0])
	}
	out := filepath.Join(dir, "t.csv")
	if _, stderr, code := runExportCmd(t, in, "--csv", "-o", out); code != 0 {
		t.Fatalf("-o: exit %d: %s", code, stderr)
	}
	if b, _ := os.ReadFile(out); string(b) != stdout {
		t.Error("-o FILE and standard output differ")
	}
	tsv := filepath.Join(dir, "t.tsv")
	if _, stderr, code := runExportCmd(t, in, "--tsv", "-o", tsv); code != 0 {
		t.Fatalf("--tsv: exit %d: %s", code, stderr)
	}
	r := csv.NewReader(mustOpen(t, tsv))
	r.Comma = '\t'
	if trows, err := r.ReadAll(); err != nil || len(trows) != len(rows) {
		t.Errorf("TSV: %v, %d rows, want %d", err, len(trows), len(rows))
	}

	// Refusals, all exit 2: both formats, standard input, a missing file, the input
	// itself, a capture without --force, a symbolic link.
	link := filepath.Join(dir, "link.csv")
	os.Symlink(out, link)
	capCopy := filepath.Join(dir, "copy.cap")
	raw, _ := os.ReadFile(in)
	os.WriteFile(capCopy, raw, 0o644)
	other := filepath.Join(dir, "other.cap")
	os.WriteFile(other, raw, 0o644)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{in, "--csv", "--tsv"}, "not both"},
		{[]string{"-"}, "standard input"},
		{[]string{filepath.Join(dir, "missing.txt")}, "no such file"},
		{[]string{capCopy, "-o", capCopy}, "its own input"},
		{[]string{in, "-o", other}, "--force"},
		{[]string{in, "-o", link}, "symbolic link"},
	} {
		_, stderr, code := runExportCmd(t, c.args...)
		if code != 2 || !strings.Contains(stderr, c.want) {
			t.Errorf("export %q: exit %d, %q; want 2 and %q", c.args, code, stderr, c.want)
		}
	}
	if b, _ := os.ReadFile(other); !bytes.Equal(b, raw) {
		t.Error("a capture was overwritten without --force")
	}
	if _, stderr, code := runExportCmd(t, in, "-o", other, "--force"); code != 0 {
		t.Errorf("--force: exit %d: %s", code, stderr)
	}

	// A file without samples is unusable input (exit 2); unreadable lines are left out
	// and counted on standard error.
	empty := filepath.Join(dir, "empty.txt")
	os.WriteFile(empty, []byte("# vref=5 adc_bits=10\n"), 0o644)
	if _, stderr, code := runExportCmd(t, empty); code != 2 || !strings.Contains(stderr, "no samples") {
		t.Errorf("no samples: exit %d, %q", code, stderr)
	}
	if _, stderr, code := runExportCmd(t, capture(t, "dirty-stream.txt"), "-o", filepath.Join(dir, "d.csv")); code != 0 ||
		!strings.Contains(stderr, "could not be read and were left out") || !strings.Contains(stderr, "rows, 10 columns to") {
		t.Errorf("dirty stream: exit %d, %q", code, stderr)
	}
}

func mustOpen(t *testing.T, p string) *os.File {
	t.Helper()
	f, err := os.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { f.Close() })
	return f
}
