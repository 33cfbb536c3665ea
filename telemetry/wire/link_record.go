package wire

import (
	"bytes"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"syscall"
	"time"

	"github.com/caploop/caploop/telemetry"
)

// The recording side of a Link: the capture file, its writer, flushing and syncing.

// openRecord sets up the capture writer from the options.
func (l *Link) openRecord() error {
	w := l.opt.Record
	if w == nil && l.opt.RecordPath != "" {
		f, err := createRecordFile(l.opt.RecordPath)
		if err != nil {
			return err
		}
		l.recFile = f
		w = f
	}
	if w == nil {
		return nil
	}
	attrs := append([]string{
		"source=" + l.cfg.Path,
		fmt.Sprintf("baud=%d", l.cfg.Baud),
		fmt.Sprintf("framing=%s", frameString(l.cfg)),
	}, l.opt.RecordAttrs...)
	cw, err := telemetry.NewCaptureWriter(w, l.start, attrs...)
	if err != nil {
		if l.recFile != nil {
			l.recFile.Close()
		}
		return fmt.Errorf("telemetry: write capture header: %w", err)
	}
	l.rec = cw
	l.recDirty = true
	if s, ok := w.(interface{ Sync() error }); ok {
		l.recSync = s
	}
	return nil
}

// frameString returns "8N1" style framing of a config with defaults filled in.
func frameString(c SerialConfig) string {
	s := c.String()
	if i := bytes.IndexByte([]byte(s), ' '); i >= 0 {
		return s[i+1:]
	}
	return s
}

// record appends lines to the capture; a write error is kept and stops recording.
func (l *Link) record(lines []Line) {
	l.recMu.Lock()
	defer l.recMu.Unlock()
	if l.rec == nil || l.recErr != nil {
		return
	}
	for _, ln := range lines {
		if err := l.rec.Write(ln.Host.Sub(l.start), ln.Dir, ln.Raw); err != nil {
			l.recErr = fmt.Errorf("telemetry: write capture: %w", err)
			return
		}
	}
	l.recDirty = true
}

// flushRecord flushes the capture and syncs it to disk.
func (l *Link) flushRecord() {
	l.recMu.Lock()
	defer l.recMu.Unlock()
	if l.rec == nil || l.recErr != nil || !l.recDirty {
		return
	}
	l.recDirty = false
	if err := l.rec.Flush(); err != nil {
		l.recErr = fmt.Errorf("telemetry: write capture: %w", err)
		return
	}
	if l.recSync != nil {
		if err := l.recSync.Sync(); err != nil && !errors.Is(err, syscall.EINVAL) {
			// EINVAL: the writer is a pipe or terminal, which has nothing to sync.
			l.recErr = fmt.Errorf("telemetry: sync capture: %w", err)
		}
	}
}

// flusher flushes the recording every FlushEvery until the reader stops.
func (l *Link) flusher() {
	defer close(l.flushDone)
	t := time.NewTicker(l.opt.FlushEvery)
	defer t.Stop()
	for {
		select {
		case <-t.C:
			l.flushRecord()
		case <-l.readerDone:
			l.flushRecord()
			return
		}
	}
}

// createRecordFile creates (or truncates) the capture file path, refusing a path that is
// a symbolic link, a device, a FIFO, a socket or a folder.
func createRecordFile(path string) (*os.File, error) {
	name := telemetry.SanitizeN([]byte(path), 200)
	if fi, err := os.Lstat(path); err == nil && !fi.Mode().IsRegular() {
		what := "not a regular file"
		switch m := fi.Mode(); {
		case m&fs.ModeSymlink != 0:
			what = "a symbolic link"
		case m&fs.ModeDevice != 0:
			what = "a device"
		case m&fs.ModeNamedPipe != 0:
			what = "a FIFO"
		case m.IsDir():
			what = "a folder"
		}
		return nil, fmt.Errorf("telemetry: refusing to write the capture %s: it is %s", name, what)
	}
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_TRUNC|noFollow, 0o644)
	if err != nil {
		return nil, fmt.Errorf("telemetry: create capture: %w", telemetry.CleanPathError(err))
	}
	return f, nil
}

// closeRecordFile closes the capture file the Link created, and removes it when the port
// never opened (a live session that could not start leaves no file behind).
func (l *Link) closeRecordFile() {
	l.recMu.Lock()
	if l.recFile != nil {
		if err := l.recFile.Close(); err != nil && l.recErr == nil {
			l.recErr = fmt.Errorf("telemetry: close %s: %w", telemetry.SanitizeN([]byte(l.opt.RecordPath), 200), err)
		}
	}
	hadFile := l.recFile != nil
	l.rec = nil // a stuck reader that wakes up later records nothing
	l.recMu.Unlock()
	if !hadFile {
		return
	}
	l.mu.Lock()
	opened := l.stats.Opens > 0
	l.mu.Unlock()
	if !opened {
		os.Remove(l.opt.RecordPath)
	}
}
