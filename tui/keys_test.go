package tui

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"

	"github.com/caploop/caploop/tui/live"
)

// landmarkCapture writes a 3 s capture at 1 kS/s with landmarks at known times: the
// setpoint steps at 1 s and 2 s, marks at 0.5 s and 2.5 s, and "set deadband=9" sent and
// confirmed at 1.5 s (an event, and a new segment), a note at 2.2 s (an event).
func landmarkCapture(t *testing.T) string {
	t.Helper()
	var b strings.Builder
	b.WriteString("#caploop-capture v1 start=2026-03-01T09:00:00.000000Z source=test\n")
	b.WriteString("0.000000 < # vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=4\n")
	for k := 0; k <= 3000; k++ {
		host := float64(k) / 1000
		sp := []int{400, 600, 500, 500}[k/1000]
		fmt.Fprintf(&b, "%.6f < t=%d n=%d sp=%d pv=%d u=0\n", host, k*1000, k, sp, sp-1+k%3)
		switch k {
		case 500:
			fmt.Fprintf(&b, "%.6f ! mark fan on\n", host)
		case 1500:
			fmt.Fprintf(&b, "%.6f > set deadband=9\n", host)
			fmt.Fprintf(&b, "%.6f < # deadband=9\n", host)
		case 2200:
			fmt.Fprintf(&b, "%.6f ! fan speed high\n", host)
		case 2500:
			fmt.Fprintf(&b, "%.6f ! mark lid open\n", host)
		}
	}
	path := filepath.Join(t.TempDir(), "landmarks.cap")
	if err := os.WriteFile(path, []byte(b.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	return path
}

// heldReplay opens the landmark capture held at its start on a 120x40 screen.
func heldReplay(t *testing.T) (*Model, func(what string, ok func() bool)) {
	t.Helper()
	p, err := live.NewReplay(live.ReplayOptions{Path: landmarkCapture(t), Speed: 1, Paused: true, Options: live.Options{NoAdvice: true}})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { p.Close() })
	m := New(p, Options{Span: 1})
	mm, _ := m.Update(tea_WindowSize(120, 40))
	m = mm.(Model)
	pump := framePump(t, &m)
	pump("held at the start", func() bool { return m.status.st.State == live.StateHeld })
	return &m, pump
}

// helpEntries returns the entries of the full key list (?) in a state, by their key text.
func helpEntries(held, replay, canSend bool) map[string]string {
	k := DefaultKeyMap()
	k.SetState(held, replay, canSend)
	out := map[string]string{}
	for _, col := range k.FullHelp() {
		for _, b := range col {
			if b.Enabled() {
				out[b.Help().Key] = b.Help().Desc
			}
		}
	}
	return out
}

// TestEveryKeyInHelp presses every key the full key list shows, on a held replay of a
// capture with known landmarks and on a live screen, and checks that it does what the
// list says. An entry without a check here fails the test, so a new key needs one.
func TestEveryKeyInHelp(t *testing.T) {
	t.Parallel()
	// at checks that a held replay sits at want seconds and the message says so.
	at := func(t *testing.T, m *Model, pump func(string, func() bool), what string, want float64) {
		t.Helper()
		pump(what, func() bool {
			return m.status.st.State == live.StateHeld && math.Abs(m.status.st.Position-want) < 1e-6 && strings.HasPrefix(m.message, "jumped")
		})
	}
	// jumps presses next twice and previous once, expecting the given times.
	jumps := func(next, prev string, t1, t2 float64) func(t *testing.T) {
		return func(t *testing.T) {
			m, pump := heldReplay(t)
			*m = press(t, *m, next)
			at(t, m, pump, next, t1)
			m.message = ""
			*m = press(t, *m, next)
			at(t, m, pump, next+" again", t2)
			m.message = ""
			*m = press(t, *m, prev)
			at(t, m, pump, prev, t1)
		}
	}
	view := func(keys string, want View) func(t *testing.T) {
		return func(t *testing.T) {
			m := fixtureModel(t, 80, 24)
			if keys == "S-tab" {
				m = press(t, m, "2")
			}
			m = press(t, m, keys)
			if keys == "S-tab" {
				want = ViewTrace
			}
			if m.view != want {
				t.Errorf("after %q the view is %s, want %s", keys, m.view, want)
			}
		}
	}
	checks := map[string]func(t *testing.T){
		"space": func(t *testing.T) {
			m, pump := heldReplay(t)
			*m = press(t, *m, " ")
			pump("running", func() bool { return m.status.st.State == live.StateRunning })
			*m = press(t, *m, " ")
			pump("held", func() bool { return m.status.st.State == live.StateHeld })
		},
		"+": func(t *testing.T) {
			if m := press(t, fixtureModel(t, 80, 24), "+"); m.plot.Span() != 1.5 {
				t.Errorf("span after + = %g s, want 1.5 s", m.plot.Span())
			}
		},
		"-": func(t *testing.T) {
			if m := press(t, fixtureModel(t, 80, 24), "+", "+", "-"); m.plot.Span() != 1.5 {
				t.Errorf("span after + + - = %g s, want 1.5 s", m.plot.Span())
			}
		},
		"←": func(t *testing.T) {
			m := press(t, fixtureModel(t, 80, 24), "+", "left")
			if m.plot.follow || m.plot.end >= m.plot.Latest() {
				t.Errorf("after ← the plot follows %v, ends at %g s of %g s", m.plot.follow, m.plot.end, m.plot.Latest())
			}
		},
		"→": func(t *testing.T) {
			m := press(t, fixtureModel(t, 80, 24), "+", "left", "left")
			end := m.plot.end
			if m = press(t, m, "right"); m.plot.end <= end {
				t.Errorf("→ moved the plot's end from %g s to %g s", end, m.plot.end)
			}
		},
		"f": func(t *testing.T) {
			if m := press(t, fixtureModel(t, 80, 24), "+", "left", "f"); !m.plot.follow {
				t.Error("f does not follow the newest point")
			}
		},
		"?": func(t *testing.T) {
			m := press(t, fixtureModel(t, 80, 24), "?")
			if !m.full {
				t.Fatal("? does not show the key list")
			}
			if m = press(t, m, "?"); m.full {
				t.Error("? does not close the key list")
			}
		},
		"q": func(t *testing.T) {
			_, cmd := fixtureModel(t, 80, 24).Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("q")})
			if cmd == nil || cmd() != tea.Quit() {
				t.Error("q does not quit")
			}
		},
		"tab":   view("tab", ViewFigures),
		"S-tab": view("S-tab", ViewTrace),
		"1-5": func(t *testing.T) {
			for v := View(0); v < numViews; v++ {
				view(fmt.Sprint(int(v)+1), v)(t)
			}
		},
		"↓": func(t *testing.T) {
			m := press(t, fixtureModel(t, 80, 24), "2", "down")
			if m.offsets[ViewFigures] != 1 || !strings.Contains(m.View(), "lines 2–") {
				t.Errorf("↓ on view 2: offset %d, screen:\n%s", m.offsets[ViewFigures], m.View())
			}
		},
		"↑": func(t *testing.T) {
			m := press(t, fixtureModel(t, 80, 24), "2", "down", "down", "up")
			if m.offsets[ViewFigures] != 1 {
				t.Errorf("↓ ↓ ↑ on view 2: offset %d, want 1", m.offsets[ViewFigures])
			}
		},
		"PgDn": func(t *testing.T) {
			m := press(t, fixtureModel(t, 80, 24), "2", "pgdown", "pgdown", "pgdown", "pgdown")
			if !strings.Contains(m.View(), "of "+fmt.Sprint(len(m.scrollLines()))+" · the end") {
				t.Errorf("PgDn does not reach the end of view 2:\n%s", m.View())
			}
		},
		"PgUp": func(t *testing.T) {
			m := press(t, fixtureModel(t, 80, 24), "2", "pgdown", "pgdown", "pgdown", "pgup", "pgup", "pgup", "pgup")
			if m.offsets[ViewFigures] != 0 || !strings.Contains(m.View(), "lines 1–") {
				t.Errorf("PgUp does not come back to the top of view 2 (offset %d)", m.offsets[ViewFigures])
			}
		},
		"d": func(t *testing.T) {
			m := liveFixture(t)
			if m = press(t, m, "d"); m.confirm != 4 || !strings.Contains(m.message, "set deadband=4") {
				t.Errorf("d asks %q (confirm %d), want to send the advised deadband 4", m.message, m.confirm)
			}
		},
		"t": func(t *testing.T) {
			// The fixture's source takes commands but has no board link: t says so and
			// starts nothing (the tmux test in cmd/caploop runs a whole tune on the view).
			m := press(t, liveFixture(t), "t")
			if m.tv.run != nil || !strings.Contains(m.message, "cannot tune") {
				t.Errorf("t on a source without a link: run %v, message %q", m.tv.run, m.message)
			}
		},
		"m": func(t *testing.T) {
			if m := press(t, liveFixture(t), "m"); !m.noting {
				t.Error("m on a live screen does not open the note for a mark")
			}
		},
		"x/X": func(t *testing.T) {
			m, pump := heldReplay(t)
			*m = press(t, *m, "x")
			pump("2x", func() bool { return m.status.st.Speed == 2 })
			*m = press(t, *m, "X", "X")
			pump("1x", func() bool { return m.status.st.Speed == 1 })
		},
		"n": func(t *testing.T) {
			m, pump := heldReplay(t)
			*m = press(t, *m, "n") // a tenth of the 1 s window
			pump("advanced", func() bool {
				return m.status.st.State == live.StateHeld && math.Abs(m.status.st.Position-0.1) < 1e-6
			})
		},
		"s/S": jumps("s", "S", 1, 2),
		"g/G": jumps("g", "G", 1, 1.5),
		"m/M": jumps("m", "M", 0.5, 2.5),
		"e/E": jumps("e", "E", 1.5, 2.2),
		"j 0-9": func(t *testing.T) {
			m, pump := heldReplay(t)
			*m = press(t, *m, "j", "5")
			at(t, m, pump, "j5", 1.5)
		},
		"home": func(t *testing.T) {
			m, pump := heldReplay(t)
			*m = press(t, *m, "x", "x", "x", " ")
			pump("end", func() bool { return m.status.st.State == live.StateEnded })
			*m = press(t, *m, " ", "home")
			at(t, m, pump, "rewound", 0)
		},
	}
	seen := map[string]bool{}
	for _, state := range []struct{ held, replay, canSend bool }{{true, true, false}, {false, true, false}, {false, false, true}} {
		for k := range helpEntries(state.held, state.replay, state.canSend) {
			seen[k] = true
		}
	}
	var keys []string
	for k := range seen {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		check, ok := checks[k]
		if !ok {
			t.Errorf("the key list shows %q, which this test does not check", k)
			continue
		}
		t.Run(k, func(t *testing.T) {
			t.Parallel()
			check(t)
		})
	}
	for k := range checks {
		if !seen[k] {
			t.Errorf("this test checks %q, which the key list does not show", k)
		}
	}
}

// liveFixture is the fixture on a live source that takes commands.
func liveFixture(t *testing.T) Model { return liveFixtureSized(t, 80, 24) }

func liveFixtureSized(t testing.TB, width, height int) Model {
	m := fixtureModel(t, width, height)
	p := live.NewIdle("bench", live.IdleOptions{Send: func(string) error { return nil }})
	t.Cleanup(func() { p.Close() })
	m.src = p
	m.status.replay = false
	m.keys.SetState(false, false, true)
	return m
}

// TestReadmeKeys reads the README's key table and checks it against the key map: the
// same keys with the same words, every entry of the key list in every state.
func TestReadmeKeys(t *testing.T) {
	data, err := os.ReadFile("../README.md")
	if err != nil {
		t.Fatal(err)
	}
	_, table, ok := strings.Cut(string(data), "## Keys on the bench screen")
	if !ok {
		t.Fatal("README has no \"## Keys on the bench screen\" section")
	}
	table, _, _ = strings.Cut(table, "\n## ")
	row := regexp.MustCompile("(?m)^\\| `([^`]+)` \\| ([^|]+) \\| ([^|]+) \\|$")
	readme := map[string]string{}
	for _, r := range row.FindAllStringSubmatch(table, -1) {
		readme[r[1]+" "+strings.TrimSpace(r[3])] = strings.TrimSpace(r[2])
	}
	// Where a key works: on both kinds of source ("all"), on a live one, on a replay, or
	// on a held replay only.
	onLive := helpEntries(false, false, true)
	running := helpEntries(false, true, false)
	held := helpEntries(true, true, false)
	want := map[string]string{}
	for k, d := range onLive {
		where := "live"
		if running[k] == d {
			where = "all"
		}
		want[k+" "+where] = d
	}
	for k, d := range held {
		if onLive[k] == d {
			continue
		}
		where := "replay"
		if _, ok := running[k]; !ok {
			where = "replay, held"
		}
		want[k+" "+where] = d
	}
	for k, d := range want {
		if got, ok := readme[k]; !ok {
			t.Errorf("README's key table lacks %q (%s)", k, d)
		} else if got != d {
			t.Errorf("README says %q does %q; the key map says %q", k, got, d)
		}
	}
	for k := range readme {
		if _, ok := want[k]; !ok {
			t.Errorf("README's key table lists %q, which the key map does not have", k)
		}
	}
}
