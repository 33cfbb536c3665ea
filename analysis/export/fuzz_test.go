package export_test

import (
	"bytes"
	"encoding/csv"
	"strings"
	"testing"

	"github.com/caploop/caploop/analysis/export"
	"github.com/caploop/caploop/telemetry"
)

// FuzzExport: whatever the input, the export never panics and reads back with
// encoding/csv as one row per sample, every row as wide as the header.
func FuzzExport(f *testing.F) {
	for _, s := range []string{
		"# vref=5 adc_bits=10 mode=three-state deadband=9\nt=0 sp=512 pv=500 u=1\nt=1000 sp=512 pv=510 u=0 temp_c=21.5\n",
		"t,sp,pv,u,x\n0,1,2,1,3.25\n5,1,2.5,-1,1e300\n",
		"#caploop-capture v1 start=2026-03-01T09:00:00Z\n0.001000 < sp=1 pv=2\n0.002000 ! unplugged\n0.003000 < sp=1 pv=-2.5 u=-\n",
		"sp=1 pv=2 a=1\nsp=1 pv=2 b=2\nsp=1 pv=2 a=3 b=4\n\x00\x1b[31m garbage\n",
		"t=4294967295 sp=0 pv=0\nt=3 sp=0 pv=0\nt=1 sp=0 pv=0\n",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, in string) {
		l, err := export.Survey(telemetry.NewScanner(strings.NewReader(in)))
		if err == export.ErrNoSamples {
			return
		}
		if err != nil {
			t.Fatal(err)
		}
		for _, tsv := range []bool{false, true} {
			var out bytes.Buffer
			res, err := export.Write(&out, telemetry.NewScanner(strings.NewReader(in)), l, export.Options{TSV: tsv})
			if err != nil || res.Rows != l.Samples {
				t.Fatalf("write: %+v, %v; want %d rows", res, err, l.Samples)
			}
			r := csv.NewReader(&out)
			if tsv {
				r.Comma = '\t'
			}
			rows, err := r.ReadAll()
			if err != nil || int64(len(rows)) != l.Samples+1 {
				t.Fatalf("read back: %d rows, %v; want %d and a header", len(rows), err, l.Samples)
			}
		}
	})
}
