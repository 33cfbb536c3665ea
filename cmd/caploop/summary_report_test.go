package main

import (
	"bytes"
	"compress/gzip"
	"errors"
	"fmt"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/creack/pty"
)

// writeTelemetry writes n data lines to dir/name (gzip-compressed when gz) and returns
// the path and the plain text.
func writeTelemetry(t *testing.T, dir, name string, n int, gz bool) (string, []byte) {
	t.Helper()
	var plain bytes.Buffer
	plain.WriteString("# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=2\n")
	for i := 0; i < n; i++ {
		fmt.Fprintf(&plain, "t=%d sp=512 pv=%d u=%d\n", i*1000, 510+i%5, i%3-1)
	}
	path := filepath.Join(dir, name)
	data := plain.Bytes()
	if gz {
		var zb bytes.Buffer
		zw := gzip.NewWriter(&zb)
		zw.Write(plain.Bytes())
		zw.Close()
		data = zb.Bytes()
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return path, plain.Bytes()
}

// ttyOutput collects what is written to the terminal side of a pseudo-terminal.
type ttyOutput struct {
	mu   sync.Mutex
	buf  bytes.Buffer
	done chan struct{}
}

func readTTY(master *os.File) *ttyOutput {
	o := &ttyOutput{done: make(chan struct{})}
	go func() {
		defer close(o.done)
		b := make([]byte, 4096)
		for {
			n, err := master.Read(b)
			o.mu.Lock()
			o.buf.Write(b[:n])
			o.mu.Unlock()
			if err != nil {
				return
			}
		}
	}()
	return o
}

func (o *ttyOutput) String() string {
	o.mu.Lock()
	defer o.mu.Unlock()
	return o.buf.String()
}

var percent = regexp.MustCompile(`(\d+)%`)

func TestOpenWithProgress(t *testing.T) {
	dir := t.TempDir()
	tests := []struct {
		name     string
		gz       bool
		terminal bool
		quiet    bool
		wantBar  bool
	}{
		{"plain file on a terminal", false, true, false, true},
		{"gzip file on a terminal", true, true, false, true},
		{"quiet on a terminal", false, true, true, false},
		{"not a terminal", false, false, false, false},
	}
	for i, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			name := fmt.Sprintf("bench-%d.txt", i)
			path, want := writeTelemetry(t, dir, name, 200000, tc.gz)
			var stderr *os.File
			var out *ttyOutput
			var closeSide func()
			if tc.terminal {
				master, slave, err := pty.Open()
				if err != nil {
					t.Skipf("no pseudo-terminal: %v", err)
				}
				defer master.Close()
				stderr, out = slave, readTTY(master)
				closeSide = func() { slave.Close() }
			} else {
				r, w, err := os.Pipe()
				if err != nil {
					t.Fatal(err)
				}
				defer r.Close()
				stderr = w
				out = readTTY(r)
				closeSide = func() { w.Close() }
			}
			src, err := openWithProgress(path, stderr, tc.quiet)
			if err != nil {
				t.Fatal(err)
			}
			// Read half, pause past the bar's throttle, then read the rest: the bar
			// must show the part read so far (the bar draws a little after the read, so a little more).
			var got bytes.Buffer
			if _, err := io.CopyN(&got, src, int64(len(want)/2)); err != nil {
				t.Fatal(err)
			}
			time.Sleep(150 * time.Millisecond)
			if _, err := io.Copy(&got, src); err != nil {
				t.Fatal(err)
			}
			if err := src.Close(); err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(got.Bytes(), want) {
				t.Errorf("read %d bytes, want the %d bytes of the plain text", got.Len(), len(want))
			}
			if src.Name() != path {
				t.Errorf("Name: got %q, want %q", src.Name(), path)
			}
			time.Sleep(50 * time.Millisecond) // let the terminal pass the last bytes on
			closeSide()
			select {
			case <-out.done:
			case <-time.After(2 * time.Second):
			}
			text := out.String()
			hasBar := strings.Contains(text, name) && strings.Contains(text, "%")
			if hasBar != tc.wantBar {
				t.Errorf("progress bar shown: got %v, want %v; output %q", hasBar, tc.wantBar, text)
			}
			if !tc.wantBar && text != "" {
				t.Errorf("output when there should be none: %q", text)
			}
			if tc.wantBar {
				half := false
				for _, m := range percent.FindAllStringSubmatch(text, -1) {
					if p, _ := strconv.Atoi(m[1]); p >= 40 && p <= 95 {
						half = true
					}
				}
				if !half {
					t.Errorf("bar never showed the part read (40-95%%) after half the file: %q", text)
				}
				if !strings.HasSuffix(text, "\r") {
					t.Errorf("bar not cleared at the end: %q", text)
				}
			}
		})
	}
}

func TestOpenWithProgressErrors(t *testing.T) {
	master, slave, err := pty.Open()
	if err != nil {
		t.Skipf("no pseudo-terminal: %v", err)
	}
	defer master.Close()
	defer slave.Close()
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.gz")
	os.WriteFile(bad, []byte{0x1f, 0x8b, 0, 0}, 0o644)
	tests := []struct {
		name, path, want string
	}{
		{"missing file", filepath.Join(dir, "nope.txt"), "no such file"},
		{"broken gzip", bad, "bad gzip data"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			src, err := openWithProgress(tc.path, slave, false)
			if err == nil {
				_, err = io.ReadAll(src)
				src.Close()
			}
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("got %v, want an error containing %q", err, tc.want)
			}
		})
	}
}

func TestReportFlagsCheck(t *testing.T) {
	tests := []struct {
		plot    string
		wantErr bool
	}{
		{"", false}, {"out.svg", false}, {"OUT.PNG", false}, {"out.gif", true}, {"out", true},
	}
	for _, tc := range tests {
		t.Run(tc.plot, func(t *testing.T) {
			f := reportFlags{plot: tc.plot}
			err := f.check()
			if (err != nil) != tc.wantErr {
				t.Errorf("check(%q): got %v, want error %v", tc.plot, err, tc.wantErr)
			}
		})
	}
}

// writeLoopRun writes the telemetry of a three-state loop on a 47 kΩ, 2.2 µF RC (1 ms
// period, 10-bit ADC at 5 V) that steps from 300 to 620 counts, as a board would print it.
func writeLoopRun(t *testing.T, path string, db int) {
	t.Helper()
	var b bytes.Buffer
	fmt.Fprintf(&b, "# vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=%d supply=5 r=47000 c=2.2e-6\n", db)
	a := math.Exp(-1e-3 / (47e3 * 2.2e-6))
	v := 0.0
	for k := 0; k < 8000; k++ {
		sp := 300
		if k >= 4000 {
			sp = 620
		}
		pv := int(math.Floor(v / (5.0 / 1024)))
		e := pv - sp
		u := 0
		switch {
		case e > db:
			u = -1
			v *= a
		case e < -db:
			u = 1
			v = 5 + (v-5)*a
		default:
			v *= 0.99999
		}
		fmt.Fprintf(&b, "t=%d sp=%d pv=%d u=%d\n", k*1000, sp, pv, u)
	}
	if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

func TestSummaryReportAndPlot(t *testing.T) {
	dir := t.TempDir()
	before := filepath.Join(dir, "bench-before.txt")
	after := filepath.Join(dir, "bench-after.txt")
	writeLoopRun(t, before, 1)
	writeLoopRun(t, after, 4)
	tests := []struct {
		name  string
		files []string
		plot  string
		plots []string // data-plot kinds the report must hold
	}{
		{"one capture, png", []string{before}, "one.png", []string{"overview", "histogram"}},
		{"before and after, svg", []string{before, after}, "two.svg", []string{"overview", "ripple"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			html := filepath.Join(dir, tc.plot+".html")
			pic := filepath.Join(dir, tc.plot)
			root := newRoot()
			var out, errb bytes.Buffer
			root.SetOut(&out)
			root.SetErr(&errb)
			root.SetArgs(append([]string{"summary", "--report", html, "--plot", pic, "--quiet"}, tc.files...))
			if err := root.Execute(); err != nil {
				t.Fatalf("summary: %v\nstderr: %s", err, errb.String())
			}
			if errb.Len() != 0 {
				t.Errorf("stderr not quiet: %q", errb.String())
			}
			page, err := os.ReadFile(html)
			if err != nil {
				t.Fatal(err)
			}
			for _, kind := range tc.plots {
				if !strings.Contains(string(page), `data-plot="`+kind+`"`) {
					t.Errorf("report has no %s plot", kind)
				}
			}
			if !strings.Contains(string(page), "bench-before.txt") {
				t.Errorf("report does not name the capture")
			}
			b, err := os.ReadFile(pic)
			if err != nil {
				t.Fatal(err)
			}
			if strings.HasSuffix(pic, ".png") {
				if _, err := png.Decode(bytes.NewReader(b)); err != nil {
					t.Errorf("picture: %v", err)
				}
			} else if !bytes.Contains(b, []byte("<svg")) || !bytes.Contains(b, []byte("<path")) {
				t.Errorf("picture is not an SVG drawing")
			}
			left, _ := filepath.Glob(filepath.Join(dir, ".*"))
			if len(left) > 0 {
				t.Errorf("temporary files left behind: %v", left)
			}
		})
	}
	t.Run("bad picture name", func(t *testing.T) {
		root := newRoot()
		root.SetOut(io.Discard)
		root.SetErr(io.Discard)
		root.SetArgs([]string{"summary", "--plot", filepath.Join(dir, "x.gif"), before})
		err := root.Execute()
		var ee *exitError
		if !errors.As(err, &ee) || ee.code != 2 {
			t.Errorf("got %v, want exit code 2", err)
		}
	})
}
