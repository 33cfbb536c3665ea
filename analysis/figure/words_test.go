package figure

import (
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

func TestCount(t *testing.T) {
	for _, tc := range []struct {
		got, want string
	}{
		{Count(1, "band jump"), "1 band jump"},
		{Count(2, "band jump"), "2 band jumps"},
		{Count(0, "setpoint"), "0 setpoints"},
		{Count(int64(1), "more setpoint"), "1 more setpoint"},
		{Count(1, "entry"), "1 entry"},
		{Count(3, "entry"), "3 entries"},
		{Count(2, "day"), "2 days"},
		{Count(2, "glitch"), "2 glitches"},
		{Count(2, "pass"), "2 passes"},
		{Count(1.0, "count"), "1 count"},
		{Count(-1.0, "count"), "-1 count"},
		{Count(1.5, "count"), "1.5 counts"},
		{Count(4.0, "count"), "4 counts"},
		{Noun(1, "limit cycle"), "limit cycle"},
		{Noun(7, "limit cycle"), "limit cycles"},
		{CountText("±1", "count"), "±1 count"},
		{CountText("1.0", "count"), "1.0 counts"},
		{CountText("12", "count"), "12 counts"},
		{CountText("–", "count"), "– counts"},
	} {
		if tc.got != tc.want {
			t.Errorf("got %q, want %q", tc.got, tc.want)
		}
	}
}

// singularMismatch finds "1 <plural>" and "one <plural>": a count of one (after a space,
// a start of line or a tag, signed or not) followed by up to one more word and a word
// that ends in s.
var singularMismatch = regexp.MustCompile(`(?m)(?:^|[\s(>]|&#177;|&#43;)[±+−-]?(?:1|one) (?:[a-z]+ )?([a-z]+s)\b`)

// notPlural are the words ending in s that are no plural: units and the like.
var notPlural = map[string]bool{"ms": true, "us": true, "µs": true, "ns": true, "ps": true, "rms": true,
	"is": true, "was": true, "has": true, "this": true, "its": true, "plus": true, "as": true, "series": true,
	"less": true, "across": true, "does": true, "goes": true, "stays": true}

// TestGoldenWording reads every golden file of the project (the screen's views, the
// reports' tables, the summary texts) and fails on a count of one followed by a plural
// noun ("1 band jumps", "±1 counts").
func TestGoldenWording(t *testing.T) {
	root := filepath.Join("..", "..")
	var files []string
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() && (d.Name() == ".git" || d.Name() == "node_modules") {
			return filepath.SkipDir
		}
		slash := filepath.ToSlash(path)
		if strings.HasSuffix(path, ".golden") || (strings.Contains(slash, "cmd/caploop/testdata/summary/") && strings.HasSuffix(path, ".txt")) {
			files = append(files, path)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(files) < 50 {
		t.Fatalf("found %d golden files, want the project's (50 or more)", len(files))
	}
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		for _, m := range singularMismatch.FindAllStringSubmatch(string(data), -1) {
			if !notPlural[m[1]] {
				t.Errorf("%s: %q: a count of one with a plural", f, strings.TrimSpace(m[0]))
			}
		}
	}
}

// TestMismatchPattern checks that the wording test catches what it is for.
func TestMismatchPattern(t *testing.T) {
	for _, s := range []string{"1 band jumps", "at 1 more setpoints", "±1 counts", "&#177;1 counts", "(1 samples)", "&#43;1 counts", " -1 counts", "one more lines"} {
		m := singularMismatch.FindStringSubmatch(s)
		if m == nil || notPlural[m[1]] {
			t.Errorf("%q is not caught", s)
		}
	}
	for _, s := range []string{"1 band jump", "11 band jumps", "2.1 counts", "1 ms hold", "1 ms rms", "0.1 samples"} {
		if m := singularMismatch.FindStringSubmatch(s); m != nil && !notPlural[m[1]] {
			t.Errorf("%q is caught (%q)", s, m[0])
		}
	}
}
