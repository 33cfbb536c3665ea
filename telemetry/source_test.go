package telemetry

import (
	"bytes"
	"compress/gzip"
	"errors"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func gzipBytes(t *testing.T, s string) []byte {
	t.Helper()
	var b bytes.Buffer
	zw := gzip.NewWriter(&b)
	if _, err := io.WriteString(zw, s); err != nil {
		t.Fatal(err)
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// TestOpenFileDetectsGzip checks that compression is recognised by content, whatever the
// file is called.
func TestOpenFileDetectsGzip(t *testing.T) {
	const text = "# vref=5 adc_bits=10 period_us=1000\nt=0 sp=512 pv=498 u=1\nt=1000 sp=512 pv=503 u=0\n"
	dir := t.TempDir()
	// Two gzip members back to back are one stream (RFC 1952 section 2.2); gunzip reads both.
	twoMembers := append(gzipBytes(t, text[:36]), gzipBytes(t, text[36:])...)
	tests := []struct {
		name string
		file string
		data []byte
		want string
	}{
		{"gzip named .txt", "run.txt", gzipBytes(t, text), text},
		{"gzip without extension", "run", gzipBytes(t, text), text},
		{"plain named .gz", "plain.gz", []byte(text), text},
		{"plain", "plain.txt", []byte(text), text},
		{"two gzip members", "two.cap", twoMembers, text},
		{"empty file", "empty", nil, ""},
		{"one byte", "one", []byte{0x1f}, "\x1f"},
		{"gzip of empty", "e.gz", gzipBytes(t, ""), ""},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(dir, tc.file)
			if err := os.WriteFile(path, tc.data, 0o644); err != nil {
				t.Fatal(err)
			}
			src, err := OpenFile(path)
			if err != nil {
				t.Fatalf("OpenFile: %v", err)
			}
			defer src.Close()
			if src.Name() != path {
				t.Errorf("Name() = %q, want %q", src.Name(), path)
			}
			got, err := io.ReadAll(src)
			if err != nil {
				t.Fatalf("read: %v", err)
			}
			if string(got) != tc.want {
				t.Errorf("got %q, want %q", got, tc.want)
			}
		})
	}
}

// TestOpenFileErrors checks that failures name the file and the reason.
func TestOpenFileErrors(t *testing.T) {
	dir := t.TempDir()
	corrupt := gzipBytes(t, strings.Repeat("t=0 sp=512 pv=498 u=1\n", 100))
	corrupt = corrupt[:len(corrupt)/2] // cut mid-stream
	badHeader := []byte{0x1f, 0x8b, 0x01, 0x00, 'x', 'y'}
	for name, data := range map[string][]byte{"cut.gz": corrupt, "badheader": badHeader} {
		if err := os.WriteFile(filepath.Join(dir, name), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	tests := []struct {
		name  string
		path  string
		is    error // errors.Is target or nil
		parts []string
	}{
		{"missing", filepath.Join(dir, "nope.txt"), fs.ErrNotExist, []string{"telemetry: ", "nope.txt"}},
		{"directory", dir, nil, []string{"telemetry: ", "is a directory"}},
		{"bad gzip header", filepath.Join(dir, "badheader"), nil, []string{"telemetry: ", "badheader", "bad gzip"}},
		{"gzip cut short", filepath.Join(dir, "cut.gz"), io.ErrUnexpectedEOF, []string{"telemetry: ", "cut.gz", "bad gzip"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			src, err := OpenFile(tc.path)
			if err == nil {
				_, err = io.ReadAll(src)
				src.Close()
			}
			if err == nil {
				t.Fatal("got no error")
			}
			if tc.is != nil && !errors.Is(err, tc.is) {
				t.Errorf("got %v, want an error wrapping %v", err, tc.is)
			}
			for _, p := range tc.parts {
				if !strings.Contains(err.Error(), p) {
					t.Errorf("message %q lacks %q", err.Error(), p)
				}
			}
		})
	}
}

// TestStdinSource reads a gzip stream through Stdin, with os.Stdin swapped for a pipe.
func TestStdinSource(t *testing.T) {
	const text = "t=0 sp=512 pv=498 u=1\n"
	r, w, err := os.Pipe()
	if err != nil {
		t.Fatal(err)
	}
	old := os.Stdin
	os.Stdin = r
	defer func() { os.Stdin = old; r.Close() }()
	go func() {
		w.Write(gzipBytes(t, text))
		w.Close()
	}()
	src := Stdin()
	if src.Name() != "stdin" {
		t.Errorf("Name() = %q, want stdin", src.Name())
	}
	got, err := io.ReadAll(src)
	if err != nil {
		t.Fatalf("read: %v", err)
	}
	if string(got) != text {
		t.Errorf("got %q, want %q", got, text)
	}
	if err := src.Close(); err != nil {
		t.Errorf("Close: %v", err)
	}
}
