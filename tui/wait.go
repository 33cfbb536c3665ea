package tui

import (
	"time"

	tea "github.com/charmbracelet/bubbletea"

	"github.com/caploop/caploop/tui/live"
)

// frameInterval is the shortest time between two frames: the screen redraws at most
// 20 times a second, however fast the source (smooth enough for a trace that scrolls,
// and a third less drawing than 30; FrameRate is the same for the renderer).
const frameInterval = time.Second / FrameRate

// FrameRate is the most frames a second the screen draws; the program's renderer should
// run at it too (tea.WithFPS), so it does not wake more often than frames come.
const FrameRate = 20

// Messages from the pipeline to the screen.
type (
	samplesMsg struct {
		src  *live.Pipeline
		snap live.Snapshot
	}
	sourceErrMsg struct {
		src *live.Pipeline
		err error
	}
	sourceDoneMsg struct{ src *live.Pipeline }
)

// wait returns the command that waits for the next frame's worth of data from p, no
// sooner than frameInterval after the previous frame (since).
func wait(p *live.Pipeline, since time.Time) tea.Cmd { return waitEvery(p, since, frameInterval) }

// waitEvery is wait with the time between frames given.
func waitEvery(p *live.Pipeline, since time.Time, every time.Duration) tea.Cmd {
	return func() tea.Msg {
		if d := time.Until(since.Add(every)); d > 0 {
			time.Sleep(d)
		}
		select {
		case <-p.Ready():
		case <-p.Done():
		}
		s := p.Take()
		switch {
		case s.Err != nil && len(s.Points) == 0 && s.Summary == nil:
			return sourceErrMsg{p, s.Err}
		case s.Done && s.Empty():
			return sourceDoneMsg{p}
		}
		return samplesMsg{p, s}
	}
}
