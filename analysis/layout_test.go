package analysis

import (
	"bufio"
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// transportDeps may not appear below analysis: the figures, the loop model and the
// virtual board work on any system and never open a port or a terminal.
var transportDeps = []string{
	"go.bug.st/serial",
	"github.com/creack/pty",
	"golang.org/x/sys/unix",
	"golang.org/x/term",
}

// TestNoTransportBelowAnalysis runs `go list -deps ./analysis/...` and fails when any
// package under analysis depends on a serial, pseudo-terminal or terminal library.
func TestNoTransportBelowAnalysis(t *testing.T) {
	if testing.Short() {
		t.Skip("-short: skips go list over the module")
	}
	t.Parallel()
	out, err := exec.Command("go", "list", "-deps", "../analysis/...").CombinedOutput()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, out)
	}
	sc := bufio.NewScanner(bytes.NewReader(out))
	for sc.Scan() {
		for _, d := range transportDeps {
			if p := sc.Text(); p == d || strings.HasPrefix(p, d+"/") {
				t.Errorf("a package under analysis depends on %s", p)
			}
		}
	}
}

// maxFileLines is the longest a non-test Go file may grow; past it a file holds more
// than one job and is split along its seams.
const maxFileLines = 600

// TestNoOversizedFiles walks the module and fails on a non-test Go file over
// maxFileLines lines.
func TestNoOversizedFiles(t *testing.T) {
	t.Parallel()
	err := filepath.WalkDir("..", func(path string, d os.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() && (strings.HasPrefix(d.Name(), ".") && path != "..") {
			return filepath.SkipDir
		}
		if d.IsDir() || !strings.HasSuffix(path, ".go") || strings.HasSuffix(path, "_test.go") {
			return nil
		}
		b, err := os.ReadFile(path)
		if err != nil {
			return err
		}
		if n := bytes.Count(b, []byte("\n")); n > maxFileLines {
			t.Errorf("%s has %d lines; split it along its seams (at most %d)", path, n, maxFileLines)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}
