package export_test

import (
	"bytes"
	"compress/gzip"
	"encoding/csv"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis/export"
	"github.com/caploop/caploop/telemetry"
)

// exportFile runs both passes over the file at path.
func exportFile(t testing.TB, path string, opts export.Options) ([]byte, *export.Layout, export.Result) {
	t.Helper()
	open := func() *telemetry.Scanner {
		src, err := telemetry.OpenFile(path)
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { src.Close() })
		sc := telemetry.NewScanner(src)
		sc.Name = path
		return sc
	}
	l, err := export.Survey(open())
	if err != nil {
		t.Fatalf("survey %s: %v", path, err)
	}
	var out bytes.Buffer
	res, err := export.Write(&out, open(), l, opts)
	if err != nil {
		t.Fatalf("write %s: %v", path, err)
	}
	return out.Bytes(), l, res
}

// exportString runs both passes over in-memory telemetry.
func exportString(t testing.TB, text string, opts export.Options) ([]byte, *export.Layout) {
	t.Helper()
	l, err := export.Survey(telemetry.NewScanner(strings.NewReader(text)))
	if err != nil {
		t.Fatalf("survey: %v", err)
	}
	var out bytes.Buffer
	if _, err := export.Write(&out, telemetry.NewScanner(strings.NewReader(text)), l, opts); err != nil {
		t.Fatalf("write: %v", err)
	}
	return out.Bytes(), l
}

// readTable reads an export back with encoding/csv; every row must have the header's
// width.
func readTable(t testing.TB, b []byte, tsv bool) (header []string, rows [][]string) {
	t.Helper()
	r := csv.NewReader(bytes.NewReader(b))
	if tsv {
		r.Comma = '\t'
	}
	all, err := r.ReadAll()
	if err != nil {
		t.Fatalf("encoding/csv cannot read the export back: %v", err)
	}
	if len(all) == 0 {
		t.Fatal("empty export")
	}
	return all[0], all[1:]
}

// sampleAt is what an independent pass over the input says about one sample.
type sampleAt struct {
	s      telemetry.Sample
	meta   telemetry.Meta
	extras map[string]float64
}

func readSamples(t testing.TB, path string) []sampleAt {
	t.Helper()
	src, err := telemetry.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	sc := telemetry.NewScanner(src)
	var out []sampleAt
	for sc.Scan() {
		if sc.Kind() != telemetry.RecSample {
			continue
		}
		a := sampleAt{s: sc.Sample(), meta: sc.Meta()}
		if ex := sc.Extras(); len(ex) > 0 {
			a.extras = map[string]float64{}
			for _, e := range ex {
				a.extras[e.Name] = e.Value
			}
		}
		out = append(out, a)
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// captures returns every capture in the repository's testdata (plain telemetry,
// caploop captures and gzip files), plus a gzip copy of one made here, since the
// folder holds none.
func captures(t *testing.T) []string {
	t.Helper()
	var files []string
	for _, pat := range []string{"*.txt", "*.cap", "*.gz"} {
		m, err := filepath.Glob(filepath.Join("..", "..", "testdata", pat))
		if err != nil {
			t.Fatal(err)
		}
		files = append(files, m...)
	}
	if len(files) < 8 {
		t.Fatalf("found only %d testdata captures: %v", len(files), files)
	}
	raw, err := os.ReadFile(filepath.Join("..", "..", "testdata", "tuned.cap"))
	if err != nil {
		t.Fatal(err)
	}
	var z bytes.Buffer
	zw := gzip.NewWriter(&z)
	zw.Write(raw)
	zw.Close()
	gz := filepath.Join(t.TempDir(), "tuned.cap.gz")
	if err := os.WriteFile(gz, z.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return append(files, gz)
}

func num(t testing.TB, cell, what string, row int) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(cell, 64)
	if err != nil {
		t.Fatalf("row %d: %s %q is not a number", row, what, cell)
	}
	return v
}

// voltsTol is half the last decimal the export writes for an ADC step of lsb volts
// (6 decimals down to 12 for fine converters), plus float slack.
func voltsTol(lsb float64) float64 {
	d := 6
	for d < 12 && math.Pow(10, -float64(d)) > lsb/10 {
		d++
	}
	return 0.5*math.Pow(10, -float64(d)) + 1e-12
}

// checkRoundTrip reads an export back and compares every cell with an independent pass
// over the input.
func checkRoundTrip(t *testing.T, path string, tsv bool) {
	out, l, res := exportFile(t, path, export.Options{TSV: tsv})
	want := readSamples(t, path)
	header, rows := readTable(t, out, tsv)
	if len(rows) != len(want) || res.Rows != int64(len(want)) {
		t.Fatalf("%d rows (Result.Rows %d), want %d samples", len(rows), res.Rows, len(want))
	}
	if !slices.Equal(header, l.Columns()) {
		t.Fatalf("header %q, want %q", header, l.Columns())
	}
	col := map[string]int{}
	for i, h := range header {
		col[h] = i
	}
	for _, need := range []string{"board_time_s", "sp_counts", "sp_v", "pv_counts", "pv_v", "drive", "segment", "deadband_counts", "deadband_v"} {
		if _, ok := col[need]; !ok {
			t.Fatalf("no column %s in %q", need, header)
		}
	}
	seg, prevTime := -1.0, -1.0
	var segSP, segDB float64
	var perUS []int64
	for i, row := range rows {
		w := want[i]
		s, lsb := w.s, w.meta.LSB()
		if got := num(t, row[col["sp_counts"]], "sp_counts", i); got != s.SP {
			t.Fatalf("row %d: sp_counts %v, want %v", i, got, s.SP)
		}
		if got := num(t, row[col["pv_counts"]], "pv_counts", i); got != s.PV {
			t.Fatalf("row %d: pv_counts %v, want %v", i, got, s.PV)
		}
		for _, c := range []struct {
			name   string
			counts float64
		}{{"sp_v", s.SP}, {"pv_v", s.PV}} {
			cell := row[col[c.name]]
			if math.IsNaN(lsb) {
				if cell != "" {
					t.Fatalf("row %d: %s %q without vref and adc_bits", i, c.name, cell)
				}
				continue
			}
			if got := num(t, cell, c.name, i); math.Abs(got-c.counts*lsb) > voltsTol(lsb) {
				t.Fatalf("row %d: %s %v, want %v within %g", i, c.name, got, c.counts*lsb, voltsTol(lsb))
			}
		}
		wantDrive := ""
		if s.Has(telemetry.HasU) {
			wantDrive = strconv.Itoa(int(s.U))
		}
		if got := row[col["drive"]]; got != wantDrive {
			t.Fatalf("row %d: drive %q, want %q", i, got, wantDrive)
		}
		if k, ok := col["n"]; ok && s.Has(telemetry.HasN) {
			if got := row[k]; got != strconv.FormatInt(s.N, 10) {
				t.Fatalf("row %d: n %q, want %d", i, got, s.N)
			}
		}
		if k, ok := col["host_time_s"]; ok && s.Has(telemetry.HasHost) {
			if got := num(t, row[k], "host_time_s", i); math.Abs(got-float64(s.Host)*1e-9) > 1e-6 {
				t.Fatalf("row %d: host_time_s %v, want %v", i, got, float64(s.Host)*1e-9)
			}
		}
		// The deadband in force and the segment rule of the summary.
		db, dbKnown := 0.0, w.meta.Mode == telemetry.TwoState
		if !dbKnown && w.meta.Has(telemetry.FieldDeadband) {
			db, dbKnown = w.meta.Deadband, true
		}
		if got := row[col["deadband_counts"]]; !dbKnown && got != "" || dbKnown && num(t, got, "deadband_counts", i) != db {
			t.Fatalf("row %d: deadband_counts %q, want %v (known %v)", i, got, db, dbKnown)
		}
		// A new segment at least at every change of setpoint or deadband, one at a
		// time; the events that also split one are the summary's (TestAgreesWithSummary).
		got := num(t, row[col["segment"]], "segment", i)
		switch {
		case i == 0 && got != 0:
			t.Fatalf("row 0: segment %v, want 0", got)
		case i > 0 && (s.SP != segSP || db != segDB) && got != seg+1:
			t.Fatalf("row %d: segment %v after a new setpoint or deadband, want %v", i, got, seg+1)
		case i > 0 && got != seg && got != seg+1:
			t.Fatalf("row %d: segment %v after %v", i, got, seg)
		}
		seg, segSP, segDB = got, s.SP, db
		// Board time: 0 at the first sample, never going back, and between two samples
		// with t it moves by exactly their interval when that is not a reset.
		tm := num(t, row[col["board_time_s"]], "board_time_s", i)
		if i == 0 && tm != 0 || tm < prevTime {
			t.Fatalf("row %d: board_time_s %v after %v", i, tm, prevTime)
		}
		if i > 0 && s.Has(telemetry.HasT) && want[i-1].s.Has(telemetry.HasT) {
			dt := s.T - want[i-1].s.T
			if dt > 0 {
				perUS = append(perUS, dt)
			}
			if dt > 0 && dt < 1000*medianOf(perUS) {
				if math.Abs((tm-prevTime)-float64(dt)*1e-6) > 1e-9 {
					t.Fatalf("row %d: board time moved %v s, t moved %d µs", i, tm-prevTime, dt)
				}
			}
		}
		prevTime = tm
		for _, name := range l.Extras {
			k := col[name]
			v, ok := w.extras[name]
			if got := row[k]; !ok && got != "" || ok && num(t, got, name, i) != v {
				t.Fatalf("row %d: %s %q, want %v (present %v)", i, name, got, v, ok)
			}
		}
	}
}

func medianOf(v []int64) int64 {
	w := slices.Clone(v[:min(len(v), 31)])
	slices.Sort(w)
	return w[len(w)/2]
}

// TestRoundTripTestdata is the acceptance check: every testdata capture exported as CSV
// reads back with encoding/csv to the same samples, values within the volts rounding.
func TestRoundTripTestdata(t *testing.T) {
	t.Parallel()
	for _, path := range captures(t) {
		t.Run(filepath.Base(path), func(t *testing.T) {
			t.Parallel()
			checkRoundTrip(t, path, false)
		})
	}
}

func TestRoundTripTSV(t *testing.T) {
	t.Parallel()
	checkRoundTrip(t, filepath.Join("..", "..", "testdata", "tuned.cap"), true)
	checkRoundTrip(t, filepath.Join("..", "..", "testdata", "dirty-stream.txt"), true)
}

// TestLineEnds: CSV rows end in CRLF (RFC 4180, section 2.1), TSV rows in LF.
func TestLineEnds(t *testing.T) {
	in := "# vref=5 adc_bits=10\nt=0 sp=512 pv=500 u=1\nt=1000 sp=512 pv=510 u=0\n"
	c, _ := exportString(t, in, export.Options{})
	if n, m := bytes.Count(c, []byte("\r\n")), bytes.Count(c, []byte("\n")); n != 3 || m != 3 {
		t.Errorf("CSV has %d CRLF and %d LF, want 3 and 3:\n%q", n, m, c)
	}
	want := "board_time_s,sp_counts,sp_v,pv_counts,pv_v,drive,segment,deadband_counts,deadband_v\r\n" +
		"0.000000,512,2.500000,500,2.441406,1,0,,\r\n" +
		"0.001000,512,2.500000,510,2.490234,0,0,,\r\n"
	if string(c) != want {
		t.Errorf("CSV:\n%s\nwant\n%s", c, want)
	}
	tsv, _ := exportString(t, in, export.Options{TSV: true})
	if bytes.Contains(tsv, []byte("\r")) || bytes.Count(tsv, []byte("\n")) != 3 || bytes.Count(tsv, []byte("\t")) != 24 {
		t.Errorf("TSV:\n%q", tsv)
	}
}

// TestExtras: channels found in the first pass, in first-seen order, empty where a line
// lacks them; a name that clashes with a fixed column gets a suffix.
func TestExtras(t *testing.T) {
	in := strings.Join([]string{
		"# vref=3.3 adc_bits=12 mode=two-state",
		"t=0 sp=2048 pv=2000 u=1 temp_c=21.5",
		"t=500 sp=2048 pv=2010 u=1",
		"t=1000 sp=2048 pv=2030 u=-1 segment=7 temp_c=21.25",
		"t=1500 sp=1024 pv=2040 u=-1 hum=0.000001",
		"",
	}, "\n")
	out, l := exportString(t, in, export.Options{})
	header, rows := readTable(t, out, false)
	if !slices.Equal(l.Extras, []string{"temp_c", "segment", "hum"}) {
		t.Fatalf("extras %q", l.Extras)
	}
	wantHeader := []string{"board_time_s", "sp_counts", "sp_v", "pv_counts", "pv_v", "drive", "segment",
		"deadband_counts", "deadband_v", "temp_c", "segment_2", "hum"}
	if !slices.Equal(header, wantHeader) {
		t.Fatalf("header %q, want %q", header, wantHeader)
	}
	want := [][]string{
		{"0.000000", "2048", "1.650000", "2000", "1.611328", "1", "0", "0", "0.000000", "21.5", "", ""},
		{"0.000500", "2048", "1.650000", "2010", "1.619385", "1", "0", "0", "0.000000", "", "", ""},
		{"0.001000", "2048", "1.650000", "2030", "1.635498", "-1", "0", "0", "0.000000", "21.25", "7", ""},
		{"0.001500", "1024", "0.825000", "2040", "1.643555", "-1", "1", "0", "0.000000", "", "", "0.000001"},
	}
	for i := range want {
		if !slices.Equal(rows[i], want[i]) {
			t.Errorf("row %d: %q\nwant   %q", i, rows[i], want[i])
		}
	}
}

// TestNumericTable: a CSV table with a column header reads the same way, extras included.
func TestNumericTable(t *testing.T) {
	in := "# vref=5 adc_bits=10 period_us=2000 mode=three-state deadband=4\nn,sp,pv,u,load_ma\n0,512,0,1,0.5\n1,512,20.5,1,0.75\n3,512,61,1,1\n"
	out, _ := exportString(t, in, export.Options{})
	header, rows := readTable(t, out, false)
	if want := []string{"board_time_s", "n", "sp_counts", "sp_v", "pv_counts", "pv_v", "drive", "segment", "deadband_counts", "deadband_v", "load_ma"}; !slices.Equal(header, want) {
		t.Fatalf("header %q, want %q", header, want)
	}
	// Without t the time axis is n times the sample period: n = 0, 1, 3 at 2 ms.
	for i, w := range []string{"0.000000000", "0.002000000", "0.006000000"} {
		if rows[i][0] != w {
			t.Errorf("row %d: board_time_s %q, want %q", i, rows[i][0], w)
		}
	}
	if rows[1][4] != "20.5" || rows[1][5] != "0.100098" || rows[1][8] != "4" || rows[1][9] != "0.019531" || rows[1][10] != "0.75" {
		t.Errorf("row 1: %q", rows[1])
	}
}

// TestResetAndWrap: a 2^32 wrap of t continues the axis; a reset (t goes back) starts a
// new origin one median period after the last sample, as the summary's clock does; a new
// deadband on the same setpoint opens a segment, and so does the reset.
func TestResetAndWrap(t *testing.T) {
	in := strings.Join([]string{
		"# vref=5 adc_bits=10 mode=three-state deadband=3",
		"t=4294966296 sp=100 pv=90 u=1",
		"t=4294967000 sp=100 pv=95 u=1", // 704 µs
		"t=296 sp=100 pv=99 u=0",        // wrapped: 592 µs
		"t=1296 sp=100 pv=99 u=0",       // 1000 µs
		"# deadband=5",
		"t=2296 sp=100 pv=98 u=0",
		"t=50 sp=100 pv=0 u=1", // reset: one period (median 1000) after the last
		"t=1050 sp=100 pv=20 u=1",
		"",
	}, "\n")
	out, _ := exportString(t, in, export.Options{})
	_, rows := readTable(t, out, false)
	wantT := []string{"0.000000", "0.000704", "0.001296", "0.002296", "0.003296", "0.004296", "0.005296"}
	wantSeg := []string{"0", "0", "0", "0", "1", "2", "2"} // the reset opens one too
	for i := range wantT {
		if rows[i][0] != wantT[i] || rows[i][6] != wantSeg[i] {
			t.Errorf("row %d: time %q segment %q, want %q and %q", i, rows[i][0], rows[i][6], wantT[i], wantSeg[i])
		}
	}
	if rows[4][7] != "5" || rows[3][7] != "3" {
		t.Errorf("deadband cells %q then %q, want 3 then 5", rows[3][7], rows[4][7])
	}
}

// TestInputChanged: a file that grows between the passes gives the surveyed rows and
// counts the rest; one that shrinks is an error.
func TestInputChanged(t *testing.T) {
	short := "sp=1 pv=2\nsp=1 pv=3\n"
	long := short + "sp=1 pv=4 x=1\n"
	l, err := export.Survey(telemetry.NewScanner(strings.NewReader(short)))
	if err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	res, err := export.Write(&out, telemetry.NewScanner(strings.NewReader(long)), l, export.Options{})
	if err != nil || res.Rows != 2 || res.Beyond != 1 {
		t.Errorf("grown input: %+v, %v; want 2 rows and 1 beyond", res, err)
	}
	l, _ = export.Survey(telemetry.NewScanner(strings.NewReader(long)))
	if _, err := export.Write(io.Discard, telemetry.NewScanner(strings.NewReader(short)), l, export.Options{}); err == nil {
		t.Error("shrunk input: no error")
	}
	if _, err := export.Survey(telemetry.NewScanner(strings.NewReader("# only a comment\n"))); err != export.ErrNoSamples {
		t.Errorf("no samples: %v, want ErrNoSamples", err)
	}
}

// TestHeaderQuoting: header cells follow encoding/csv's RFC 4180 quoting, so a channel
// name with a comma, a quote or a leading space reads back as the same single cell.
func TestHeaderQuoting(t *testing.T) {
	l := &export.Layout{Samples: 1, Extras: []string{"x,y", `q"z`, " lead", "=1+1"}}
	var out bytes.Buffer
	if _, err := export.Write(&out, telemetry.NewScanner(strings.NewReader("sp=1 pv=2\n")), l, export.Options{}); err != nil {
		t.Fatal(err)
	}
	header, rows := readTable(t, out.Bytes(), false)
	if !slices.Equal(header, l.Columns()) || len(rows) != 1 || len(rows[0]) != len(header) {
		t.Fatalf("header %q rows %q, want header %q", header, rows, l.Columns())
	}
	if got := header[len(header)-4:]; !slices.Equal(got, []string{"x,y", `q"z`, " lead", "'=1+1"}) {
		t.Errorf("extra headers %q", got)
	}
	if !strings.Contains(out.String(), `"x,y","q""z"," lead"`) {
		t.Errorf("header line not quoted as RFC 4180 asks: %q", strings.SplitN(out.String(), "\r\n", 2)[0])
	}
}
