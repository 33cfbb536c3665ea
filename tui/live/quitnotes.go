package live

import (
	"fmt"
	"path/filepath"
	"sync"
	"time"

	"github.com/caploop/caploop/telemetry"
)

// markLog keeps the marks made on a live source, so that the program can say on quit
// where they went: into the capture, or nowhere when it was not recording.
type markLog struct {
	mu    sync.Mutex
	start time.Time
	marks []markNote
}

type markNote struct {
	at   time.Duration
	note string
}

func (l *markLog) add(note string) {
	l.mu.Lock()
	defer l.mu.Unlock()
	l.marks = append(l.marks, markNote{at: time.Since(l.start), note: note})
}

func (l *markLog) list() []markNote {
	l.mu.Lock()
	defer l.mu.Unlock()
	return append([]markNote(nil), l.marks...)
}

// plural returns "1 mark" or "3 marks".
func plural(n int64, word string) string {
	if n == 1 {
		return "1 " + word
	}
	return fmt.Sprintf("%d %ss", n, word)
}

// recordNotes are the lines printed after a live screen ends: the capture written (path,
// lines, marks), or the marks that were not saved because nothing was recording, each
// with its time and note so they are not lost.
func recordNotes(record string, lines int64, marks []markNote, recErr error) []string {
	if record != "" {
		path := telemetry.SanitizeN([]byte(record), 200)
		if abs, err := filepath.Abs(record); err == nil {
			path = telemetry.SanitizeN([]byte(abs), 200)
		}
		if recErr != nil {
			return []string{fmt.Sprintf("capture %s may be incomplete: %s", path, telemetry.SanitizeN([]byte(recErr.Error()), 200))}
		}
		return []string{fmt.Sprintf("capture %s: %s, %s", path, plural(lines, "board line"), plural(int64(len(marks)), "mark"))}
	}
	if len(marks) == 0 {
		return nil
	}
	out := []string{fmt.Sprintf("%s not saved (not recording; live --record FILE keeps them in the capture):", plural(int64(len(marks)), "mark"))}
	for _, m := range marks {
		out = append(out, fmt.Sprintf("  %9.3f s  %s", m.at.Seconds(), telemetry.SanitizeN([]byte(m.note), 80)))
	}
	return out
}

// QuitNotes returns what the program should print after the screen ends and Close has
// returned: for a live port, the capture written or the marks that were not saved.
func (p *Pipeline) QuitNotes() []string {
	if p.notesFn == nil {
		return nil
	}
	return p.notesFn()
}
