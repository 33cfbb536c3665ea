package main

import (
	"bufio"
	"fmt"
	"io"

	"github.com/caploop/caploop/telemetry"
)

// checkedWriter buffers the text a command prints and keeps the first write error, so
// that text sent to a full disk or a closed standard output ends the command with a
// message and exit code 2, as a failed JSON write does.
type checkedWriter struct {
	bw    *bufio.Writer
	err   error
	flush func() error // the text wrapper's (see textOut), or nil
}

func newCheckedWriter(w io.Writer) *checkedWriter {
	return &checkedWriter{bw: bufio.NewWriterSize(w, 64<<10)}
}

// newTextWriter is newCheckedWriter for prose and tables: on a terminal, long prose
// lines wrap to its width (textOut). Never for JSON or CSV.
func newTextWriter(w io.Writer) *checkedWriter {
	tw, flush := textOut(w)
	return &checkedWriter{bw: bufio.NewWriterSize(tw, 64<<10), flush: flush}
}

func (c *checkedWriter) Write(p []byte) (int, error) {
	if c.err != nil {
		return 0, c.err
	}
	n, err := c.bw.Write(p)
	if err != nil {
		c.err = err
	}
	return n, err
}

// Close flushes what is buffered and returns the first write error, as a usage-level
// failure (exit code 2) naming what could not be written.
func (c *checkedWriter) Close(what string) error {
	if c.err == nil {
		c.err = c.bw.Flush()
	}
	if c.err == nil && c.flush != nil {
		c.err = c.flush()
	}
	if c.err != nil {
		return withCode(2, fmt.Errorf("%s: write to standard output: %w", what, telemetry.CleanPathError(c.err)))
	}
	return nil
}
