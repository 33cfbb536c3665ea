package wire

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"syscall"
	"time"

	"github.com/caploop/caploop/telemetry"
)

// openRecord sets up the capture writer from the options.
func (l *Link) openRecord() error {
	w := l.opt.Record
	if w == nil && l.opt.RecordPath != "" {
		f, err := os.Create(l.opt.RecordPath)
		if err != nil {
			return fmt.Errorf("telemetry: create capture: %w", err)
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
