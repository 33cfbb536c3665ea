package main

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/pflag"
	"golang.org/x/term"

	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/telemetry"
)

// reportFlags are the flags of `caploop summary` that draw pictures (--report, --plot)
// and silence the progress bar (--quiet).
type reportFlags struct {
	report string // --report out.html: the self-contained HTML report
	plot   string // --plot out.svg or out.png: one overview picture
	quiet  bool   // --quiet: no progress bar
}

// register adds the flags to fs.
func (f *reportFlags) register(fs *pflag.FlagSet) {
	fs.StringVar(&f.report, "report", "", "write a self-contained HTML report with plots and tables to this file (replaced if it exists; - = standard output)")
	fs.StringVar(&f.plot, "plot", "", "write one overview picture to this file (.svg or .png; replaced if it exists)")
	fs.BoolVarP(&f.quiet, "quiet", "q", false, "no progress bar on standard error")
}

// plotFormat returns "svg" or "png" from the --plot file name.
func (f *reportFlags) plotFormat() (string, error) {
	switch ext := strings.ToLower(filepath.Ext(f.plot)); ext {
	case ".svg":
		return "svg", nil
	case ".png":
		return "png", nil
	default:
		return "", fmt.Errorf("--plot %s: the picture must end in .svg or .png", clean(f.plot))
	}
}

// check validates the flags before any file is read (exit code 2 on a bad flag).
func (f *reportFlags) check() error {
	if f.plot != "" {
		if _, err := f.plotFormat(); err != nil {
			return withCode(2, err)
		}
	}
	return nil
}

// wanted reports whether a report or a picture is asked for.
func (f *reportFlags) wanted() bool { return f.report != "" || f.plot != "" }

// write writes the HTML report and the picture asked for. note goes under the report's
// title (e.g. the command line). A failure to write is exit code 2.
func (f *reportFlags) write(docs []report.Capture, note string, stdout io.Writer) error {
	docs = shortNames(docs)
	if f.report != "" {
		err := writeOutput(f.report, stdout, func(w io.Writer) error {
			return report.WriteHTML(w, docs, report.Options{Note: note})
		})
		if err != nil {
			return withCode(2, err)
		}
	}
	if f.plot != "" {
		format, err := f.plotFormat()
		if err != nil {
			return withCode(2, err)
		}
		err = writeOutput(f.plot, stdout, func(w io.Writer) error { return report.WritePicture(w, docs, format) })
		if err != nil {
			return withCode(2, err)
		}
	}
	return nil
}

// shortNames names each doc by its file's base name when the base names are distinct
// (they head the columns of the comparison), and keeps the paths otherwise.
func shortNames(docs []report.Capture) []report.Capture {
	out := make([]report.Capture, len(docs))
	seen := map[string]bool{}
	for i, d := range docs {
		out[i] = d
		out[i].Name = filepath.Base(d.Name)
		if seen[out[i].Name] {
			return docs
		}
		seen[out[i].Name] = true
	}
	return out
}

// isTerminal reports whether w is a terminal.
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	return ok && term.IsTerminal(int(f.Fd()))
}

// openWithProgress opens a telemetry file for the summary. When stderr is a terminal and
// quiet is false, a progress bar on stderr follows the bytes read of the file (of the
// compressed file for a .gz capture, so the bar reaches 100 % at its end); otherwise it is
// telemetry.OpenFile. The bar is cleared when the source is closed.
func openWithProgress(path string, stderr io.Writer, quiet bool) (telemetry.Source, error) {
	if quiet || path == "-" || !isTerminal(stderr) {
		return telemetry.OpenFile(path)
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("telemetry: %w", telemetry.CleanPathError(err))
	}
	fi, err := f.Stat()
	if err != nil || fi.IsDir() || !fi.Mode().IsRegular() {
		// Not a plain file (a directory, a fifo): no size to show; let OpenFile decide.
		f.Close()
		return telemetry.OpenFile(path)
	}
	bar := newProgressBar(stderr, fi.Size(), filepath.Base(path))
	return newProgressSource(path, f, bar)
}

// newProgressBar makes the byte progress bar used by openWithProgress.
func newProgressBar(w io.Writer, size int64, name string) *progressbar.ProgressBar {
	return progressbar.NewOptions64(size,
		progressbar.OptionSetWriter(w),
		progressbar.OptionSetDescription(telemetry.SanitizeN([]byte(name), 40)),
		progressbar.OptionShowBytes(true),
		progressbar.OptionShowTotalBytes(true),
		progressbar.OptionShowCount(),
		progressbar.OptionSetWidth(30),
		progressbar.OptionThrottle(100*time.Millisecond),
		progressbar.OptionSetPredictTime(true),
		progressbar.OptionClearOnFinish(),
		progressbar.OptionSetRenderBlankState(true),
	)
}

// countingReader adds the bytes read to a bar.
type countingReader struct {
	r   io.Reader
	bar *progressbar.ProgressBar
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	if n > 0 {
		_ = c.bar.Add64(int64(n)) // a bar that cannot draw must not stop the summary
	}
	return n, err
}

// barFile closes the file and finishes (and so clears) the bar.
type barFile struct {
	f   *os.File
	bar *progressbar.ProgressBar
}

func (b barFile) Close() error {
	_ = b.bar.Finish()
	return b.f.Close()
}

// newProgressSource reads f (plain or gzip) through telemetry.NewSource, counting the
// file's bytes on bar.
func newProgressSource(name string, f *os.File, bar *progressbar.ProgressBar) (telemetry.Source, error) {
	src, err := telemetry.NewSource(name, &countingReader{r: f, bar: bar}, barFile{f: f, bar: bar})
	if err != nil {
		barFile{f: f, bar: bar}.Close()
		return nil, err
	}
	return src, nil
}
