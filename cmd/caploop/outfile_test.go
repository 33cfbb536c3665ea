package main

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

func writeText(s string) func(w io.Writer) error {
	return func(w io.Writer) error {
		_, err := io.WriteString(w, s)
		return err
	}
}

func TestWriteReplacing(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	p := filepath.Join(dir, "out.csv")

	// A new file: 0644, the content.
	if err := writeReplacing(p, writeText("a\n")); err != nil {
		t.Fatal(err)
	}
	if fi, _ := os.Stat(p); fi.Mode().Perm() != 0o644 {
		t.Errorf("new file mode %v, want 0644", fi.Mode().Perm())
	}
	// An existing file is replaced and keeps its mode.
	if err := os.Chmod(p, 0o600); err != nil {
		t.Fatal(err)
	}
	if err := writeReplacing(p, writeText("b\n")); err != nil {
		t.Fatal(err)
	}
	if b, _ := os.ReadFile(p); string(b) != "b\n" {
		t.Errorf("content %q, want b", b)
	}
	if fi, _ := os.Stat(p); fi.Mode().Perm() != 0o600 {
		t.Errorf("replaced file mode %v, want 0600 kept", fi.Mode().Perm())
	}
	// A failing writer leaves the old file and no temporary file.
	boom := errors.New("boom")
	err := writeReplacing(p, func(w io.Writer) error { io.WriteString(w, "half"); return boom })
	if !errors.Is(err, boom) {
		t.Errorf("error %v, want boom", err)
	}
	if b, _ := os.ReadFile(p); string(b) != "b\n" {
		t.Errorf("after a failed write the content is %q, want the old b", b)
	}
	if m, _ := filepath.Glob(filepath.Join(dir, ".*")); len(m) != 0 {
		t.Errorf("temporary files left: %v", m)
	}

	// Refused targets: a symbolic link (to a regular file), a FIFO, a device, a folder.
	link := filepath.Join(dir, "link.csv")
	if err := os.Symlink(p, link); err != nil {
		t.Fatal(err)
	}
	fifo := filepath.Join(dir, "fifo.csv")
	if err := syscall.Mkfifo(fifo, 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ path, what string }{
		{link, "symbolic link"}, {fifo, "FIFO"}, {"/dev/null", "device"}, {dir, "folder"},
	} {
		err := writeReplacing(c.path, writeText("x\n"))
		if err == nil || !strings.Contains(err.Error(), c.what) {
			t.Errorf("%s: error %v, want a refusal naming a %s", c.path, err, c.what)
		}
	}
	if b, _ := os.ReadFile(p); string(b) != "b\n" {
		t.Errorf("the link's target changed to %q", b)
	}
	if fi, err := os.Lstat(link); err != nil || fi.Mode()&os.ModeSymlink == 0 {
		t.Errorf("the link was replaced: %v %v", fi, err)
	}
}

// TestWriteOutputStdout: "-" and "" go to the given standard output.
func TestWriteOutputStdout(t *testing.T) {
	for _, p := range []string{"", "-"} {
		var b strings.Builder
		if err := writeOutput(p, &b, writeText("row\n")); err != nil || b.String() != "row\n" {
			t.Errorf("writeOutput(%q): %q, %v", p, b.String(), err)
		}
	}
}
