package main

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// runSummaryTo runs `caploop summary args...` in process with standard output on out.
func runSummaryTo(t *testing.T, out *os.File, args ...string) (stderr string, code int) {
	t.Helper()
	root := newRoot()
	var errb bytes.Buffer
	root.SetOut(out)
	root.SetErr(&errb)
	root.SetArgs(append([]string{"summary", "--quiet"}, args...))
	if err := root.Execute(); err != nil {
		code = 2
		var ee *exitError
		if errors.As(err, &ee) {
			code = ee.code
		}
		errb.WriteString(err.Error())
	}
	return errb.String(), code
}

func TestGateValuesAndFailOn(t *testing.T) {
	t.Parallel()
	good, tuned, follower := capture(t, "three-state-good.txt"), capture(t, "tuned.cap"), capture(t, "follower-limit.txt")
	cases := []struct {
		name string
		args []string
		code int
		msg  string // exact error message (the last line of stderr)
	}{
		{"bare number", []string{"--max-ripple", "20", good}, 2,
			`summary: --max-ripple "20": give the limit with its unit, such as 20mV or 0.02V`},
		{"bare number of seconds", []string{"--max-settle", "150", good}, 2,
			`summary: --max-settle "150": give the limit with its unit, such as 150ms or 0.15s`},
		{"wrong unit", []string{"--max-error", "5ms", good}, 2,
			`summary: --max-error "5ms": give the limit with its unit, such as 20mV or 0.02V`},
		{"empty value", []string{"--max-ripple", "", good}, 2,
			`summary: --max-ripple is empty (an unset variable?): give a limit, such as 20mV, or leave the flag out`},
		{"blank count", []string{"--max-jumps", " ", good}, 2,
			`summary: --max-jumps is empty (an unset variable?): give a limit, such as 0, or leave the flag out`},
		{"count with a unit", []string{"--max-jumps", "1V", good}, 2,
			`summary: --max-jumps "1V": want a plain whole number >= 0, such as 0 or 3`},
		{"negative limit", []string{"--max-ripple", "-1mV", good}, 2,
			`summary: --max-ripple "-1mV": a limit cannot be negative`},
		{"ESC in a value", []string{"--max-ripple", "2\x1b]0;x\x07", good}, 2,
			`summary: --max-ripple "2\\x1b]0;x\\x07": give the limit with its unit, such as 20mV or 0.02V`},
		{"unit given, passes", []string{"--max-ripple", "100mV", good}, 0, ""},
		{"unit given, fails", []string{"--max-ripple", "85mV", good}, 1,
			"summary: 1 gate failed: " + good + ": max-ripple segment 1 (1.2 V)"},
		// three-state-good.txt: vref=5 V, ripple 87.89 mV = 1.758 % of full scale.
		{"percent, passes", []string{"--max-ripple", "2%", good}, 0, ""},
		{"percent with a space, fails", []string{"--max-ripple", "1.7 %", good}, 1,
			"summary: 1 gate failed: " + good + ": max-ripple segment 1 (1.2 V)"},
		{"percent of a time", []string{"--max-settle", "5%", good}, 2,
			`summary: --max-settle "5%": a time limit has no full scale; give it in seconds, such as 150ms or 0.15s`},
		{"percent without a number", []string{"--max-rms", "%", good}, 2,
			`summary: --max-rms "%": want a percentage of full scale, such as 2%`},
		{"percent not a number", []string{"--max-error", "twopc%", good}, 2,
			`summary: --max-error "twopc%": want a percentage of full scale, such as 2%`},
		{"percent negative", []string{"--max-overshoot", "-1%", good}, 2,
			`summary: --max-overshoot "-1%": a limit cannot be negative`},
		{"percent over full scale", []string{"--max-ripple", "120%", good}, 2,
			`summary: --max-ripple "120%": a limit in % of full scale cannot exceed 100%`},
		{"percent infinite", []string{"--max-ripple", "Inf%", good}, 2,
			`summary: --max-ripple "Inf%": want a percentage of full scale, such as 2%`},
		{"fail-on error, error present", []string{"--fail-on", "error", follower}, 1,
			"summary: --fail-on error: 1 diagnostic at error or above: " + follower + ": error unreachable_setpoint"},
		{"fail-on warning, none", []string{"--fail-on", "warning", good}, 0, ""},
		{"fail-on error, only warnings", []string{"--fail-on", "error", tuned}, 0, ""},
		{"fail-on warning, warnings", []string{"--fail-on", "warning", tuned}, 1,
			"summary: --fail-on warning: 2 diagnostics at warning or above: " + tuned + ": warning band_too_narrow; " + tuned + ": warning band_too_narrow"},
		{"fail-on info refused", []string{"--fail-on", "info", good}, 2, `summary: --fail-on "info": want error or warning`},
		{"json and jsonl", []string{"--json", "--jsonl", good}, 2, "summary: give --json or --jsonl, not both"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, stderr, code := runSummaryCmd(t, append([]string{"--no-advice"}, tc.args...)...)
			if code != tc.code {
				t.Fatalf("exit code %d, want %d; stderr:\n%s", code, tc.code, stderr)
			}
			lines := strings.Split(strings.TrimRight(stderr, "\n"), "\n")
			if got := lines[len(lines)-1]; tc.msg != "" && got != tc.msg {
				t.Errorf("message\n got %q\nwant %q", got, tc.msg)
			}
		})
	}
}

func TestSummaryFailingGatesNamed(t *testing.T) {
	t.Parallel()
	good, tuned := capture(t, "three-state-good.txt"), capture(t, "tuned.cap")
	out, _, code := runSummaryCmd(t, "--no-advice", "--max-jumps", "0", "--max-ripple", "85mV", good, tuned)
	if code != 1 {
		t.Fatalf("exit code %d, want 1", code)
	}
	_, list, ok := strings.Cut(out, "\nfailed gates\n")
	if !ok {
		t.Fatalf("no failed gates list:\n%s", out)
	}
	list = strings.Join(strings.Fields(list), " ") // the columns are aligned with spaces
	for _, want := range []string{good + " max-ripple segment 1 (1.2 V) 87.89 mV > 85 mV",
		tuned + " max-jumps segment 1 (1.2 V) 53 > 0", tuned + " max-jumps segment 2 (2 V) 119 > 0"} {
		if !strings.Contains(list, want) {
			t.Errorf("failed gates list lacks %q:\n%s", want, list)
		}
	}
}

func TestSummaryJSONLines(t *testing.T) {
	t.Parallel()
	good, follower := capture(t, "three-state-good.txt"), capture(t, "follower-limit.txt")
	out, errOut, code := runSummaryCmd(t, "--jsonl", "--no-advice", good, follower)
	if code != 0 {
		t.Fatalf("exit code %d: %s", code, errOut)
	}
	lines := strings.Split(strings.TrimRight(out, "\n"), "\n")
	if len(lines) != 2 {
		t.Fatalf("got %d lines, want one document per file (2)", len(lines))
	}
	for i, l := range lines {
		var d struct {
			SchemaVersion *int   `json:"schema_version"`
			Source        string `json:"source"`
		}
		if err := json.Unmarshal([]byte(l), &d); err != nil {
			t.Fatalf("line %d: %v", i+1, err)
		}
		if d.SchemaVersion == nil || *d.SchemaVersion != 1 {
			t.Errorf("line %d: schema_version %v, want 1", i+1, d.SchemaVersion)
		}
	}
	// One file with --json: one object.
	out, _, _ = runSummaryCmd(t, "--json", "--no-advice", good)
	var obj map[string]any
	if err := json.Unmarshal([]byte(out), &obj); err != nil {
		t.Fatalf("one file: not one JSON object: %v", err)
	}
}

// TestSummaryWriteErrors: text or JSON that cannot be written ends with exit code 2 and
// a message, never with exit 0.
func TestSummaryWriteErrors(t *testing.T) {
	t.Parallel()
	good := capture(t, "three-state-good.txt")
	full, err := os.OpenFile("/dev/full", os.O_WRONLY, 0)
	if err != nil {
		t.Skipf("no /dev/full: %v", err)
	}
	defer full.Close()
	closed, err := os.CreateTemp(t.TempDir(), "closed")
	if err != nil {
		t.Fatal(err)
	}
	closed.Close()
	for _, tc := range []struct {
		name string
		out  *os.File
		args []string
		want string
	}{
		{"text to /dev/full", full, []string{good}, "summary: write to standard output: write /dev/full: no space left on device"},
		{"json to /dev/full", full, []string{"--json", good}, "no space left on device"},
		{"comparison to /dev/full", full, []string{good, good}, "no space left on device"},
		{"junit - to /dev/full", full, []string{"--junit", "-", good}, "write to standard output: write /dev/full: no space left on device"},
		{"text to a closed stdout", closed, []string{good}, "summary: write to standard output: write " + closed.Name() + ": file already closed"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			stderr, code := runSummaryTo(t, tc.out, append([]string{"--no-advice"}, tc.args...)...)
			if code != 2 || !strings.Contains(stderr, tc.want) {
				t.Errorf("exit code %d, stderr %q; want 2 and %q", code, stderr, tc.want)
			}
		})
	}
}

// TestDerivedFileTargets: --report, --junit and --plot refuse a symbolic link and a FIFO
// and leave them as they were; a regular file is replaced and keeps its mode.
func TestDerivedFileTargets(t *testing.T) {
	t.Parallel()
	good := capture(t, "three-state-good.txt")
	dir := t.TempDir()
	victim := filepath.Join(dir, "victim.txt")
	if err := os.WriteFile(victim, []byte("keep me\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	link := filepath.Join(dir, "link.html")
	if err := os.Symlink(victim, link); err != nil {
		t.Fatal(err)
	}
	fifo := filepath.Join(dir, "fifo.html")
	if err := syscall.Mkfifo(fifo, 0o600); err != nil {
		t.Skipf("no FIFO here: %v", err)
	}
	for _, tc := range []struct {
		flag, path, want string
	}{
		{"--report", link, "refusing to write " + link + ": it is a symbolic link"},
		{"--report", fifo, "refusing to write " + fifo + ": it is a FIFO"},
		{"--junit", link, "refusing to write " + link + ": it is a symbolic link"},
		{"--junit", fifo, "refusing to write " + fifo + ": it is a FIFO"},
	} {
		_, stderr, code := runSummaryCmd(t, "--no-advice", tc.flag, tc.path, good)
		if code != 2 || !strings.Contains(stderr, tc.want) {
			t.Errorf("%s %s: exit code %d, stderr %q; want 2 and %q", tc.flag, tc.path, code, stderr, tc.want)
		}
	}
	if b, _ := os.ReadFile(victim); string(b) != "keep me\n" {
		t.Errorf("the link's target changed: %q", b)
	}
	if fi, err := os.Lstat(link); err != nil || fi.Mode()&os.ModeSymlink == 0 {
		t.Errorf("the symbolic link was replaced: %v %v", fi, err)
	}
	if fi, err := os.Lstat(fifo); err != nil || fi.Mode()&os.ModeNamedPipe == 0 {
		t.Errorf("the FIFO was replaced: %v %v", fi, err)
	}
	// A regular file is replaced and keeps its mode.
	junit := filepath.Join(dir, "gates.xml")
	if err := os.WriteFile(junit, []byte("old"), 0o640); err != nil {
		t.Fatal(err)
	}
	if _, stderr, code := runSummaryCmd(t, "--no-advice", "--max-jumps", "0", "--junit", junit, good); code != 0 {
		t.Fatalf("exit code %d: %s", code, stderr)
	}
	fi, err := os.Stat(junit)
	if err != nil || fi.Mode().Perm() != 0o640 || fi.Size() < 100 {
		t.Errorf("junit file: %v %v; want a new report with mode 0640", fi, err)
	}
	left, _ := filepath.Glob(filepath.Join(dir, ".*.tmp"))
	if len(left) > 0 {
		t.Errorf("temporary files left behind: %v", left)
	}
}

// hostileName is a file name with ESC (a colour), OSC 52 (which would write the
// clipboard), OSC 0 (the window title) and U+202E (which reverses the text after it).
const hostileName = "run\x1b[31m\x1b]52;c;aGk=\x07\x1b]0;pwned\x07\u202ereversed.txt"

// rawControls reports whether s holds a raw ESC, BEL or a bidi control.
func rawControls(s string) bool {
	return strings.ContainsAny(s, "\x1b\x07\u202e\u202d\u2066\u2067\u2068\u2069")
}

// TestHostileFileNameStderr: a file name with escapes reaches standard error only as
// escaped text, in every message that names it.
func TestHostileFileNameStderr(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	missing := filepath.Join(dir, hostileName)
	empty := filepath.Join(dir, hostileName+".empty")
	if err := os.WriteFile(empty, []byte("# only a comment\nnot a sample\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	gz := filepath.Join(dir, hostileName+".gz")
	if err := os.WriteFile(gz, []byte{0x1f, 0x8b, 0, 1, 2, 3}, 0o644); err != nil {
		t.Fatal(err)
	}
	rejects := filepath.Join(dir, hostileName+".rej")
	good, err := os.ReadFile(capture(t, "three-state-good.txt"))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(rejects, append(append([]byte{}, good...), "sp=12 pv=oops\n"...), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		args []string
		want string
	}{
		{"open error", []string{missing}, `run\x1b[31m\x1b]52;c;aGk=\x07\x1b]0;pwned\x07\u{202e}reversed.txt: no such file or directory`},
		{"no samples", []string{empty}, `reversed.txt.empty: no samples in 2 lines`},
		{"gzip", []string{gz}, `reversed.txt.gz: bad gzip data`},
		{"report target", []string{"--report", filepath.Join(dir, hostileName, "r.html"), capture(t, "three-state-good.txt")}, `\u{202e}reversed.txt/r.html`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, stderr, code := runSummaryCmd(t, append([]string{"--no-advice"}, tc.args...)...)
			if code != 2 {
				t.Errorf("exit code %d, want 2", code)
			}
			if rawControls(stderr) {
				t.Errorf("raw control bytes on stderr: %q", stderr)
			}
			if !strings.Contains(stderr, tc.want) {
				t.Errorf("stderr %q lacks %q", stderr, tc.want)
			}
		})
	}
	// The rejected-lines diagnostic names the file: "the first: NAME:6001: ...".
	out, stderr, _ := runSummaryCmd(t, "--no-advice", rejects)
	if rawControls(out) || rawControls(stderr) {
		t.Errorf("raw control bytes in the text: %q", out)
	}
	if !strings.Contains(out, `\u{202e}reversed.txt.rej:`) {
		t.Errorf("the diagnostic does not name the file, escaped:\n%s", out)
	}
	// main's last word: errorText sanitises whatever error reaches it.
	if got := errorText(errors.New("open " + hostileName + ": gone\nsecond " + hostileName)); rawControls(got) || strings.Count(got, "\n") != 1 {
		t.Errorf("errorText = %q", got)
	}
}

// TestHostileFileNameJUnit: in the JUnit report (on standard output with --junit -) the
// file name is escaped text: well-formed XML 1.0, no C0 or bidi control.
func TestHostileFileNameJUnit(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	data, err := os.ReadFile(capture(t, "three-state-good.txt"))
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, hostileName+"\x01")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	out, stderr, code := runSummaryCmd(t, "--no-advice", "--max-ripple", "1mV", "--junit", "-", path, filepath.Join(dir, "missing"+hostileName))
	if code != 2 {
		t.Fatalf("exit code %d, want 2 (one file missing): %s", code, stderr)
	}
	if strings.HasPrefix(out, "files (worst") || !strings.HasPrefix(out, "<?xml") {
		t.Fatalf("--junit - should be the only thing on standard output:\n%s", out)
	}
	if rawControls(out) || strings.ContainsRune(out, '\x01') || strings.ContainsRune(out, '\uFFFD') {
		t.Errorf("raw control in the XML: %q", out)
	}
	var doc struct {
		Suites []struct {
			Name string `xml:"name,attr"`
		} `xml:"testsuite"`
	}
	if err := xml.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatalf("not XML: %v", err)
	}
	if len(doc.Suites) != 2 || !strings.Contains(doc.Suites[0].Name, `\x1b]52;c;aGk=\x07`) || !strings.HasSuffix(doc.Suites[0].Name, `reversed.txt\x01`) {
		t.Errorf("suites %+v; want the names as escaped text", doc.Suites)
	}
}

// TestLiveRecordNoTerminal: a live session that cannot start (no terminal) leaves no
// capture file behind, and an existing capture is kept.
func TestLiveRecordNoTerminal(t *testing.T) {
	if isTerminal(os.Stdout) {
		t.Skip("standard output is a terminal here")
	}
	dir := t.TempDir()
	path := filepath.Join(dir, "bench.cap")
	cmd := newLiveCmd()
	cmd.SetArgs([]string{filepath.Join(dir, "ttyNONE"), "--wait", "--record", path})
	cmd.SetOut(new(bytes.Buffer))
	cmd.SetErr(new(bytes.Buffer))
	err := cmd.Execute()
	var ee *exitError
	if !errors.As(err, &ee) || ee.code != 2 || !errors.Is(err, errNoTerminal) {
		t.Fatalf("got %v, want exit code 2 and the no-terminal message", err)
	}
	if _, err := os.Lstat(path); !os.IsNotExist(err) {
		t.Errorf("capture left behind: %v", err)
	}
}

// TestReportToStdout: --report - writes the HTML page alone on standard output.
func TestReportToStdout(t *testing.T) {
	t.Parallel()
	out, stderr, code := runSummaryCmd(t, "--no-advice", "--report", "-", capture(t, "three-state-good.txt"))
	if code != 0 {
		t.Fatalf("exit code %d: %s", code, stderr)
	}
	if !strings.HasPrefix(strings.TrimSpace(out), "<!DOCTYPE html>") || strings.Contains(out, "files (worst") {
		t.Errorf("standard output is not the report alone: %.200q", out)
	}
	if _, _, code := runSummaryCmd(t, "--report", "-", "--junit", "-", capture(t, "three-state-good.txt")); code != 2 {
		t.Errorf("--report - with --junit -: exit code %d, want 2", code)
	}
}

// TestGatePercentSaysFullScale checks that a limit in % is judged against the file's
// vref and that the verdict line says so (three-state-good.txt: vref=5 V).
func TestGatePercentSaysFullScale(t *testing.T) {
	t.Parallel()
	good := capture(t, "three-state-good.txt")
	out, _, code := runSummaryCmd(t, "--no-advice", "--max-ripple", "1.7%", good)
	if code != 1 {
		t.Fatalf("exit %d, want 1\n%s", code, out)
	}
	if want := "87.89 mV > 85 mV (1.7% of vref 5 V)"; !strings.Contains(out, want) {
		t.Errorf("output lacks %q:\n%s", want, out)
	}
}
