package main

import (
	"os"

	"github.com/caploop/caploop/telemetry"
)

// lazyInput is a replay input that is opened on its first read, in the replay's own
// goroutine: opening a FIFO waits for a writer and reading it waits for data, and the
// screen must be up (and q must work) while it waits.
type lazyInput struct {
	path string
	src  telemetry.Source
	err  error
}

func (l *lazyInput) Read(p []byte) (int, error) {
	if l.src == nil && l.err == nil {
		l.src, l.err = telemetry.OpenFile(l.path)
	}
	if l.err != nil {
		return 0, l.err
	}
	return l.src.Read(p)
}

func (l *lazyInput) Name() string { return l.path }

func (l *lazyInput) Close() error {
	if l.src != nil {
		return l.src.Close()
	}
	return nil
}

// replayOpener returns how replay opens path: a regular file (or a missing one, for the
// error) at once; a FIFO, device or socket lazily.
func replayOpener(path string) func() (telemetry.Source, error) {
	fi, err := os.Stat(path)
	if err != nil || fi.Mode().IsRegular() || fi.IsDir() || path == "-" {
		return nil
	}
	return func() (telemetry.Source, error) { return &lazyInput{path: path}, nil }
}
