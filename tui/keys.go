package tui

import "github.com/charmbracelet/bubbles/key"

// KeyMap holds every key binding of the screen, each with its help text. It provides
// ShortHelp and FullHelp for bubbles/help; SetState turns bindings on and off so the help
// shows only what works in the current state.
type KeyMap struct {
	Quit      key.Binding
	Help      key.Binding
	Pause     key.Binding
	ZoomIn    key.Binding
	ZoomOut   key.Binding
	Back      key.Binding
	Forward   key.Binding
	Latest    key.Binding
	NextView  key.Binding
	PrevView  key.Binding
	Trace     key.Binding
	Figures   key.Binding
	Spread    key.Binding
	Ripple    key.Binding
	Step      key.Binding
	Apply     key.Binding
	Mark      key.Binding
	Faster    key.Binding
	Slower    key.Binding
	StepOnce  key.Binding
	SeekBack  key.Binding
	SeekAhead key.Binding
	Confirm   key.Binding
	Cancel    key.Binding
}

// DefaultKeyMap returns the screen's key bindings.
func DefaultKeyMap() KeyMap {
	return KeyMap{
		Quit:      key.NewBinding(key.WithKeys("q", "ctrl+c"), key.WithHelp("q", "quit")),
		Help:      key.NewBinding(key.WithKeys("?", "h"), key.WithHelp("?", "keys")),
		Pause:     key.NewBinding(key.WithKeys(" ", "p"), key.WithHelp("space", "hold / run")),
		ZoomIn:    key.NewBinding(key.WithKeys("+", "="), key.WithHelp("+", "zoom in")),
		ZoomOut:   key.NewBinding(key.WithKeys("-", "_"), key.WithHelp("-", "zoom out")),
		Back:      key.NewBinding(key.WithKeys("left"), key.WithHelp("←", "scroll back")),
		Forward:   key.NewBinding(key.WithKeys("right"), key.WithHelp("→", "scroll ahead")),
		Latest:    key.NewBinding(key.WithKeys("end", "G"), key.WithHelp("G", "follow the newest")),
		NextView:  key.NewBinding(key.WithKeys("tab"), key.WithHelp("tab", "next view")),
		PrevView:  key.NewBinding(key.WithKeys("shift+tab"), key.WithHelp("S-tab", "previous view")),
		Trace:     key.NewBinding(key.WithKeys("1"), key.WithHelp("1", "trace")),
		Figures:   key.NewBinding(key.WithKeys("2"), key.WithHelp("2", "figures, advice")),
		Spread:    key.NewBinding(key.WithKeys("3"), key.WithHelp("3", "error spread")),
		Ripple:    key.NewBinding(key.WithKeys("4"), key.WithHelp("4", "ripple spectrum")),
		Step:      key.NewBinding(key.WithKeys("5"), key.WithHelp("5", "last step")),
		Apply:     key.NewBinding(key.WithKeys("d"), key.WithHelp("d", "send advised deadband")),
		Mark:      key.NewBinding(key.WithKeys("m"), key.WithHelp("m", "mark this moment")),
		Faster:    key.NewBinding(key.WithKeys("]"), key.WithHelp("]", "replay faster")),
		Slower:    key.NewBinding(key.WithKeys("["), key.WithHelp("[", "replay slower")),
		StepOnce:  key.NewBinding(key.WithKeys("n"), key.WithHelp("n", "step (while held)")),
		SeekBack:  key.NewBinding(key.WithKeys(","), key.WithHelp(",", "seek back 10 s")),
		SeekAhead: key.NewBinding(key.WithKeys("."), key.WithHelp(".", "seek ahead 10 s")),
		Confirm:   key.NewBinding(key.WithKeys("y", "enter"), key.WithHelp("y", "send it")),
		Cancel:    key.NewBinding(key.WithKeys("n", "esc"), key.WithHelp("n/esc", "do not send")),
	}
}

// SetState enables the bindings that work now: replay controls only in replay, the
// deadband key only on a source that accepts commands, stepping only while held.
func (k *KeyMap) SetState(held, replay, canSend bool) {
	k.Faster.SetEnabled(replay)
	k.Slower.SetEnabled(replay)
	k.SeekBack.SetEnabled(replay)
	k.SeekAhead.SetEnabled(replay)
	k.StepOnce.SetEnabled(replay && held)
	k.Apply.SetEnabled(canSend)
	k.Forward.SetEnabled(true)
	k.Confirm.SetEnabled(false)
	k.Cancel.SetEnabled(false)
}

// SetConfirming switches to the y/n bindings of a confirmation question and back.
func (k *KeyMap) SetConfirming(on bool) {
	k.Confirm.SetEnabled(on)
	k.Cancel.SetEnabled(on)
}

// ShortHelp is the one-line help: bindings people need first, in short words. Pairs of keys (zoom,
// scroll, replay speed) share one entry here; the full help lists each key on its own.
func (k KeyMap) ShortHelp() []key.Binding {
	if k.Confirm.Enabled() {
		return []key.Binding{k.Confirm, k.Cancel}
	}
	pair := func(a, b key.Binding, keys, desc string) key.Binding {
		return key.NewBinding(key.WithKeys(append(a.Keys(), b.Keys()...)...), key.WithHelp(keys, desc),
			key.WithDisabled())
	}
	zoom := pair(k.ZoomIn, k.ZoomOut, "+/-", "zoom")
	zoom.SetEnabled(k.ZoomIn.Enabled())
	scroll := pair(k.Back, k.Forward, "←/→", "scroll")
	scroll.SetEnabled(k.Back.Enabled())
	speed := pair(k.Slower, k.Faster, "[/]", "speed")
	speed.SetEnabled(k.Faster.Enabled())
	apply, pause, mark := k.Apply, k.Pause, k.Mark
	apply.SetHelp("d", "send deadband")
	pause.SetHelp("space", "hold/run")
	mark.SetHelp("m", "mark")
	// The most needed first: a narrow terminal cuts the tail (bubbles/help ends it with …).
	return []key.Binding{k.Help, k.Quit, apply, pause, k.NextView, zoom, scroll, speed, mark}
}

// FullHelp is the full key list in columns, every key once.
func (k KeyMap) FullHelp() [][]key.Binding {
	if k.Confirm.Enabled() {
		return [][]key.Binding{{k.Confirm, k.Cancel}}
	}
	help := k.Help
	help.SetHelp("?", "close this list")
	return [][]key.Binding{
		{k.Pause, k.ZoomIn, k.ZoomOut, k.Back, k.Forward, k.Latest, k.Mark},
		{k.NextView, k.PrevView, k.Trace, k.Figures, k.Spread, k.Ripple, k.Step},
		{k.Apply, k.Faster, k.Slower, k.StepOnce, k.SeekBack, k.SeekAhead, help, k.Quit},
	}
}
