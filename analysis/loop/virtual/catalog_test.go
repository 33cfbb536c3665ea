package virtual

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/caploop/caploop/telemetry"
)

// TestTestdataUpToDate regenerates the captures of testdata into a temporary directory
// and compares them byte for byte with the committed ones: the generator is
// deterministic and the committed files are what the code makes.
func TestTestdataUpToDate(t *testing.T) {
	dir := t.TempDir()
	if err := GenerateTestdata(dir); err != nil {
		t.Fatal(err)
	}
	files, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(files) != 2*len(Captures())+1 {
		t.Errorf("%d files generated, want %d", len(files), 2*len(Captures())+1)
	}
	for _, f := range files {
		got, err := os.ReadFile(filepath.Join(dir, f.Name()))
		if err != nil {
			t.Fatal(err)
		}
		want, err := os.ReadFile(filepath.Join("..", "..", "..", "testdata", f.Name()))
		if err != nil {
			t.Errorf("%s: %v (run go run ./testdata/gen from the module root)", f.Name(), err)
			continue
		}
		if !bytes.Equal(got, want) {
			t.Errorf("testdata/%s differs from a fresh run of the generator (run go run ./testdata/gen)", f.Name())
		}
		if len(got) > 300<<10 {
			t.Errorf("testdata/%s is %d bytes, want at most 300 KiB", f.Name(), len(got))
		}
	}
}

// TestCapturesRead reads every generated capture with the project's Scanner and checks it
// against its truth file: sample count, rejected lines (faults only), and meta lines.
func TestCapturesRead(t *testing.T) {
	dir := t.TempDir()
	for _, c := range Captures() {
		t.Run(c.File, func(t *testing.T) {
			if err := WriteCapture(dir, c); err != nil {
				t.Fatal(err)
			}
			var tr Truth
			js, err := os.ReadFile(filepath.Join(dir, TruthFile(c.File)))
			if err != nil {
				t.Fatal(err)
			}
			if err := json.Unmarshal(js, &tr); err != nil {
				t.Fatal(err)
			}
			f, err := os.Open(filepath.Join(dir, c.File))
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			s := telemetry.NewScanner(f)
			s.Name = c.File
			var samples int64
			for s.Scan() {
				if s.Kind() == telemetry.RecSample {
					samples++
				}
			}
			if err := s.Err(); err != nil {
				t.Fatal(err)
			}
			faults := int64(0)
			for _, e := range tr.Events {
				if e.Kind == EvGarbage || e.Kind == EvPartial {
					faults++
				}
			}
			if st := s.Stats(); samples != tr.Lines || st.Rejected != faults {
				t.Errorf("scanner: %d samples, %d rejected; truth: %d data lines, %d fault lines; first rejects %v",
					samples, st.Rejected, tr.Lines, faults, st.FirstRejects)
			}
			m := s.Meta()
			if m.Deadband != float64(lastDeadband(tr)) || m.Vref != tr.ADC.VrefV || m.ADCBits != tr.ADC.Bits {
				t.Errorf("meta deadband %g vref %g bits %d; truth %d %g %d", m.Deadband, m.Vref, m.ADCBits, lastDeadband(tr), tr.ADC.VrefV, tr.ADC.Bits)
			}
			// The scenario in the truth file makes the same stream again.
			sc := DefaultScenario()
			if err := ReadScenario(&sc, strings.NewReader(tr.Scenario), c.File); err != nil {
				t.Fatal(err)
			}
			if got, want := runText(t, sc), runText(t, c.Scenario); got != want {
				t.Error("the truth file's scenario does not reproduce the stream")
			}
		})
	}
}

func lastDeadband(tr Truth) int {
	db := tr.Deadband
	for _, e := range tr.Events {
		if e.Kind == EvSet && strings.HasPrefix(e.Detail, "# deadband=") {
			db = 0
			for _, c := range strings.TrimPrefix(e.Detail, "# deadband=") {
				db = db*10 + int(c-'0')
			}
		}
	}
	return db
}

func runText(t *testing.T, sc Scenario) string {
	out, _ := runBoard(t, sc)
	return out
}
