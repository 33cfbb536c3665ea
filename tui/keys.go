package tui

import "github.com/charmbracelet/bubbles/key"

// KeyMap holds every key binding of the screen, each with its help text. It provides
// ShortHelp and FullHelp for bubbles/help; SetState turns bindings on and off so the help
// shows only what works in the current state.
type KeyMap struct {
	Quit        key.Binding
	Help        key.Binding
	Pause       key.Binding
	ZoomIn      key.Binding
	ZoomOut     key.Binding
	Back        key.Binding
	Forward     key.Binding
	Latest      key.Binding
	NextView    key.Binding
	PrevView    key.Binding
	PickView    key.Binding
	LineUp      key.Binding
	LineDown    key.Binding
	PageUp      key.Binding
	PageDown    key.Binding
	Apply       key.Binding
	Mark        key.Binding
	Faster      key.Binding
	Slower      key.Binding
	Advance     key.Binding
	NextSP      key.Binding
	PrevSP      key.Binding
	NextSegment key.Binding
	PrevSegment key.Binding
	NextMark    key.Binding
	PrevMark    key.Binding
	NextEvent   key.Binding
	PrevEvent   key.Binding
	Tenth       key.Binding
	Rewind      key.Binding
	Confirm     key.Binding
	Cancel      key.Binding
	Tune        key.Binding
}

// DefaultKeyMap returns the screen's key bindings.
func DefaultKeyMap() KeyMap {
	return KeyMap{
		Quit:        key.NewBinding(key.WithKeys("q", "ctrl+c"), key.WithHelp("q", "quit")),
		Help:        key.NewBinding(key.WithKeys("?", "h"), key.WithHelp("?", "keys")),
		Pause:       key.NewBinding(key.WithKeys(" "), key.WithHelp("space", "hold / run")),
		ZoomIn:      key.NewBinding(key.WithKeys("+", "="), key.WithHelp("+", "zoom in")),
		ZoomOut:     key.NewBinding(key.WithKeys("-", "_"), key.WithHelp("-", "zoom out")),
		Back:        key.NewBinding(key.WithKeys("left"), key.WithHelp("←", "scroll back")),
		Forward:     key.NewBinding(key.WithKeys("right"), key.WithHelp("→", "scroll ahead")),
		Latest:      key.NewBinding(key.WithKeys("f", "end"), key.WithHelp("f", "follow the newest")),
		NextView:    key.NewBinding(key.WithKeys("tab"), key.WithHelp("tab", "next view")),
		PrevView:    key.NewBinding(key.WithKeys("shift+tab"), key.WithHelp("S-tab", "previous view")),
		PickView:    key.NewBinding(key.WithKeys("1", "2", "3", "4", "5"), key.WithHelp("1-5", "that view")),
		LineUp:      key.NewBinding(key.WithKeys("up"), key.WithHelp("↑", "scroll up")),
		LineDown:    key.NewBinding(key.WithKeys("down"), key.WithHelp("↓", "scroll down")),
		PageUp:      key.NewBinding(key.WithKeys("pgup"), key.WithHelp("PgUp", "page up")),
		PageDown:    key.NewBinding(key.WithKeys("pgdown"), key.WithHelp("PgDn", "page down")),
		Apply:       key.NewBinding(key.WithKeys("d"), key.WithHelp("d", "send advised deadband")),
		Mark:        key.NewBinding(key.WithKeys("m"), key.WithHelp("m", "mark this moment")),
		Faster:      key.NewBinding(key.WithKeys("x"), key.WithHelp("x", "replay faster")),
		Slower:      key.NewBinding(key.WithKeys("X"), key.WithHelp("X", "replay slower")),
		Advance:     key.NewBinding(key.WithKeys("n"), key.WithHelp("n", "advance (held)")),
		NextSP:      key.NewBinding(key.WithKeys("s"), key.WithHelp("s", "next setpoint")),
		PrevSP:      key.NewBinding(key.WithKeys("S"), key.WithHelp("S", "previous setpoint")),
		NextSegment: key.NewBinding(key.WithKeys("g"), key.WithHelp("g", "next segment")),
		PrevSegment: key.NewBinding(key.WithKeys("G"), key.WithHelp("G", "previous segment")),
		NextMark:    key.NewBinding(key.WithKeys("m"), key.WithHelp("m", "next mark")),
		PrevMark:    key.NewBinding(key.WithKeys("M"), key.WithHelp("M", "previous mark")),
		NextEvent:   key.NewBinding(key.WithKeys("e"), key.WithHelp("e", "next event")),
		PrevEvent:   key.NewBinding(key.WithKeys("E"), key.WithHelp("E", "previous event")),
		Tenth:       key.NewBinding(key.WithKeys("j"), key.WithHelp("j 0-9", "jump to that tenth")),
		Rewind:      key.NewBinding(key.WithKeys("home"), key.WithHelp("home", "back to the start")),
		Confirm:     key.NewBinding(key.WithKeys("y", "enter"), key.WithHelp("y", "send it")),
		Cancel:      key.NewBinding(key.WithKeys("n", "esc"), key.WithHelp("n/esc", "do not send")),
		Tune:        key.NewBinding(key.WithKeys("t"), key.WithHelp("t", "tune the loop")),
	}
}

// replayKeys returns the bindings that steer a replay.
func (k *KeyMap) replayKeys() []*key.Binding {
	return []*key.Binding{&k.Faster, &k.Slower, &k.NextSP, &k.PrevSP, &k.NextSegment, &k.PrevSegment,
		&k.NextMark, &k.PrevMark, &k.NextEvent, &k.PrevEvent, &k.Tenth, &k.Rewind}
}

// SetState enables the bindings that work now: replay controls only in replay (where m
// goes to the next mark), the deadband key only on a source that accepts commands, the
// note mark only on a live source, advancing only while held.
func (k *KeyMap) SetState(held, replay, canSend bool) {
	for _, b := range k.replayKeys() {
		b.SetEnabled(replay)
	}
	k.Advance.SetEnabled(replay && held)
	k.Mark.SetEnabled(!replay)
	k.Apply.SetEnabled(canSend)
	k.Tune.SetEnabled(canSend)
	k.Forward.SetEnabled(true)
	k.Confirm.SetEnabled(false)
	k.Cancel.SetEnabled(false)
}

// SetConfirming switches to the y/n bindings of a confirmation question and back.
func (k *KeyMap) SetConfirming(on bool) {
	k.Confirm.SetEnabled(on)
	k.Cancel.SetEnabled(on)
}

// pair is one help entry for two bindings (zoom, scroll, replay speed, next/previous).
func pair(a, b key.Binding, keys, desc string) key.Binding {
	p := key.NewBinding(key.WithKeys(append(a.Keys(), b.Keys()...)...), key.WithHelp(keys, desc))
	p.SetEnabled(a.Enabled())
	return p
}

// ShortHelp is the one-line help: bindings people need first, in short words. Pairs of
// keys share one entry.
func (k KeyMap) ShortHelp() []key.Binding {
	if k.Confirm.Enabled() {
		return []key.Binding{k.Confirm, k.Cancel}
	}
	zoom := pair(k.ZoomIn, k.ZoomOut, "+/-", "zoom")
	scroll := pair(k.Back, k.Forward, "←/→", "scroll")
	speed := pair(k.Faster, k.Slower, "x/X", "speed")
	steps := pair(k.NextSP, k.PrevSP, "s/S", "setpoints")
	apply, pause, mark, tune := k.Apply, k.Pause, k.Mark, k.Tune
	apply.SetHelp("d", "send deadband")
	pause.SetHelp("space", "hold/run")
	mark.SetHelp("m", "mark")
	tune.SetHelp("t", "tune")
	// The most needed first: a narrow terminal cuts the tail (bubbles/help ends it with …).
	return []key.Binding{k.Help, k.Quit, apply, pause, k.NextView, steps, zoom, scroll, speed, mark, tune}
}

// FullHelp is the full key list in columns, every key once; next/previous pairs share
// an entry.
func (k KeyMap) FullHelp() [][]key.Binding {
	if k.Confirm.Enabled() {
		return [][]key.Binding{{k.Confirm, k.Cancel}}
	}
	help := k.Help
	help.SetHelp("?", "close this list")
	return [][]key.Binding{
		{k.Pause, k.ZoomIn, k.ZoomOut, k.Back, k.Forward, k.Latest, help, k.Quit},
		{k.NextView, k.PrevView, k.PickView, k.LineUp, k.LineDown, k.PageUp, k.PageDown},
		{k.Apply, k.Tune, k.Mark,
			pair(k.Faster, k.Slower, "x/X", "faster/slower"), k.Advance,
			pair(k.NextSP, k.PrevSP, "s/S", "next/previous setpoint"),
			pair(k.NextSegment, k.PrevSegment, "g/G", "next/previous segment"),
			pair(k.NextMark, k.PrevMark, "m/M", "next/previous mark"),
			pair(k.NextEvent, k.PrevEvent, "e/E", "next/previous event"),
			k.Tenth, k.Rewind},
	}
}
